/**
 * exportPair on small synthetic pairs with closed-form content (test/export/pair-fixture.ts):
 * the MR is linear in world mm, so trilinear resampling through the known transform gives
 * f(T(x)) exactly (up to float32); CT, metal and body are planted boxes. The .npy files are
 * parsed here by the layout of NumPy's documented format 1.0 (the system suite loads them in
 * NumPy itself).
 */
import { existsSync, readdirSync, readFileSync, writeFileSync } from "node:fs";
import { join } from "node:path";
import { describe, expect, it } from "vitest";
import { parseCsv } from "../../src/common/csv.js";
import { sha256File } from "../../src/common/hash.js";
import { exportPair } from "../../src/export/pair.js";
import { transformPoint } from "../../src/geometry/mat4.js";
import { transformHash } from "../../src/geometry/transform-file.js";
import { readNifti } from "../../src/image/nifti-read.js";
import { writeNifti } from "../../src/image/nifti-write.js";
import { Volume } from "../../src/image/volume.js";
import { runCoxa } from "../helpers/cli.js";
import { tempDir } from "../helpers/tmp.js";
import { mrValueAt, type SyntheticPair, writeSyntheticPair } from "./pair-fixture.js";

const root = tempDir("coxa-pair-");

/** Parse a .npy file by the documented layout: magic, version, uint16 LE header length, dict, data. */
function readNpy(path: string): { shape: number[]; descr: string; data: Float32Array } {
  const bytes = readFileSync(path);
  expect([...bytes.subarray(0, 8)]).toEqual([0x93, 0x4e, 0x55, 0x4d, 0x50, 0x59, 1, 0]);
  const headerLen = bytes.readUInt16LE(8);
  const header = bytes.subarray(10, 10 + headerLen).toString("latin1");
  const shape = /'shape': \(([^)]*)\)/
    .exec(header)![1]
    .split(",")
    .filter((s) => s.trim() !== "")
    .map(Number);
  const descr = /'descr': '([^']+)'/.exec(header)![1];
  const start = 10 + headerLen;
  const data = new Float32Array(
    bytes.buffer.slice(bytes.byteOffset + start, bytes.byteOffset + bytes.length),
  );
  return { shape, descr, data };
}

/**
 * Expected MR channel value at CT voxel (i, j, k): the linear MR function at T(x), with the
 * index clamped to the outer voxel centres inside the half-voxel rim of the MR box (the
 * resampler's edge rule, src/resample/slab.ts), and 0 outside the box [-0.5, n - 0.5].
 */
function expectedMr(pair: SyntheticPair, i: number, j: number, k: number): number {
  const x = transformPoint([0, 0, 0], pair.ct.indexToWorld, i, j, k);
  const y = transformPoint([0, 0, 0], pair.fixedToMoving, x[0], x[1], x[2]);
  const idx = transformPoint([0, 0, 0], pair.mr.worldToIndex, y[0], y[1], y[2]);
  for (let a = 0; a < 3; a++) {
    if (idx[a] < -0.5 || idx[a] > pair.mr.dims[a] - 0.5) return 0;
    idx[a] = Math.min(pair.mr.dims[a] - 1, Math.max(0, idx[a]));
  }
  const w = transformPoint([0, 0, 0], pair.mr.indexToWorld, idx[0], idx[1], idx[2]);
  return mrValueAt(w[0], w[1], w[2]);
}

