/**
 * Large gzip files are inflated on a worker thread (src/image/inflate.ts): the same voxels as
 * the synchronous reader, and the same refusals (NIfTI-1 header rules; gzip per RFC 1952).
 */
import { readFileSync, writeFileSync } from "node:fs";
import { join } from "node:path";
import { gzipSync } from "node:zlib";
import { describe, expect, it } from "vitest";
import { CoxaError } from "../../src/common/errors.js";
import { gzipMembers } from "../../src/common/gzip.js";
import { Rng } from "../../src/common/random.js";
import { scaling } from "../../src/geometry/mat4.js";
import { readNifti, readNiftiAsync } from "../../src/image/nifti-read.js";
import { encodeNifti } from "../../src/image/nifti-write.js";
import { Volume } from "../../src/image/volume.js";
import { tempDir } from "../helpers/tmp.js";

const dir = tempDir("coxa-inflate-");

/** A NIfTI of noise that gzip cannot shrink much: well above the 4 MiB worker threshold. */
function noisyFile(): { path: string; volume: Volume } {
  const dims: [number, number, number] = [160, 128, 120];
  const rng = new Rng(11);
  const data = new Int16Array(dims[0] * dims[1] * dims[2]);
  for (let q = 0; q < data.length; q++) data[q] = Math.floor(rng.uniform() * 65536) - 32768;
  const volume = new Volume(dims, data, scaling(0.8, 0.8, 1.5));
  const path = join(dir, "noise.nii.gz");
  writeFileSync(path, gzipSync(encodeNifti(volume, { datatype: "int16" }), { level: 1 }));
  return { path, volume };
}

async function refusal(path: string): Promise<CoxaError> {
  try {
    await readNiftiAsync(path);
  } catch (err) {
    return err as CoxaError;
  }
  throw new Error(`${path} was not refused`);
}

describe("readNiftiAsync on a large gzip file (worker-thread inflation)", () => {
  const { path, volume } = noisyFile();

  it("is large enough to take the worker path", () => {
    expect(readFileSync(path).length).toBeGreaterThan(4 << 20);
  });

  it("gives exactly the voxels of the synchronous reader and of the volume written", async () => {
    const a = await readNiftiAsync(path);
    const b = readNifti(path);
    expect(a.volume.dims).toEqual([160, 128, 120]);
    expect(a.volume.data).toBeInstanceOf(Int16Array);
    let differ = 0;
    for (let q = 0; q < volume.count; q++)
      if (a.volume.data[q] !== volume.data[q] || b.volume.data[q] !== volume.data[q]) differ++;
    expect(differ).toBe(0);
    expect(Array.from(a.volume.indexToWorld)).toEqual(Array.from(b.volume.indexToWorld));
  });

  it("reads a file of several gzip members (RFC 1952, section 2.2) to the same voxels", async () => {
    // The writer's parallel members, cut small here so that the file has many (1 MiB each).
    const members = await gzipMembers(encodeNifti(volume, { datatype: "int16" }), 1, 1 << 20);
    expect(members.length).toBe(5);
    const multi = join(dir, "multi.nii.gz");
    writeFileSync(multi, Buffer.concat(members));
    expect(readFileSync(multi).length).toBeGreaterThan(4 << 20);
    const a = await readNiftiAsync(multi);
    expect(a.volume.count).toBe(volume.count);
    let differ = 0;
    for (let q = 0; q < volume.count; q++) if (a.volume.data[q] !== volume.data[q]) differ++;
    expect(differ).toBe(0);
    // The worker's clock: inflation ended before the main thread resolved the read.
    expect(a.readyAtMs).toBeLessThanOrEqual(performance.timeOrigin + performance.now());
  });

  it("refuses a truncated stream with TRUNCATED, naming the file", async () => {
    const cut = join(dir, "cut.nii.gz");
    const bytes = readFileSync(path);
    writeFileSync(cut, bytes.subarray(0, Math.floor(bytes.length * 0.8)));
    const err = await refusal(cut);
    expect(err).toBeInstanceOf(CoxaError);
    expect(err.code).toBe("TRUNCATED");
    expect(err.message).toContain(cut);
  });

  it("refuses a stream holding more than the header declares with GZIP_BOMB", async () => {
    // The header of a 16x16x16 image followed by the noise file's 4.9 MB of voxels.
    const small = encodeNifti(new Volume([16, 16, 16], new Int16Array(4096), scaling(1, 1, 1)), {
      datatype: "int16",
    });
    const big = encodeNifti(volume, { datatype: "int16" });
    const body = new Uint8Array(big.length);
    body.set(big);
    body.set(small.subarray(0, 352));
    const bomb = join(dir, "bomb.nii.gz");
    writeFileSync(bomb, gzipSync(body, { level: 1 }));
    expect(readFileSync(bomb).length).toBeGreaterThan(4 << 20);
    const err = await refusal(bomb);
    expect(err.code).toBe("GZIP_BOMB");
    expect(err.message).toMatch(/refusing/);
  });
});
