import { existsSync, mkdtempSync, readFileSync, rmSync, writeFileSync } from "node:fs";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { afterAll, beforeAll, describe, expect, test } from "vitest";
import type { CliIo } from "../../src/cli/io.js";
import { phantomCommand } from "../../src/cli/phantom.js";
import { runCli } from "../../src/cli/run.js";
import { compose, fromRows, maxAbsDiff, multiply, transformPoint } from "../../src/geometry/mat4.js";
import { rigidMatrix } from "../../src/geometry/rotation.js";
import { readNifti } from "../../src/image/nifti-read.js";
import type { Volume } from "../../src/image/volume.js";
import { implantParts, transformImplant } from "../../src/phantom/implant.js";
import { generatePhantom, landmarksCsv, PHANTOM_FILES, type PhantomCase } from "../../src/phantom/phantom.js";
import { compileShape, evalProgram, programStack } from "../../src/phantom/sdf.js";

// The phantom is invented demo data (synthetic patient); the checks compare it against the
// design.md conventions, closed-form geometry and the stated expectations.

let main: PhantomCase;
let calm: PhantomCase; // severity 0
let half: PhantomCase; // severity 0.5
let bare: PhantomCase; // no implant, severity 1
let bareCalm: PhantomCase; // no implant, severity 0

beforeAll(async () => {
  main = await generatePhantom({ seed: 7 });
  calm = await generatePhantom({ seed: 7, severity: 0 });
  half = await generatePhantom({ seed: 7, severity: 0.5 });
  bare = await generatePhantom({ seed: 7, implant: "none" });
  bareCalm = await generatePhantom({ seed: 7, implant: "none", severity: 0 });
}, 300_000);

/** Voxels of `label` whose whole (2r+1)^3 neighbourhood has that label (no partial volume). */
function interiorStats(vol: Volume, labels: Uint8Array, label: number, r: number, slices?: Set<number>) {
  const [nx, ny, nz] = vol.dims;
  let n = 0;
  let sum = 0;
  let sum2 = 0;
  for (let k = r; k < nz - r; k++) {
    if (slices && !slices.has(k)) continue;
    for (let j = r; j < ny - r; j++)
      for (let i = r; i < nx - r; i++) {
        const idx = i + nx * (j + ny * k);
        if (labels[idx] !== label) continue;
        let ok = true;
        for (let dk = -r; dk <= r && ok; dk++)
          for (let dj = -r; dj <= r && ok; dj++)
            for (let di = -r; di <= r; di++)
              if (labels[idx + di + nx * (dj + ny * dk)] !== label) {
                ok = false;
                break;
              }
        if (!ok) continue;
        const v = vol.data[idx];
        n++;
        sum += v;
        sum2 += v * v;
      }
  }
  const mean = sum / n;
  return { n, mean, sd: Math.sqrt(sum2 / n - mean * mean) };
}

function metalSlices(c: PhantomCase): Set<number> {
  const [nx, ny, nz] = c.ct.dims;
  const out = new Set<number>();
  for (let k = 0; k < nz; k++)
    for (let p = 0; p < nx * ny; p++)
      if (c.metalMaskCt[k * nx * ny + p]) {
        out.add(k);
        break;
      }
  return out;
}