describe("exportPair", () => {
  it("writes the 4-D CT+MR NIfTI on the CT grid, the undilated metal mask and pair.json (closed form)", async () => {
    const pair = await writeSyntheticPair(join(root, "a"));
    const out = join(root, "a-out");
    const result = await exportPair({
      fixed: pair.ctPath,
      moving: pair.mrPath,
      transform: pair.transformPath,
      out,
      threads: 1,
    });
    const [nx, ny, nz] = pair.ct.dims;
    const ch0 = readNifti(join(out, "pair.nii.gz"), { volume: 0 }).volume;
    const ch1 = readNifti(join(out, "pair.nii.gz"), { volume: 1 }).volume;
    expect(ch0.dims).toEqual(pair.ct.dims);
    expect(Array.from(ch0.indexToWorld)).toEqual(Array.from(pair.ct.indexToWorld));
    for (let q = 0; q < ch0.count; q++) {
      if (ch0.data[q] !== pair.ct.data[q])
        expect.fail(`CT channel voxel ${q}: ${ch0.data[q]} vs ${pair.ct.data[q]}`);
    }
    let worst = 0;
    for (let k = 0; k < nz; k++)
      for (let j = 0; j < ny; j++)
        for (let i = 0; i < nx; i++) {
          worst = Math.max(worst, Math.abs(ch1.data[i + nx * (j + ny * k)] - expectedMr(pair, i, j, k)));
        }
    expect(worst).toBeLessThan(2e-3); // float32 rounding of values ~ 400
    const metal = readNifti(join(out, "metal.nii.gz")).volume;
    expect(metal.datatype).toBe("uint8");
    const on: number[] = [];
    for (let q = 0; q < metal.count; q++) if (metal.data[q] === 1) on.push(q);
    expect(on).toEqual(pair.metal); // no margin: exactly the planted >= 2500 HU voxels

    const s = result.sidecar;
    expect(JSON.parse(readFileSync(join(out, "pair.json"), "utf8"))).toEqual(JSON.parse(JSON.stringify(s)));
    expect(s.channels.map((c) => [c.name, c.file, c.volume])).toEqual([
      ["ct", "pair.nii.gz", 0],
      ["mr", "pair.nii.gz", 1],
      ["metal", "metal.nii.gz", 0],
    ]);
    expect(s.inputs.fixed.sha256).toBe(await sha256File(pair.ctPath));
    expect(s.inputs.transform.matrix_sha256).toBe(transformHash(pair.fixedToMoving));
    expect(s.metal.voxels).toBe(12);
    expect(s.metal.margin_mm).toBe(0);
    const bodyVoxels =
      (pair.body.i[1] - pair.body.i[0]) *
      (pair.body.j[1] - pair.body.j[0]) *
      (pair.body.k[1] - pair.body.k[0]);
    expect(s.body.voxels).toBe(bodyVoxels);
    // CT mean over all voxels, closed form from the planted values.
    let sum = 0;
    for (let q = 0; q < pair.ct.count; q++) sum += pair.ct.data[q];
    expect(s.statistics.ct.all.mean).toBeCloseTo(sum / pair.ct.count, 9);
    expect(s.statistics).toEqual(s.raw_statistics);
    expect(s.resampling.mr_coverage_fraction).toBe(1);
    expect(s.slices).toBeNull();
    expect(existsSync(join(out, "slices.csv"))).toBe(false);
  });

  it("--slices: one [3, rows, cols] float32 .npy per body slice, element [c, r, q] = voxel (q, r, s), and slices.csv", async () => {
    const pair = await writeSyntheticPair(join(root, "b"));
    const out = join(root, "b-out");
    const r = await exportPair({
      fixed: pair.ctPath,
      moving: pair.mrPath,
      transform: pair.transformPath,
      out,
      slices: true,
      caseName: "demo,one",
      threads: 1,
    });
    const [nx, ny] = pair.ct.dims;
    const files = readdirSync(join(out, "slices")).sort();
    const bodySlices = [];
    for (let k = pair.body.k[0]; k < pair.body.k[1]; k++)
      bodySlices.push(`slice-${String(k).padStart(4, "0")}.npy`);
    expect(files).toEqual(bodySlices);
    expect(r.sidecar.slices).toMatchObject({
      axis: 2,
      rows_axis: 1,
      cols_axis: 0,
      shape: [3, ny, nx],
      written: 6,
      skipped: 4,
    });
    const ch1 = readNifti(join(out, "pair.nii.gz"), { volume: 1 }).volume.data;
    const metalSet = new Set(pair.metal);
    const k = 5;
    const npy = readNpy(join(out, "slices", "slice-0005.npy"));
    expect(npy.descr).toBe("<f4");
    expect(npy.shape).toEqual([3, ny, nx]);
    for (const [i, j] of [
      [0, 0],
      [12, 10],
      [7, 4],
      [nx - 1, ny - 1],
    ]) {
      const q = i + nx * (j + ny * k);
      expect(npy.data[(0 * ny + j) * nx + i]).toBe(pair.ct.data[q]);
      expect(npy.data[(1 * ny + j) * nx + i]).toBe(ch1[q]);
      expect(npy.data[(2 * ny + j) * nx + i]).toBe(metalSet.has(q) ? 1 : 0);
    }
    const rows = parseCsv(readFileSync(join(out, "slices.csv"), "utf8")).map((x) => x.fields);
    expect(rows[0]).toEqual(["case", "slice_index", "z_mm", "metal_fraction", "body_fraction", "file"]);
    expect(rows).toHaveLength(7);
    const row5 = rows.find((x) => x[1] === "5")!;
    expect(row5[0]).toBe("demo,one"); // quoted in the file, read back intact
    // z of slice 5: world z of the in-plane centre = 2.5 * 5 - 40 mm (the affine), closed form.
    expect(Number(row5[2])).toBeCloseTo(-27.5, 3);
    expect(Number(row5[3])).toBeCloseTo(4 / (nx * ny), 6); // 2 x 2 metal voxels in slice 5
    const bodyPlane = (pair.body.i[1] - pair.body.i[0]) * (pair.body.j[1] - pair.body.j[0]);
    expect(Number(row5[4])).toBeCloseTo(bodyPlane / (nx * ny), 6);
    expect(row5[5]).toBe("slices/slice-0005.npy");
  });

  it("a grid whose first voxel axis runs along world z slices across axis 0: element [c, r, q] = voxel (s, q, r)", async () => {
    // Columns of the affine: i -> z (2.5 mm), j -> x (1.5 mm), k -> y (1.5 mm).
    const affine = new Float64Array([0, 1.5, 0, -18, 0, 0, 1.5, -12, 2.5, 0, 0, -40, 0, 0, 0, 1]);
    const pair = await writeSyntheticPair(join(root, "c"), { ctAffine: affine, dims: [10, 24, 20] });
    const out = join(root, "c-out");
    const r = await exportPair({
      fixed: pair.ctPath,
      moving: pair.mrPath,
      transform: pair.transformPath,
      out,
      slices: true,
      threads: 1,
    });
    const [nx, ny] = pair.ct.dims;
    const nz = pair.ct.dims[2];
    expect(r.sidecar.slices).toMatchObject({ axis: 0, cols_axis: 1, rows_axis: 2, shape: [3, nz, ny] });
    const s = 4;
    const npy = readNpy(join(out, "slices", "slice-0004.npy"));
    expect(npy.shape).toEqual([3, nz, ny]);
    for (const [q, row] of [
      [0, 0],
      [5, 7],
      [ny - 1, nz - 1],
    ]) {
      const voxel = s + nx * (q + ny * row);
      expect(npy.data[row * ny + q]).toBe(pair.ct.data[voxel]);
    }
  });

  it("--normalize window maps CT by level/width and MR by body percentiles to 0..1 and records both", async () => {
    const pair = await writeSyntheticPair(join(root, "d"));
    const out = join(root, "d-out");
    const r = await exportPair({
      fixed: pair.ctPath,
      moving: pair.mrPath,
      transform: pair.transformPath,
      out,
      normalize: "window",
      ctLevelHu: 0,
      ctWidthHu: 2000,
      mrPercentiles: [0, 100],
      threads: 1,
    });
    const n = r.sidecar.normalize;
    if (n.mode !== "window") expect.fail("normalize block missing");
    expect(n.ct).toMatchObject({ level_hu: 0, width_hu: 2000, low_hu: -1000, high_hu: 1000 });
    const ch0 = readNifti(join(out, "pair.nii.gz"), { volume: 0 }).volume.data;
    for (let q = 0; q < ch0.length; q += 97) {
      const expected = Math.min(1, Math.max(0, (pair.ct.data[q] + 1000) / 2000));
      expect(ch0[q]).toBeCloseTo(expected, 6);
    }
    // Percentiles 0 and 100 of the body voxels: their MR min and max (closed form of the raw values).
    expect(n.mr.low_value).toBeCloseTo(r.sidecar.raw_statistics.mr.body.min, 4);
    expect(n.mr.high_value).toBeCloseTo(r.sidecar.raw_statistics.mr.body.max, 4);
    expect(r.sidecar.statistics.mr.body.min).toBeCloseTo(0, 6);
    expect(r.sidecar.statistics.mr.body.max).toBeCloseTo(1, 6);
    expect(r.sidecar.statistics.ct.all.max).toBe(1);
  });

  it("zero fill and coverage fraction where the MR does not reach the CT", async () => {
    const pair = await writeSyntheticPair(join(root, "e"), { mrShiftMm: 30 });
    const out = join(root, "e-out");
    const r = await exportPair({
      fixed: pair.ctPath,
      moving: pair.mrPath,
      transform: pair.transformPath,
      out,
      threads: 1,
    });
    const ch1 = readNifti(join(out, "pair.nii.gz"), { volume: 1 }).volume.data;
    const [nx, ny, nz] = pair.ct.dims;
    let covered = 0;
    let worst = 0;
    for (let k = 0; k < nz; k++)
      for (let j = 0; j < ny; j++)
        for (let i = 0; i < nx; i++) {
          const e = expectedMr(pair, i, j, k);
          if (e !== 0) covered++;
          worst = Math.max(worst, Math.abs(ch1[i + nx * (j + ny * k)] - e));
        }
    expect(covered).toBeGreaterThan(0);
    expect(covered).toBeLessThan(pair.ct.count);
    expect(worst).toBeLessThan(2e-3);
    expect(r.sidecar.resampling.mr_coverage_fraction).toBeCloseTo(covered / pair.ct.count, 9);
  });

  it("refuses, before writing anything: another image than the transform's, an MR as fixed, no overlap, output over an input", async () => {
    const pair = await writeSyntheticPair(join(root, "f"));
    const out = join(root, "f-out");
    // Another MR (one voxel differs): its SHA-256 is not the transform's moving image.
    const changed = new Float32Array(pair.mr.data);
    changed[0] += 1;
    const otherMr = join(root, "f", "mr-other.nii.gz");
    writeNifti(otherMr, pair.mr.withData(changed), { datatype: "float32" });
    await expect(
      exportPair({ fixed: pair.ctPath, moving: otherMr, transform: pair.transformPath, out }),
    ).rejects.toMatchObject({ code: "HASH_MISMATCH", file: otherMr });
    await expect(
      exportPair({ fixed: pair.mrPath, moving: pair.ctPath, transform: pair.transformPath, out }),
    ).rejects.toMatchObject({ code: "HASH_MISMATCH" });
    expect(existsSync(out)).toBe(false);

    const far = await writeSyntheticPair(join(root, "h"), { mrShiftMm: 5000 });
    await expect(
      exportPair({ fixed: far.ctPath, moving: far.mrPath, transform: far.transformPath, out, threads: 1 }),
    ).rejects.toMatchObject({ code: "NO_OVERLAP" });
    expect(existsSync(out)).toBe(false);

    // An input named like an output in the output folder.
    const clash = join(root, "clash");
    const copy = await writeSyntheticPair(clash);
    writeFileSync(join(clash, "pair.json"), readFileSync(copy.transformPath));
    await expect(
      exportPair({
        fixed: copy.ctPath,
        moving: copy.mrPath,
        transform: join(clash, "pair.json"),
        out: clash,
        threads: 1,
      }),
    ).rejects.toMatchObject({ code: "WOULD_OVERWRITE" });
    expect(existsSync(join(clash, "pair.nii.gz"))).toBe(false);
  });

  it("refuses an MR-like image as the CT (BAD_INPUT naming the file)", async () => {
    const pair = await writeSyntheticPair(join(root, "m"));
    // The transform's recorded fixed image is the CT, so build an MR-valued file and a matching transform.
    const mrLike = new Volume(
      pair.ct.dims,
      new Float32Array(pair.ct.count).map((_, q) => 300 + (q % 700)),
      pair.ct.indexToWorld,
    );
    const path = join(root, "m", "mrlike.nii.gz");
    writeNifti(path, mrLike, { datatype: "float32" });
    const { buildTransformRecord, imageRef, writeTransform } = await import(
      "../../src/geometry/transform-file.js"
    );
    const t = join(root, "m", "t2.json");
    writeTransform(
      t,
      buildTransformRecord({
        model: "rigid",
        matrix: pair.fixedToMoving,
        centerMm: [0, 0, 0],
        fixed: imageRef(path, mrLike, await sha256File(path)),
        moving: imageRef(pair.mrPath, pair.mr, await sha256File(pair.mrPath)),
      }),
    );
    await expect(
      exportPair({ fixed: path, moving: pair.mrPath, transform: t, out: join(root, "m-out") }),
    ).rejects.toMatchObject({
      code: "BAD_INPUT",
      file: path,
    });
  });
});

