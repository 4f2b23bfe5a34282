// Capture range of the registration on one phantom: seeded starting poses up to offsetMm and
// offsetDeg away from the truth (start = truth ∘ perturbation about the CT centre), one
// registration each, success when the mean landmark TRE is within successMm.
import { readFileSync } from "node:fs";
import { join } from "node:path";
import { Rng } from "../dist/common/random.js";
import { evaluateLandmarks } from "../dist/geometry/landmark-evaluation.js";
import { pairLandmarks, readLandmarks } from "../dist/geometry/landmarks.js";
import { compose, fromRows } from "../dist/geometry/mat4.js";
import { rigidMatrix } from "../dist/geometry/rotation.js";
import { readNifti } from "../dist/image/nifti-read.js";
import { registerImages } from "../dist/register/driver.js";

/** A random unit vector (uniform on the sphere). */
function direction(rng) {
  for (;;) {
    const v = [rng.range(-1, 1), rng.range(-1, 1), rng.range(-1, 1)];
    const n = Math.hypot(...v);
    if (n > 1e-3 && n <= 1) return v.map((x) => x / n);
  }
}

export function captureRangeTrials(dir, { trials, offsetMm, offsetDeg, successMm, seed = 2026 }) {
  const ct = readNifti(join(dir, "ct.nii.gz")).volume;
  const mr = readNifti(join(dir, "mr.nii.gz")).volume;
  const truth = fromRows(JSON.parse(readFileSync(join(dir, "truth.json"), "utf8")).fixed_to_moving);
  const pairs = pairLandmarks(
    readLandmarks(join(dir, "landmarks-ct.csv")),
    readLandmarks(join(dir, "landmarks-mr.csv")),
    "ct",
    "mr",
  );
  const rng = new Rng(seed);
  const center = ct.centerWorld();
  const rows = [];
  for (let t = 0; t < trials; t++) {
    // Offsets uniform in magnitude up to the limits, in random directions.
    const tMag = rng.range(0, offsetMm);
    const rMag = rng.range(0, offsetDeg);
    const td = direction(rng).map((x) => x * tMag);
    const ax = direction(rng);
    // Small-angle split of an axis-angle rotation into the three world angles (exact enough for
    // sampling; the actual angle is measured below from the matrix).
    const perturb = rigidMatrix(
      center,
      ax.map((x) => x * rMag),
      td,
    );
    const start = compose(truth, perturb);
    const t0 = performance.now();
    const r = registerImages(ct, mr, { startMatrix: start, inverseConsistency: false, seed: 1 + t });
    const seconds = (performance.now() - t0) / 1000;
    const startErr = evaluateLandmarks(start, pairs).treMm.mean;
    const e = evaluateLandmarks(r.matrix, pairs).treMm.mean;
    rows.push({
      trial: t,
      offset_mm: tMag,
      offset_deg: rMag,
      start_tre_mm: startErr,
      tre_mean_mm: e,
      success: e <= successMm,
      seconds,
    });
  }
  const ok = rows.filter((r) => r.success).length;
  return {
    phantom: dir,
    trials,
    offset_mm_max: offsetMm,
    offset_deg_max: offsetDeg,
    success_mm: successMm,
    success_rate: ok / trials,
    target_success_rate: 0.95,
    meets_target: ok / trials >= 0.95,
    worst_tre_mm: Math.max(...rows.map((r) => r.tre_mean_mm)),
    median_seconds: rows.map((r) => r.seconds).sort((a, b) => a - b)[Math.floor(trials / 2)],
    failures: rows.filter((r) => !r.success),
  };
}