describe("truth", () => {
  test("fixed_to_moving is rigidMatrix(center_mm, rotation_deg, translation_mm) and moving_to_fixed its inverse", () => {
    const t = main.truth;
    const built = rigidMatrix(t.parameters.center_mm, t.parameters.rotation_deg, t.parameters.translation_mm);
    const forward = fromRows(t.fixed_to_moving);
    expect(maxAbsDiff(built, forward)).toBeLessThan(1e-12);
    const product = multiply(new Float64Array(16), forward, fromRows(t.moving_to_fixed));
    expect(
      maxAbsDiff(
        product,
        fromRows([
          [1, 0, 0, 0],
          [0, 1, 0, 0],
          [0, 0, 1, 0],
          [0, 0, 0, 1],
        ]),
      ),
    ).toBeLessThan(1e-12);
    // Pose within the defaults: |angle| <= 4 degrees, 5 <= |t| <= 25 mm per axis.
    for (const a of t.parameters.rotation_deg) expect(Math.abs(a)).toBeLessThanOrEqual(4);
    for (const v of t.parameters.translation_mm) {
      expect(Math.abs(v)).toBeGreaterThanOrEqual(5);
      expect(Math.abs(v)).toBeLessThanOrEqual(25);
    }
  });

  test("landmarks-mr = fixed_to_moving * landmarks-ct; >= 10 points, >= 4 within 60 mm of the implant", () => {
    const t = fromRows(main.truth.fixed_to_moving);
    expect(main.landmarksCt.length).toBeGreaterThanOrEqual(10);
    expect(main.landmarksMr.map((l) => l.label)).toEqual(main.landmarksCt.map((l) => l.label));
    const q = [0, 0, 0];
    for (let i = 0; i < main.landmarksCt.length; i++) {
      const p = main.landmarksCt[i].point;
      transformPoint(q, t, p[0], p[1], p[2]);
      for (let a = 0; a < 3; a++) expect(Math.abs(main.landmarksMr[i].point[a] - q[a])).toBeLessThan(1e-9);
    }
    const c = main.truth.implant_center_mm!;
    const near = main.landmarksCt.filter(
      (l) => Math.hypot(l.point[0] - c[0], l.point[1] - c[1], l.point[2] - c[2]) < 60,
    );
    expect(near.length).toBeGreaterThanOrEqual(4);
    // CSV in design.md's format: header label,x,y,z then one row per point.
    const csv = landmarksCsv(main.landmarksCt).trim().split("\n");
    expect(csv[0]).toBe("label,x,y,z");
    expect(csv.length).toBe(main.landmarksCt.length + 1);
  });

  test("landmarks lie on their structures: head centres inside the femoral head or the prosthetic head", () => {
    const idx = (c: PhantomCase, label: string) => c.landmarksCt.find((l) => l.label === label)!.point;
    const labelAt = (c: PhantomCase, p: readonly number[]) => {
      const q = c.labelsCt.worldToIndexPoint([0, 0, 0], p[0], p[1], p[2]);
      const [nx, ny] = c.labelsCt.dims;
      return c.labelsCt.data[Math.round(q[0]) + nx * (Math.round(q[1]) + ny * Math.round(q[2]))];
    };
    expect(labelAt(main, idx(main, "femoral_head_centre_left"))).toBe(14);
    // The prosthetic head centre lies in the head or in the neck taper that fills its bore.
    expect([40, 41]).toContain(labelAt(main, idx(main, "femoral_head_centre_right")));
    expect(labelAt(bare, idx(bare, "femoral_head_centre_right"))).toBe(13);
  });

  test("grids differ: oblique MR with thicker slices, other voxel size, field of view and origin", () => {
    const ct = main.ct.indexToWorld;
    const mr = main.mr.indexToWorld;
    const sCt = main.ct.spacingMm;
    const sMr = main.mr.spacingMm;
    expect(sMr[2]).toBeGreaterThan(2 * sCt[2]);
    expect(sMr[0]).not.toBeCloseTo(sCt[0], 2);
    // Obliquity: some unit column of the MR affine is more than 5 degrees off every world axis.
    let maxOff = 0;
    for (let c = 0; c < 3; c++) {
      const col = [mr[c], mr[4 + c], mr[8 + c]].map((v) => Math.abs(v) / sMr[c]);
      maxOff = Math.max(maxOff, Math.acos(Math.max(...col)) * (180 / Math.PI));
    }
    expect(maxOff).toBeGreaterThan(5);
    expect(main.ct.orientation()).toBe("LPS");
    expect(Math.hypot(ct[3] - mr[3], ct[7] - mr[7], ct[11] - mr[11])).toBeGreaterThan(10);
  });
});

