/**
 * How far a trial's transform is from the reference, in mm.
 *
 * Conventions: both transforms map FIXED world (RAS+ mm) to MOVING world; the error compares
 * where they send the same fixed points, |T_trial(p) - T_ref(p)|, so it is measured in moving
 * world mm (for rigid transforms, the same as in fixed world).
 *
 * Two definitions, chosen by what the user gives:
 *  - landmarks: the MEAN over the fixed landmarks p of |T_trial(p) - T_ref(p)| (the mean TRE of
 *    the trial with the reference standing in for the truth);
 *  - sphere: the RMS of |T_trial(x) - T_ref(x)| over the points of a cubic lattice of step
 *    `stepMm` (default 5 mm) centred on the implant, c + stepMm (a, b, k) for integers a, b, k,
 *    kept where |x - c| <= radiusMm (default 60 mm: 7,153 points). For an affine difference the
 *    lattice RMS approaches the closed form over the solid ball, sqrt(|d(c)|² + R²/5 · ||A||_F²)
 *    with A the difference of the linear parts (E[u uᵀ] = R²/5 I for u uniform in a ball).
 * Points are flat xyz Float64Arrays; accumulation in float64.
 */
import type { Mat4 } from "../geometry/mat4.js";

/** The points an error is measured over and how. */
export interface ErrorRegion {
  kind: "landmarks" | "sphere";
  /** Fixed world points, flat xyz, mm. */
  pointsMm: Float64Array;
  /** Centre of the sphere (or of the landmarks), fixed world mm. */
  centerMm: [number, number, number];
  /** Sphere radius and lattice step, mm (sphere only). */
  radiusMm: number | null;
  stepMm: number | null;
  /** Landmark labels (landmarks only). */
  labels: string[] | null;
}

/** Radius of the sphere around the implant, mm (from the issue). */
export const SPHERE_RADIUS_MM = 60;
/** Lattice step inside the sphere, mm (a choice: 7k points, well under 1% from the continuous ball). */
export const SPHERE_STEP_MM = 5;

/**
 * Lattice points inside a ball: c + step (a, b, k), a, b, k integers, |step (a, b, k)| <= radius.
 * Order: k slowest, then b, then a (a fastest), each from negative to positive.
 * @param centerMm - ball centre c, world mm
 * @param radiusMm - radius, mm (> 0)
 * @param stepMm - lattice step, mm (> 0)
 * @returns flat xyz points
 */
export function sphereLattice(
  centerMm: readonly number[],
  radiusMm = SPHERE_RADIUS_MM,
  stepMm = SPHERE_STEP_MM,
): Float64Array {
  const n = Math.floor(radiusMm / stepMm + 1e-9);
  const r2 = radiusMm * radiusMm * (1 + 1e-12);
  const points: number[] = [];
  for (let k = -n; k <= n; k++) {
    for (let b = -n; b <= n; b++) {
      for (let a = -n; a <= n; a++) {
        const dx = a * stepMm;
        const dy = b * stepMm;
        const dz = k * stepMm;
        if (dx * dx + dy * dy + dz * dz > r2) continue;
        points.push(centerMm[0] + dx, centerMm[1] + dy, centerMm[2] + dz);
      }
    }
  }
  return Float64Array.from(points);
}

/**
 * The sphere error region around a centre.
 * @param centerMm - implant centre, fixed world mm
 */
export function sphereRegion(
  centerMm: readonly number[],
  radiusMm = SPHERE_RADIUS_MM,
  stepMm = SPHERE_STEP_MM,
): ErrorRegion {
  return {
    kind: "sphere",
    pointsMm: sphereLattice(centerMm, radiusMm, stepMm),
    centerMm: [centerMm[0], centerMm[1], centerMm[2]],
    radiusMm,
    stepMm,
    labels: null,
  };
}

/**
 * The landmark error region.
 * @param labels - landmark labels
 * @param fixedMm - fixed landmarks, flat xyz, world mm (at least one)
 */
export function landmarkRegion(labels: readonly string[], fixedMm: Float64Array): ErrorRegion {
  const n = fixedMm.length / 3;
  const c = [0, 0, 0];
  for (let i = 0; i < n; i++) for (let a = 0; a < 3; a++) c[a] += fixedMm[3 * i + a] / n;
  return {
    kind: "landmarks",
    pointsMm: new Float64Array(fixedMm),
    centerMm: [c[0], c[1], c[2]],
    radiusMm: null,
    stepMm: null,
    labels: [...labels],
  };
}

/**
 * Sum over points of |A p - B p|^q for q = 1 or 2, in float64.
 */
function displacementSum(a: Mat4, b: Mat4, points: Float64Array, squared: boolean): number {
  const d0 = a[0] - b[0];
  const d1 = a[1] - b[1];
  const d2 = a[2] - b[2];
  const d3 = a[3] - b[3];
  const d4 = a[4] - b[4];
  const d5 = a[5] - b[5];
  const d6 = a[6] - b[6];
  const d7 = a[7] - b[7];
  const d8 = a[8] - b[8];
  const d9 = a[9] - b[9];
  const d10 = a[10] - b[10];
  const d11 = a[11] - b[11];
  let sum = 0;
  for (let p = 0; p < points.length; p += 3) {
    const x = points[p];
    const y = points[p + 1];
    const z = points[p + 2];
    const ex = d0 * x + d1 * y + d2 * z + d3;
    const ey = d4 * x + d5 * y + d6 * z + d7;
    const ez = d8 * x + d9 * y + d10 * z + d11;
    const e2 = ex * ex + ey * ey + ez * ez;
    sum += squared ? e2 : Math.sqrt(e2);
  }
  return sum;
}

/**
 * RMS of |A p - B p| over points, mm.
 * @param a - first transform (e.g. the trial's), fixed -> moving
 * @param b - second transform (e.g. the reference)
 * @param points - flat xyz, fixed world mm (at least one point)
 */
export function rmsDisplacementMm(a: Mat4, b: Mat4, points: Float64Array): number {
  return Math.sqrt(displacementSum(a, b, points, true) / (points.length / 3));
}

/**
 * Mean of |A p - B p| over points, mm.
 * @param a - first transform, fixed -> moving
 * @param b - second transform
 * @param points - flat xyz, fixed world mm (at least one point)
 */
export function meanDisplacementMm(a: Mat4, b: Mat4, points: Float64Array): number {
  return displacementSum(a, b, points, false) / (points.length / 3);
}

/**
 * The error of `trial` against `reference` over a region: the mean over landmarks, or the RMS
 * over the sphere lattice (see the module header).
 * @param region - where and how to measure
 * @param trial - trial transform, fixed -> moving
 * @param reference - reference transform, fixed -> moving
 * @returns error in mm
 */
export function transformErrorMm(region: ErrorRegion, trial: Mat4, reference: Mat4): number {
  return region.kind === "landmarks"
    ? meanDisplacementMm(trial, reference, region.pointsMm)
    : rmsDisplacementMm(trial, reference, region.pointsMm);
}

/** One sentence that defines the error for a region (written into stress.json and the report). */
export function describeErrorRegion(region: ErrorRegion): string {
  if (region.kind === "landmarks") {
    return `error_mm = mean over the ${region.pointsMm.length / 3} fixed landmarks p of |T_trial(p) - T_ref(p)|, mm.`;
  }
  return `error_mm = RMS of |T_trial(x) - T_ref(x)| over the ${region.pointsMm.length / 3} points of a ${region.stepMm} mm cubic lattice within ${region.radiusMm} mm of the implant centre, mm.`;
}