describe("coxa pair (CLI, in-process)", () => {
  it("writes the export and prints a summary; --json prints pair.json", async () => {
    const pair = await writeSyntheticPair(join(root, "cli"));
    const out = join(root, "cli-out");
    const r = await runCoxa([
      "pair",
      "--fixed",
      pair.ctPath,
      "--moving",
      pair.mrPath,
      "--transform",
      pair.transformPath,
      "--out",
      out,
      "--slices",
      "--threads",
      "1",
    ]);
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(/6 slices \[3, 20, 24\]/);
    const j = await runCoxa([
      "pair",
      "--fixed",
      pair.ctPath,
      "--moving",
      pair.mrPath,
      "--transform",
      pair.transformPath,
      "--out",
      out,
      "--json",
      "--normalize",
      "window",
    ]);
    expect(j.code).toBe(0);
    const s = JSON.parse(j.stdout);
    expect(s.format).toBe("coxa.pair");
    expect(s.normalize.mode).toBe("window");
    expect(s.slices).toBeNull();
    expect(existsSync(join(out, "slices"))).toBe(true);
    expect(readdirSync(join(out, "slices"))).toEqual([]); // the earlier run's slices are removed
  });

  it("bad input and bad values exit 2 with one line naming the problem", async () => {
    const pair = await writeSyntheticPair(join(root, "cli2"));
    const missing = join(root, "cli2", "nope.json");
    const r = await runCoxa([
      "pair",
      "--fixed",
      pair.ctPath,
      "--moving",
      pair.mrPath,
      "--transform",
      missing,
      "--out",
      join(root, "x"),
    ]);
    expect(r.code).toBe(2);
    expect(r.stderr.trim().split("\n")).toHaveLength(1);
    expect(r.stderr).toContain(missing);
    const bad = await runCoxa([
      "pair",
      "--fixed",
      pair.ctPath,
      "--moving",
      pair.mrPath,
      "--transform",
      pair.transformPath,
      "--out",
      join(root, "x"),
      "--mr-percentiles",
      "90,10",
    ]);
    expect(bad.code).toBe(2);
    const badMode = await runCoxa([
      "pair",
      "--fixed",
      pair.ctPath,
      "--moving",
      pair.mrPath,
      "--transform",
      pair.transformPath,
      "--out",
      join(root, "x"),
      "--normalize",
      "zscore",
    ]);
    expect(badMode.code).toBe(2);
    expect(existsSync(join(root, "x"))).toBe(false);
  });

  it("--help exits 0 and ends with an example", async () => {
    const r = await runCoxa(["pair", "--help"]);
    expect(r.code).toBe(0);
    expect(r.stdout).toMatch(/Example:\n\s+coxa pair /);
  });
});