describe("labels", () => {
  test("labels-ct resampled onto the MR grid with the truth agree with labels-mr (Dice > 0.9 for large structures)", () => {
    // Nearest-neighbour resampling: MR voxel -> MR world -> CT world (moving_to_fixed) -> CT voxel.
    const toCt = compose(
      main.labelsCt.worldToIndex,
      fromRows(main.truth.moving_to_fixed),
      main.labelsMr.indexToWorld,
    );
    const [mx, my, mz] = main.labelsMr.dims;
    const [nx, ny, nz] = main.labelsCt.dims;
    const inter = new Float64Array(256);
    const a = new Float64Array(256);
    const b = new Float64Array(256);
    const q = [0, 0, 0];
    for (let k = 0; k < mz; k++)
      for (let j = 0; j < my; j++)
        for (let i = 0; i < mx; i++) {
          transformPoint(q, toCt, i, j, k);
          const ci = Math.round(q[0]);
          const cj = Math.round(q[1]);
          const ck = Math.round(q[2]);
          if (ci < 0 || cj < 0 || ck < 0 || ci >= nx || cj >= ny || ck >= nz) continue;
          const l1 = main.labelsCt.data[ci + nx * (cj + ny * ck)];
          const l2 = main.labelsMr.data[i + mx * (j + my * k)];
          a[l1]++;
          b[l2]++;
          if (l1 === l2) inter[l1]++;
        }
    const large = [2, 3, 10, 11, 12, 13, 14, 20, 21, 28, 29, 30, 31, 5];
    for (const l of large) {
      expect(b[l], `label ${l} present`).toBeGreaterThan(1000);
      const dice = (2 * inter[l]) / (a[l] + b[l]);
      expect(dice, `Dice of label ${l}`).toBeGreaterThan(0.9);
    }
  });

  test("anatomy is asymmetric: hip centres sit at different distances from the symphysis, paired volumes differ", () => {
    const point = (label: string) => bare.landmarksCt.find((l) => l.label === label)!.point;
    const sym = point("pubic_symphysis");
    const dist = (p: readonly number[]) => Math.hypot(p[0] - sym[0], p[1] - sym[1], p[2] - sym[2]);
    expect(
      Math.abs(dist(point("femoral_head_centre_right")) - dist(point("femoral_head_centre_left"))),
    ).toBeGreaterThan(1);
    const count = new Float64Array(256);
    for (const l of bare.labelsCt.data) count[l]++;
    for (const [right, left] of [
      [13, 14],
      [20, 21],
      [24, 25],
    ]) {
      expect(Math.abs(count[right] / count[left] - 1), `labels ${right}/${left}`).toBeGreaterThan(0.02);
    }
  });
});

describe("CT metal artifacts in the phantom", () => {
  // Common practice, no source: streaks make the HU spread in a muscle next to the implant at
  // least twice that of the same muscle on the other side; without artifacts they match within 20%.
  test("iliopsoas next to the implant: HU SD >= 2 x the contralateral one at severity 1", () => {
    const slices = metalSlices(main);
    const near = interiorStats(main.ct, main.labelsCt.data, 24, 2, slices);
    const far = interiorStats(main.ct, main.labelsCt.data, 25, 2, slices);
    expect(near.n).toBeGreaterThan(30);
    expect(far.n).toBeGreaterThan(30);
    expect(near.sd).toBeGreaterThan(2 * far.sd);
  });

  test("with --severity 0 the two SDs agree within 20% and the metal is still there (3071 HU, partial at edges)", () => {
    const slices = metalSlices(calm);
    const near = interiorStats(calm.ct, calm.labelsCt.data, 24, 2, slices);
    const far = interiorStats(calm.ct, calm.labelsCt.data, 25, 2, slices);
    expect(Math.abs(near.sd / far.sd - 1)).toBeLessThan(0.2);
    // Metal voxels (centre inside metal) carry partial volume with the liner or tissue at edges; most are full.
    let metal = 0;
    let full = 0;
    let minHu = Infinity;
    for (let i = 0; i < calm.ct.count; i++) {
      if (!calm.metalMaskCt[i]) continue;
      metal++;
      if (calm.ct.data[i] === 3071) full++;
      minHu = Math.min(minHu, calm.ct.data[i]);
    }
    expect(metal).toBeGreaterThan(500);
    expect(minHu).toBeGreaterThan(500);
    expect(full / metal).toBeGreaterThan(0.5);
  });

  test("HU of large tissues match the scale: air about -1000, fat about -100, muscle about +50 (severity 0)", () => {
    const [nx, ny] = calm.ct.dims;
    let airSum = 0;
    for (let i = 0; i < 200; i++) airSum += calm.ct.data[i + nx * 2];
    expect(Math.abs(airSum / 200 + 1000)).toBeLessThan(5);
    const fat = interiorStats(calm.ct, calm.labelsCt.data, 2, 1);
    const muscle = interiorStats(calm.ct, calm.labelsCt.data, 21, 1);
    expect(fat.mean).toBeGreaterThan(-120);
    expect(fat.mean).toBeLessThan(-80);
    expect(muscle.mean).toBeGreaterThan(35);
    expect(muscle.mean).toBeLessThan(65);
    void ny;
  });

  test("no implant: no voxel reaches the 2500 HU metal threshold", () => {
    let maxHu = -Infinity;
    for (const v of bare.ct.data) if (v > maxHu) maxHu = v;
    expect(maxHu).toBeLessThan(2500);
    expect(bare.truth.ct_metal_slices).toBe(0);
    expect(bare.truth.implant_center_mm).toBeNull();
  });
});

