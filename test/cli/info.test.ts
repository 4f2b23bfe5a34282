/** `coxa info`: in-process runs (commander exitOverride) and one real subprocess of the binary. */
import { execFileSync, spawnSync } from "node:child_process";
import { writeFileSync } from "node:fs";
import { join } from "node:path";
import { describe, expect, it } from "vitest";
import { scaling } from "../../src/geometry/mat4.js";
import { writeNifti } from "../../src/image/nifti-write.js";
import { Volume } from "../../src/image/volume.js";
import { runCoxa } from "../helpers/cli.js";
import { tempDir } from "../helpers/tmp.js";

const FIX = join(import.meta.dirname, "..", "fixtures", "nifti");
const BIN = join(import.meta.dirname, "..", "..", "dist", "cli", "main.js");
const dir = tempDir();

/** A CT-like int16 image: air -1000 around a water/muscle block with 37 metal voxels of 3000 HU. */
function writeCtLike(path: string): number {
  const [nx, ny, nz] = [20, 20, 10];
  const data = new Int16Array(nx * ny * nz).fill(-1000);
  let metal = 0;
  for (let k = 2; k < 8; k++)
    for (let j = 4; j < 16; j++)
      for (let i = 4; i < 16; i++) {
        const idx = i + nx * (j + ny * k);
        data[idx] = (i + j) % 2 ? 40 : -90;
        if (i >= 9 && i < 12 && j >= 9 && j < 12 && k >= 4 && k < 8 && metal < 37) {
          data[idx] = 3000;
          metal++;
        }
      }
  data[0] = 2499; // just below the default threshold: not metal
  writeNifti(path, new Volume([nx, ny, nz], data, scaling(0.8, 0.8, 1.5)), { datatype: "int16" });
  return metal;
}

describe("coxa info", () => {
  it("--json reports shape, spacing, affine, orientation, datatype and intensities (example4d vs nibabel)", async () => {
    const r = await runCoxa(["info", join(FIX, "example4d.nii.gz"), "--json"]);
    expect(r.code).toBe(0);
    expect(r.stderr).toBe("");
    const d = JSON.parse(r.stdout);
    // nibabel 5.0.0: shape (128, 96, 24, 2), int16 (test/fixtures/nifti/reference.json).
    expect(d.shape).toEqual([128, 96, 24, 2]);
    expect(d.datatype).toBe("int16");
    expect(d.orientation).toBe("LAS");
    expect(d.index_to_world).toHaveLength(4);
    expect(d.spacing_mm[0]).toBeCloseTo(2, 5);
    expect(d.spacing_mm[2]).toBeCloseTo(2.2, 5);
    for (const key of ["min", "max", "mean"]) expect(typeof d[key]).toBe("number");
    expect(d.min).toBeLessThanOrEqual(d.mean);
    expect(d.metal_voxels).toBeUndefined(); // MR-like: no HU metal count
  });

  it("counts metal voxels (>= 2500 HU) of a CT-like image and honours --metal-hu", async () => {
    const path = join(dir, "ct.nii.gz");
    const planted = writeCtLike(path);
    const r = await runCoxa(["info", path, "--json"]);
    expect(r.code).toBe(0);
    const d = JSON.parse(r.stdout);
    expect(d.modality).toBe("ct");
    expect(d.metal_voxels).toBe(planted);
    const lower = JSON.parse((await runCoxa(["info", path, "--json", "--metal-hu", "2499"])).stdout);
    expect(lower.metal_voxels).toBe(planted + 1);
  });

  it("bad input: exit 2 and one line naming the file", async () => {
    const missing = join(dir, "missing.nii.gz");
    const r = await runCoxa(["info", missing]);
    expect(r.code).toBe(2);
    expect(r.stderr.trim().split("\n")).toHaveLength(1);
    expect(r.stderr).toContain(missing);
    const junk = join(dir, "junk.nii");
    writeFileSync(junk, Buffer.alloc(400, 7));
    const j = await runCoxa(["info", junk]);
    expect(j.code).toBe(2);
    expect(j.stderr).toMatch(/junk\.nii: not a NIfTI file/);
  });

  it("bad option values: exit 2 (validating parsers)", async () => {
    expect((await runCoxa(["info", join(FIX, "anatomical.nii"), "--volume", "1x"])).code).toBe(2);
    expect((await runCoxa(["info", join(FIX, "anatomical.nii"), "--metal-hu", "12abc"])).code).toBe(2);
    expect((await runCoxa(["info"])).code).toBe(2);
    expect((await runCoxa(["frobnicate"])).code).toBe(2);
  });

  it("--help exits 0 and ends with an example", async () => {
    const r = await runCoxa(["info", "--help"]);
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(/Example:\n\s+coxa info /);
  });

  it("the built binary runs as a subprocess with the same exit codes", () => {
    const out = execFileSync(process.execPath, [BIN, "info", join(FIX, "anatomical.nii"), "--json"], {
      encoding: "utf8",
    });
    expect(JSON.parse(out).shape).toEqual([33, 41, 25]);
    const bad = spawnSync(process.execPath, [BIN, "info", join(dir, "none.nii")], { encoding: "utf8" });
    expect(bad.status).toBe(2);
    expect(bad.stderr).toMatch(/none\.nii: file does not exist/);
  });
});
