/**
 * Parallel gzip (src/common/gzip.ts) and the NIfTI writer's no-copy path that feeds it: the
 * members form one gzip stream (RFC 1952, section 2.2: a gzip file is a series of members), read
 * back by zlib's own gunzip; pieces give the members of the same bytes in one buffer.
 */
import { readFileSync } from "node:fs";
import { join } from "node:path";
import { gunzipSync } from "node:zlib";
import { describe, expect, it } from "vitest";
import { gzipMembers } from "../../src/common/gzip.js";
import { Rng } from "../../src/common/random.js";
import { scaling } from "../../src/geometry/mat4.js";
import { readNifti } from "../../src/image/nifti-read.js";
import { encodeNifti, encodeNiftiParts, writeNiftiAsync } from "../../src/image/nifti-write.js";
import { Volume } from "../../src/image/volume.js";
import { tempDir } from "../helpers/tmp.js";

const dir = tempDir("coxa-gzip-");

function bytes(n: number, seed: number): Uint8Array {
  const rng = new Rng(seed);
  const out = new Uint8Array(n);
  // Compressible but not constant: runs of a few values.
  for (let i = 0; i < n; i++) out[i] = Math.floor(rng.uniform() * 4) * 17;
  return out;
}

describe("gzipMembers", () => {
  it("inflates (zlib gunzip, multi-member per RFC 1952) to the input, one member per chunk", async () => {
    const data = bytes(10_000, 1);
    const members = await gzipMembers(data, 1, 3000);
    expect(members.length).toBe(4);
    expect(Buffer.compare(gunzipSync(Buffer.concat(members)), Buffer.from(data))).toBe(0);
  });

  it("gives the same members for pieces as for the same bytes in one buffer (chunks across piece ends)", async () => {
    const data = bytes(10_000, 2);
    const whole = await gzipMembers(data, 1, 3000);
    // Piece ends at 352 (a header), 2999/3000/3001 (around a chunk end) and an empty piece.
    const cuts = [0, 352, 2999, 3000, 3001, 3001, 7000, 10_000];
    const pieces = cuts.slice(1).map((end, i) => data.subarray(cuts[i], end));
    const split = await gzipMembers(pieces, 1, 3000);
    expect(split.length).toBe(whole.length);
    for (let m = 0; m < whole.length; m++) expect(Buffer.compare(split[m], whole[m])).toBe(0);
  });

  it("writes one empty member for no bytes", async () => {
    const members = await gzipMembers([], 1, 3000);
    expect(members.length).toBe(1);
    expect(gunzipSync(members[0]).length).toBe(0);
  });
});

describe("encodeNiftiParts (voxels written from the volume's own memory)", () => {
  const dims: [number, number, number] = [7, 5, 4];
  const data = new Int16Array(140);
  for (let q = 0; q < data.length; q++) data[q] = q * 233 - 16000;
  const volume = new Volume(dims, data, scaling(0.8, 0.8, 1.5));

  it("is the header plus a view of the voxels when the datatype is the volume's own", () => {
    const parts = encodeNiftiParts(volume, { datatype: "int16" });
    expect(parts.length).toBe(2);
    expect(parts[0].length).toBe(352); // NIfTI-1: 348-byte header + 4 extension bytes
    expect(parts[1].buffer).toBe(data.buffer);
    expect(
      Buffer.compare(Buffer.concat(parts), Buffer.from(encodeNifti(volume, { datatype: "int16" }))),
    ).toBe(0);
  });

  it("converts (one buffer) when the datatype differs or the data are scaled", () => {
    expect(encodeNiftiParts(volume, { datatype: "float32" }).length).toBe(1);
    expect(encodeNiftiParts(volume, { datatype: "int16", sclSlope: 2 }).length).toBe(1);
  });

  it("writeNiftiAsync's multi-member .nii.gz reads back as the volume (NIfTI-1, RFC 1952)", async () => {
    const path = join(dir, "parts.nii.gz");
    await writeNiftiAsync(path, volume, { datatype: "int16", gzipLevel: 1 });
    const back = readNifti(path);
    expect(Array.from(back.volume.data)).toEqual(Array.from(data));
    expect(gunzipSync(readFileSync(path)).length).toBe(352 + 2 * 140);
  });
});