describe("MR metal artifacts in the phantom", () => {
  test("void: mean MR signal within 3 mm of metal is below 10% of muscle signal", () => {
    const t = fromRows(main.truth.fixed_to_moving);
    const shapes = main.implantsCt
      .flatMap((m) => implantParts(transformImplant(m, t)))
      .filter((p) => p.tissue !== "polyethylene")
      .map((p) => p.shape);
    const prog = compileShape({ op: "union", of: shapes });
    const stack = programStack(prog);
    const [mx, my, mz] = main.mr.dims;
    const p = [0, 0, 0];
    let sum = 0;
    let n = 0;
    for (let k = 0; k < mz; k++)
      for (let j = 0; j < my; j++)
        for (let i = 0; i < mx; i++) {
          main.mr.indexToWorldPoint(p, i, j, k);
          if (evalProgram(prog, stack, p[0], p[1], p[2]) > 3) continue;
          sum += main.mr.data[i + mx * (j + my * k)];
          n++;
        }
    const muscle = interiorStats(main.mr, main.labelsMr.data, 21, 1);
    expect(n).toBeGreaterThan(500);
    expect(sum / n).toBeLessThan(0.1 * muscle.mean);
  });

  test("displacement grows with severity and is zero without an implant", () => {
    expect(calm.truth.mr_displaced_volume_ml).toBe(0);
    expect(half.truth.mr_displaced_volume_ml).toBeGreaterThan(0);
    expect(main.truth.mr_displaced_volume_ml).toBeGreaterThan(half.truth.mr_displaced_volume_ml);
    expect(bare.truth.mr_displaced_volume_ml).toBe(0);
    expect(bare.truth.mr_max_displacement_mm).toBe(0);
    // Image check: the MR departs further from the artifact-free one as severity grows, and
    // without an implant severity changes nothing at all.
    const diff = (a: PhantomCase, b: PhantomCase) => {
      let s = 0;
      for (let i = 0; i < a.mr.count; i++) s += Math.abs(a.mr.data[i] - b.mr.data[i]);
      return s;
    };
    expect(diff(half, calm)).toBeGreaterThan(0);
    expect(diff(main, calm)).toBeGreaterThan(diff(half, calm));
    expect(diff(bare, bareCalm)).toBe(0);
  });

  test("MR contrast is not monotonic in HU: fat brighter than muscle, bladder fluid darker, cortex dark", () => {
    const mean = (label: number) => interiorStats(calm.mr, calm.labelsMr.data, label, 1).mean;
    const fat = mean(2);
    const muscle = mean(21);
    const bladder = mean(5);
    expect(fat).toBeGreaterThan(1.8 * muscle);
    expect(bladder).toBeLessThan(0.6 * muscle);
  });
});

describe("determinism", () => {
  test("the same seed gives identical volumes; another seed another pose", async () => {
    const again = await generatePhantom({ seed: 7, implant: "none", severity: 0, threads: 1 });
    expect(Buffer.from(again.ct.data.buffer).equals(Buffer.from(bareCalm.ct.data.buffer))).toBe(true);
    expect(Buffer.from(again.mr.data.buffer).equals(Buffer.from(bareCalm.mr.data.buffer))).toBe(true);
    const other = await generatePhantom({ seed: 8, implant: "none", severity: 0 });
    expect(other.truth.parameters.rotation_deg).not.toEqual(bareCalm.truth.parameters.rotation_deg);
  }, 120_000);
});

