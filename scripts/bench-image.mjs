#!/usr/bin/env node
import { readFileSync } from "node:fs";
// Micro-benchmark of the image side of the registration core (pyramid, masks, metrics,
// resampling) on clinical-size synthetic volumes: CT 512x512x200 int16 (0.8 x 0.8 x 1.5 mm)
// with a metal rod, MR 384x384x60 float32 (0.9 x 0.9 x 4 mm). Invented data, not a patient.
// Prints JSON. Run after `npm run build`:
//   node scripts/bench-image.mjs [--threads N] [--repeat N] [--ct CT.nii.gz --mr MR.nii.gz [--truth truth.json]]
// With --ct/--mr the images are read from NIfTI files (e.g. a `coxa phantom --size clinical` case)
// and --truth supplies the fixed-to-moving matrix; stage times are the minimum over --repeat runs.
import { performance } from "node:perf_hooks";
import { fromRows } from "../dist/geometry/mat4.js";
import { rigidMatrix } from "../dist/geometry/rotation.js";
import { readNifti } from "../dist/image/nifti-read.js";
import { Volume } from "../dist/image/volume.js";
import { prepareLevelMasks } from "../dist/masks/level-masks.js";
import { createMetric } from "../dist/metrics/metric.js";
import { buildPyramid } from "../dist/pyramid/pyramid.js";
import { resampleOnto } from "../dist/resample/resample.js";

const arg = (name, fallback) => {
  const i = process.argv.indexOf(name);
  return i > 0 ? process.argv[i + 1] : fallback;
};
const threads = Number(arg("--threads", "2"));
const repeat = Number(arg("--repeat", "3"));

function affine(sx, sy, sz, ox, oy, oz) {
  return new Float64Array([sx, 0, 0, ox, 0, sy, 0, oy, 0, 0, sz, oz, 0, 0, 0, 1]);
}

function makeCt() {
  const [nx, ny, nz] = [512, 512, 200];
  const data = new Int16Array(nx * ny * nz).fill(-1000);
  for (let k = 0; k < nz; k++)
    for (let j = 0; j < ny; j++) {
      const row = nx * (j + ny * k);
      for (let i = 0; i < nx; i++) {
        const x = (i - 256) * 0.8;
        const y = (j - 256) * 0.8;
        if ((x / 170) ** 2 + (y / 120) ** 2 > 1) continue;
        let v = 40 + ((i * 31 + j * 17 + k * 7) % 41) - 20;
        if ((x - 80) ** 2 + y * y < 400 || (x + 80) ** 2 + y * y < 400) v = 900; // "femora"
        if ((x - 80) ** 2 + y * y < 36 && k > 40 && k < 160) v = 3000; // metal rod
        data[row + i] = v;
      }
    }
  return new Volume([nx, ny, nz], data, affine(0.8, 0.8, 1.5, -204.4, -204.4, -150));
}

function makeMr() {
  const [nx, ny, nz] = [384, 384, 60];
  const data = new Float32Array(nx * ny * nz);
  for (let k = 0; k < nz; k++)
    for (let j = 0; j < ny; j++) {
      const row = nx * (j + ny * k);
      for (let i = 0; i < nx; i++) {
        const x = (i - 192) * 0.9 + 2;
        const y = (j - 192) * 0.9 - 3;
        if ((x / 170) ** 2 + (y / 120) ** 2 > 1) {
          data[row + i] = 5 + ((i + j) % 7);
          continue;
        }
        let v = 400 + ((i * 13 + j * 7 + k) % 61);
        if ((x - 80) ** 2 + y * y < 400 || (x + 80) ** 2 + y * y < 400) v = 150;
        if ((x - 80) ** 2 + y * y < 100) v = 8; // signal void
        data[row + i] = v;
      }
    }
  return new Volume([nx, ny, nz], data, affine(0.9, 0.9, 4, -172.35, -172.35, -118));
}

/** Run fn `repeat` times; the value of the last run, the minimum wall and CPU time in seconds. */
const time = (fn, times = repeat) => {
  let best = Infinity;
  let bestCpu = Infinity;
  let value;
  for (let r = 0; r < times; r++) {
    const c0 = process.cpuUsage();
    const t0 = performance.now();
    value = fn();
    best = Math.min(best, (performance.now() - t0) / 1000);
    const c = process.cpuUsage(c0);
    bestCpu = Math.min(bestCpu, (c.user + c.system) / 1e6);
  }
  return { value, s: best, cpu: bestCpu };
};