describe("coxa phantom (CLI, in-process)", () => {
  let dir: string;
  beforeAll(() => {
    dir = mkdtempSync(join(tmpdir(), "coxa-phantom-"));
  });
  afterAll(() => rmSync(dir, { recursive: true, force: true }));

  function io() {
    const out: string[] = [];
    const err: string[] = [];
    const cli: CliIo = { stdout: (t) => out.push(t), stderr: (t) => err.push(t), stderrIsTTY: false };
    return { cli, out, err };
  }

  test("writes every file, prints a JSON summary, and the implant-only MR field of view holds one hip", async () => {
    const { cli, out } = io();
    const target = join(dir, "case");
    const code = await runCli(
      ["phantom", "--out", target, "--seed", "7", "--mr-fov", "implant", "--json", "--quiet"],
      [phantomCommand],
      cli,
    );
    expect(code).toBe(0);
    const summary = JSON.parse(out.join(""));
    expect(summary.files).toEqual([...PHANTOM_FILES]);
    for (const f of PHANTOM_FILES) expect(existsSync(join(target, f)), f).toBe(true);
    const truth = JSON.parse(readFileSync(join(target, "truth.json"), "utf8"));
    expect(truth.mr_fov).toBe("implant");
    const ct = readNifti(join(target, "ct.nii.gz")).volume;
    const mr = readNifti(join(target, "mr.nii.gz")).volume;
    expect(ct.datatype).toBe("int16");
    expect(ct.dims).toEqual(truth.ct.shape);
    expect(mr.dims).toEqual(truth.mr.shape);
    // Implanted hip inside the MR grid, the other hip outside it (so centroids cannot be matched).
    const t = fromRows(truth.fixed_to_moving);
    const inside = (p: number[]) => {
      const w = transformPoint([0, 0, 0], t, p[0], p[1], p[2]);
      const q = mr.worldToIndexPoint([0, 0, 0], w[0], w[1], w[2]);
      return q.every((v, a) => v >= 0 && v <= mr.dims[a] - 1);
    };
    expect(inside(truth.implant_center_mm)).toBe(true);
    expect(inside(truth.other_hip_center_mm)).toBe(false);
    const labels = JSON.parse(readFileSync(join(target, "labels.json"), "utf8"));
    expect(labels["13"]).toBe("femur_right");
    expect(labels["41"]).toBe("implant_head");
    const rows = readFileSync(join(target, "landmarks-ct.csv"), "utf8").trim().split("\n");
    expect(rows[0]).toBe("label,x,y,z");
  }, 120_000);

  test("refuses to overwrite existing phantom files without --force (exit 2, one line naming the directory)", async () => {
    const target = join(dir, "case");
    const before = readFileSync(join(target, "truth.json"));
    const { cli, err } = io();
    const code = await runCli(["phantom", "--out", target, "--quiet"], [phantomCommand], cli);
    expect(code).toBe(2);
    expect(err.join("")).toMatch(new RegExp(`${target}: already holds phantom files.*--force`));
    expect(err.join("").trim().split("\n").length).toBe(1);
    expect(readFileSync(join(target, "truth.json")).equals(before)).toBe(true);
  });

  test.each([
    [["--severity", "1.5"], /severity/],
    [["--severity", "0.5abc"], /not a number/],
    [["--size", "huge"], /size/],
    [["--implant", "middle"], /implant/],
    [["--pose-deg", "25"], /pose-deg/],
    [["--mr-fov", "half"], /mr-fov/],
    [["--seed", "-1"], /seed|outside/],
  ])("rejects %j with exit 2", async (args, pattern) => {
    const { cli, err } = io();
    const code = await runCli(["phantom", "--out", join(dir, "bad"), ...args], [phantomCommand], cli);
    expect(code).toBe(2);
    expect(err.join("")).toMatch(pattern);
    expect(existsSync(join(dir, "bad"))).toBe(false);
  });

  test("an output path that is a file is refused with exit 2; --mr-fov implant without an implant too", async () => {
    const file = join(dir, "a-file");
    writeFileSync(file, "x");
    const first = io();
    expect(await runCli(["phantom", "--out", file, "--quiet"], [phantomCommand], first.cli)).toBe(2);
    expect(first.err.join("")).toMatch(/not a directory/);
    const second = io();
    expect(
      await runCli(
        ["phantom", "--out", join(dir, "x"), "--implant", "none", "--mr-fov", "implant"],
        [phantomCommand],
        second.cli,
      ),
    ).toBe(2);
    expect(second.err.join("")).toMatch(/mr-fov implant needs an implant/);
  });

  test("--help ends with a runnable example", async () => {
    const { cli, out } = io();
    expect(await runCli(["phantom", "--help"], [phantomCommand], cli)).toBe(0);
    expect(out.join("")).toMatch(/Example:\n\s+coxa phantom --out \/tmp\/p --seed 7/);
  });
});