const ctPath = arg("--ct");
const mrPath = arg("--mr");
const truthPath = arg("--truth");
const result = {
  note: "timings: minimum over repeats on a shared 2-core machine (noisy)",
  data: ctPath ? { ct: ctPath, mr: mrPath } : "synthetic",
  threads,
  repeat,
};
const ct = ctPath ? readNifti(ctPath).volume : makeCt();
const mr = mrPath ? readNifti(mrPath).volume : makeMr();
result.ct = { dims: ct.dims, spacing_mm: ct.spacingMm, datatype: ct.datatype };
result.mr = { dims: mr.dims, spacing_mm: mr.spacingMm, datatype: mr.datatype };
const ctPyr = time(() => buildPyramid(ct, { trackAbove: 2500 }));
const mrPyr = time(() => buildPyramid(mr, { trackAbove: 2500 }));
result.pyramid_s = { ct: ctPyr.s, mr: mrPyr.s, ct_cpu: ctPyr.cpu, mr_cpu: mrPyr.cpu };
result.levels = {
  ct: ctPyr.value.levels.map((l) => ({ step_mm: l.stepMm, dims: l.volume.dims, factors: l.factors })),
  mr: mrPyr.value.levels.map((l) => ({ step_mm: l.stepMm, dims: l.volume.dims, factors: l.factors })),
};
const ctMasks = time(() => prepareLevelMasks(ct, ctPyr.value));
const mrMasks = time(() => prepareLevelMasks(mr, mrPyr.value));
result.masks_s = { ct: ctMasks.s, mr: mrMasks.s, ct_cpu: ctMasks.cpu, mr_cpu: mrMasks.cpu };
result.masks = {
  ct_modality: ctMasks.value.modality,
  mr_modality: mrMasks.value.modality,
  metal_voxels: ctMasks.value.metal?.metalVoxels,
  metal_mask_voxels: ctMasks.value.metal?.maskVoxels,
};
const truth = truthPath
  ? fromRows(JSON.parse(readFileSync(truthPath, "utf8")).fixed_to_moving)
  : rigidMatrix([0, 0, 0], [0, 0, 0], [2, -3, 0]);
result.metric = [];
for (let l = 0; l < ctPyr.value.levels.length; l++) {
  for (const kind of ["mi", "nmi", "lncc"]) {
    const samples = kind === "lncc" ? 20000 : 50000;
    const built = time(
      () =>
        createMetric(kind, {
          fixed: ctPyr.value.levels[l].volume,
          moving: mrPyr.value.levels[l].volume,
          fixedMask: ctMasks.value.levels[l].include,
          movingMask: mrMasks.value.levels[l].include,
          samples,
          seed: 1,
        }),
      1,
    );
    const m = built.value;
    const evals = 200;
    const t0 = performance.now();
    for (let e = 0; e < evals; e++) {
      const t = truth.slice();
      t[3] += 0.01 * e;
      m.evaluate(t);
    }
    const s = (performance.now() - t0) / 1000;
    m.evaluate(truth);
    result.metric.push({
      level_mm: ctPyr.value.levels[l].stepMm,
      kind,
      samples: m.sampleCount,
      build_s: built.s,
      evaluations_per_s: evals / s,
      overlap_at_truth: m.overlap,
    });
  }
}
const grid = { dims: ct.dims, indexToWorld: ct.indexToWorld };
for (const interp of ["linear", "nearest"]) {
  let best = Infinity;
  for (let r = 0; r < repeat; r++) {
    const t0 = performance.now();
    const res = await resampleOnto(mr, grid, truth, { interp, threads });
    best = Math.min(best, (performance.now() - t0) / 1000);
    result.resample_inside_fraction = res.insideFraction;
  }
  result[`resample_${interp}_s`] = best;
}
result.peak_rss_mb = process.resourceUsage().maxRSS / 1024;
process.stdout.write(`${JSON.stringify(result, null, 2)}\n`);
