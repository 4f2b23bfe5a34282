/**
 * Paired point sets: least-squares rigid and similarity fits, residuals, and the expected
 * error of a point-based registration.
 *
 * Conventions:
 * - A point set is a flat Float64Array [x0, y0, z0, x1, y1, z1, ...] of world RAS+ mm.
 * - `fitPointSets(source, target)` returns the matrix mapping SOURCE to TARGET. For coxa's
 *   fixed-to-moving transform, fit fixed landmarks (source) to moving landmarks (target).
 * - Errors are Euclidean distances in mm.
 *
 * Methods:
 * - Fit: Umeyama (1991), "Least-squares estimation of transformation parameters between two
 *   point patterns", IEEE TPAMI 13(4): SVD of the cross-covariance, with the sign correction
 *   S = diag(1, 1, -1) when det(U)·det(V) < 0 so the result is a proper rotation, never a
 *   reflection (also for planar configurations).
 * - Predicted target registration error: Fitzpatrick, West & Maurer (1998), "Predicting error
 *   in rigid-body point-based registration", IEEE TMI 17(5):
 *       TRE²(r) ≈ FLE² / N · (1 + 1/3 · Σ_k d_k² / f_k²),
 *   d_k the distance of target r from principal axis k of the fiducial configuration, f_k the
 *   RMS distance of the fiducials from that axis, FLE² the expected squared (3-D) fiducial
 *   localisation error; and the expected fiducial registration error FRE² ≈ (1 - 2/N) FLE²
 *   (same paper), which turns an observed FRE into an FLE estimate.
 */
import { Matrix, SingularValueDecomposition } from "ml-matrix";
import { CoxaError } from "../common/errors.js";
import type { Mat4 } from "./mat4.js";
import { symmetricEigen } from "./symmetric-eigen.js";

/** Result of a least-squares point fit. */
export interface PointFit {
  /** 4x4 row-major matrix mapping source points to target points. */
  matrix: Mat4;
  /** Isotropic scale (1 for a rigid fit). */
  scale: number;
  /** Fiducial registration error: RMS distance between fitted source and target, mm. */
  freMm: number;
  /** True when the SVD solution was a reflection and the sign correction made it a rotation. */
  reflectionCorrected: boolean;
}

/** Summary statistics of a list of errors (mm). */
export interface ErrorStats {
  count: number;
  mean: number;
  median: number;
  rms: number;
  max: number;
}

function checkPoints(points: ArrayLike<number>, name: string): number {
  if (points.length % 3 !== 0) {
    throw new CoxaError(
      "BAD_ARGUMENT",
      `${name} points have ${points.length} coordinates, not a multiple of 3`,
    );
  }
  for (let i = 0; i < points.length; i++) {
    if (!Number.isFinite(points[i])) {
      throw new CoxaError("BAD_ARGUMENT", `${name} point ${Math.floor(i / 3)} has a non-finite coordinate`);
    }
  }
  return points.length / 3;
}

/**
 * Least-squares rigid (default) or similarity transform mapping `sourceMm` onto `targetMm`
 * (Umeyama 1991, reflection-safe).
 * @param sourceMm - N source points, flat xyz, mm
 * @param targetMm - the N paired target points, same order
 * @param options - `withScale: true` for a similarity fit (isotropic scale)
 * @throws CoxaError BAD_ARGUMENT when the sets differ in size or hold non-finite values;
 *   BAD_LANDMARKS when there are fewer than 3 pairs or the source points are (nearly)
 *   collinear, which leaves the rotation undetermined
 */
export function fitPointSets(
  sourceMm: ArrayLike<number>,
  targetMm: ArrayLike<number>,
  options: { withScale?: boolean } = {},
): PointFit {
  const n = checkPoints(sourceMm, "source");
  if (checkPoints(targetMm, "target") !== n) {
    throw new CoxaError("BAD_ARGUMENT", `point sets differ in size (${n} vs ${targetMm.length / 3})`);
  }
  if (n < 3) throw new CoxaError("BAD_LANDMARKS", `a point fit needs at least 3 pairs, got ${n}`);
  let msx = 0;
  let msy = 0;
  let msz = 0;
  let mtx = 0;
  let mty = 0;
  let mtz = 0;
  for (let i = 0; i < n; i++) {
    msx += sourceMm[3 * i];
    msy += sourceMm[3 * i + 1];
    msz += sourceMm[3 * i + 2];
    mtx += targetMm[3 * i];
    mty += targetMm[3 * i + 1];
    mtz += targetMm[3 * i + 2];
  }
  msx /= n;
  msy /= n;
  msz /= n;
  mtx /= n;
  mty /= n;
  mtz /= n;
  // Cross-covariance Σ = 1/n Σ (t - μt)(s - μs)ᵀ and source variance.
  const cov = [
    [0, 0, 0],
    [0, 0, 0],
    [0, 0, 0],
  ];
  let varSource = 0;
  for (let i = 0; i < n; i++) {
    const s = [sourceMm[3 * i] - msx, sourceMm[3 * i + 1] - msy, sourceMm[3 * i + 2] - msz];
    const t = [targetMm[3 * i] - mtx, targetMm[3 * i + 1] - mty, targetMm[3 * i + 2] - mtz];
    varSource += s[0] * s[0] + s[1] * s[1] + s[2] * s[2];
    for (let r = 0; r < 3; r++) for (let c = 0; c < 3; c++) cov[r][c] += t[r] * s[c];
  }
  varSource /= n;
  for (let r = 0; r < 3; r++) for (let c = 0; c < 3; c++) cov[r][c] /= n;

  // Rank of the source configuration from its own spread (the cross-covariance can also
  // drop rank for a degenerate target, which a least-squares fit tolerates).
  const inertia = scatterMatrix(sourceMm, n, msx, msy, msz);
  const ev = new Float64Array(3);
  symmetricEigen(inertia, 3, ev, new Float64Array(9));
  const sorted = Array.from(ev).sort((a, b) => b - a);
  if (!(sorted[0] > 0) || sorted[1] <= 1e-12 * sorted[0]) {
    throw new CoxaError(
      "BAD_LANDMARKS",
      "the points are collinear or coincide, so the rotation is undetermined (need 3 points not on one line)",
    );
  }

  const svd = new SingularValueDecomposition(new Matrix(cov), { autoTranspose: false });
  const u = svd.leftSingularVectors;
  const v = svd.rightSingularVectors;
  const d = svd.diagonal;
  const det3x3 = (m: Matrix): number =>
    m.get(0, 0) * (m.get(1, 1) * m.get(2, 2) - m.get(1, 2) * m.get(2, 1)) -
    m.get(0, 1) * (m.get(1, 0) * m.get(2, 2) - m.get(1, 2) * m.get(2, 0)) +
    m.get(0, 2) * (m.get(1, 0) * m.get(2, 1) - m.get(1, 1) * m.get(2, 0));
  const reflection = det3x3(u) * det3x3(v) < 0;
  const sLast = reflection ? -1 : 1;
  // R = U · diag(1, 1, sLast) · Vᵀ
  const rot = new Float64Array(9);
  for (let r = 0; r < 3; r++) {
    for (let c = 0; c < 3; c++) {
      rot[r * 3 + c] =
        u.get(r, 0) * v.get(c, 0) + u.get(r, 1) * v.get(c, 1) + sLast * u.get(r, 2) * v.get(c, 2);
    }
  }
  const scale = options.withScale ? (d[0] + d[1] + sLast * d[2]) / varSource : 1;
  const m = new Float64Array(16);
  for (let r = 0; r < 3; r++) for (let c = 0; c < 3; c++) m[r * 4 + c] = scale * rot[r * 3 + c];
  m[3] = mtx - (m[0] * msx + m[1] * msy + m[2] * msz);
  m[7] = mty - (m[4] * msx + m[5] * msy + m[6] * msz);
  m[11] = mtz - (m[8] * msx + m[9] * msy + m[10] * msz);
  m[15] = 1;
  const residuals = pointErrors(m, sourceMm, targetMm);
  let sum2 = 0;
  for (let i = 0; i < n; i++) sum2 += residuals[i] * residuals[i];
  return { matrix: m, scale, freMm: Math.sqrt(sum2 / n), reflectionCorrected: reflection };
}

/**
 * out = M · p for every point (may alias `pointsMm`).
 * @param out - receives the mapped points, flat xyz
 * @param matrix - 4x4 row-major affine
 * @param pointsMm - points, flat xyz, mm
 */
export function transformPoints(out: Float64Array, matrix: Mat4, pointsMm: ArrayLike<number>): Float64Array {
  for (let i = 0; i + 2 < pointsMm.length; i += 3) {
    const x = pointsMm[i];
    const y = pointsMm[i + 1];
    const z = pointsMm[i + 2];
    out[i] = matrix[0] * x + matrix[1] * y + matrix[2] * z + matrix[3];
    out[i + 1] = matrix[4] * x + matrix[5] * y + matrix[6] * z + matrix[7];
    out[i + 2] = matrix[8] * x + matrix[9] * y + matrix[10] * z + matrix[11];
  }
  return out;
}

/**
 * Per-point error |M · p_fixed - p_moving| in mm (the target registration error at each
 * landmark for a fixed-to-moving transform M).
 * @param matrix - fixed-to-moving 4x4 row-major matrix
 * @param fixedMm - N fixed points, flat xyz
 * @param movingMm - the N paired moving points
 * @param out - optional output of N numbers
 * @throws CoxaError BAD_ARGUMENT when the sets differ in size
 */
export function pointErrors(
  matrix: Mat4,
  fixedMm: ArrayLike<number>,
  movingMm: ArrayLike<number>,
  out?: Float64Array,
): Float64Array {
  if (fixedMm.length !== movingMm.length || fixedMm.length % 3 !== 0) {
    throw new CoxaError(
      "BAD_ARGUMENT",
      `point sets differ in size or are not xyz triples (${fixedMm.length} vs ${movingMm.length} coordinates)`,
    );
  }
  const n = fixedMm.length / 3;
  const res = out ?? new Float64Array(n);
  for (let i = 0; i < n; i++) {
    const x = fixedMm[3 * i];
    const y = fixedMm[3 * i + 1];
    const z = fixedMm[3 * i + 2];
    const dx = matrix[0] * x + matrix[1] * y + matrix[2] * z + matrix[3] - movingMm[3 * i];
    const dy = matrix[4] * x + matrix[5] * y + matrix[6] * z + matrix[7] - movingMm[3 * i + 1];
    const dz = matrix[8] * x + matrix[9] * y + matrix[10] * z + matrix[11] - movingMm[3 * i + 2];
    res[i] = Math.sqrt(dx * dx + dy * dy + dz * dz);
  }
  return res;
}

/**
 * Mean, median, RMS and maximum of a list of errors.
 * @param errors - errors in mm (at least one)
 * @throws CoxaError BAD_ARGUMENT for an empty list
 */
export function errorStats(errors: ArrayLike<number>): ErrorStats {
  const n = errors.length;
  if (n === 0) throw new CoxaError("BAD_ARGUMENT", "no errors to summarise");
  const sorted = Float64Array.from(errors).sort();
  let sum = 0;
  let sum2 = 0;
  for (let i = 0; i < n; i++) {
    sum += sorted[i];
    sum2 += sorted[i] * sorted[i];
  }
  const median = n % 2 === 1 ? sorted[(n - 1) / 2] : 0.5 * (sorted[n / 2 - 1] + sorted[n / 2]);
  return { count: n, mean: sum / n, median, rms: Math.sqrt(sum2 / n), max: sorted[n - 1] };
}

/**
 * Predicted RMS target registration error of a rigid point-based registration at each target
 * (Fitzpatrick, West & Maurer 1998), for isotropic fiducial localisation error.
 * @param fiducialsMm - the N >= 3 fiducial points the registration was fitted on, flat xyz, mm
 * @param targetsMm - points where the error is wanted, flat xyz, mm
 * @param fleMm - RMS fiducial localisation error (3-D magnitude, mm); when both point sets are
 *   noisy, the root sum of squares of the two
 * @param out - optional output, one value per target
 * @returns predicted RMS TRE per target in mm (+Infinity for a collinear configuration)
 * @throws CoxaError BAD_ARGUMENT for fewer than 3 fiducials or a negative FLE
 */
export function predictedTre(
  fiducialsMm: ArrayLike<number>,
  targetsMm: ArrayLike<number>,
  fleMm: number,
  out?: Float64Array,
): Float64Array {
  const n = checkPoints(fiducialsMm, "fiducial");
  const nt = checkPoints(targetsMm, "target");
  if (n < 3) throw new CoxaError("BAD_ARGUMENT", `predicted TRE needs at least 3 fiducials, got ${n}`);
  if (!(fleMm >= 0) || !Number.isFinite(fleMm)) {
    throw new CoxaError("BAD_ARGUMENT", `FLE is ${fleMm} mm; it must be finite and >= 0`);
  }
  let mx = 0;
  let my = 0;
  let mz = 0;
  for (let i = 0; i < n; i++) {
    mx += fiducialsMm[3 * i];
    my += fiducialsMm[3 * i + 1];
    mz += fiducialsMm[3 * i + 2];
  }
  mx /= n;
  my /= n;
  mz /= n;
  const k = scatterMatrix(fiducialsMm, n, mx, my, mz);
  const values = new Float64Array(3);
  const axes = new Float64Array(9); // column j = principal axis j
  symmetricEigen(k, 3, values, axes);
  // f_j² = mean squared distance of the fiducials from axis j = mean(|p|²) - (λ_j / N).
  let meanSq = 0;
  for (let i = 0; i < n; i++) {
    const dx = fiducialsMm[3 * i] - mx;
    const dy = fiducialsMm[3 * i + 1] - my;
    const dz = fiducialsMm[3 * i + 2] - mz;
    meanSq += dx * dx + dy * dy + dz * dz;
  }
  meanSq /= n;
  const f2 = new Float64Array(3);
  for (let j = 0; j < 3; j++) f2[j] = Math.max(0, meanSq - values[j] / n);
  const res = out ?? new Float64Array(nt);
  const fle2 = fleMm * fleMm;
  for (let t = 0; t < nt; t++) {
    const dx = targetsMm[3 * t] - mx;
    const dy = targetsMm[3 * t + 1] - my;
    const dz = targetsMm[3 * t + 2] - mz;
    const r2 = dx * dx + dy * dy + dz * dz;
    let ratio = 0;
    for (let j = 0; j < 3; j++) {
      const along = dx * axes[j] + dy * axes[3 + j] + dz * axes[6 + j];
      const d2 = Math.max(0, r2 - along * along);
      ratio += f2[j] > 1e-12 * meanSq ? d2 / f2[j] : Number.POSITIVE_INFINITY;
    }
    res[t] = Math.sqrt((fle2 / n) * (1 + ratio / 3));
  }
  return res;
}

/**
 * Expected RMS fiducial registration error of a rigid fit, FRE ≈ sqrt(1 - 2/N) · FLE
 * (Fitzpatrick, West & Maurer 1998).
 * @param fleMm - RMS fiducial localisation error, mm
 * @param count - number of fiducials N (>= 3)
 * @throws CoxaError BAD_ARGUMENT for N < 3
 */
export function expectedFre(fleMm: number, count: number): number {
  if (!(count >= 3))
    throw new CoxaError("BAD_ARGUMENT", `expected FRE needs at least 3 fiducials, got ${count}`);
  return fleMm * Math.sqrt(1 - 2 / count);
}

/**
 * FLE estimated from an observed FRE of a rigid fit: FLE ≈ FRE / sqrt(1 - 2/N)
 * (inverting the relation of Fitzpatrick, West & Maurer 1998).
 * @param freMm - observed RMS fiducial registration error, mm
 * @param count - number of fiducials N (>= 3)
 * @throws CoxaError BAD_ARGUMENT for N < 3
 */
export function estimateFle(freMm: number, count: number): number {
  if (!(count >= 3))
    throw new CoxaError("BAD_ARGUMENT", `an FLE estimate needs at least 3 fiducials, got ${count}`);
  return freMm / Math.sqrt(1 - 2 / count);
}

/**
 * Scatter matrix sum_i (p_i - c)(p_i - c)^T (3x3 row-major) of n points about the centre c.
 * @param pointsMm - flat xyz, mm
 */
function scatterMatrix(
  pointsMm: ArrayLike<number>,
  n: number,
  cx: number,
  cy: number,
  cz: number,
): Float64Array {
  const out = new Float64Array(9);
  for (let i = 0; i < n; i++) {
    const dx = pointsMm[3 * i] - cx;
    const dy = pointsMm[3 * i + 1] - cy;
    const dz = pointsMm[3 * i + 2] - cz;
    out[0] += dx * dx;
    out[1] += dx * dy;
    out[2] += dx * dz;
    out[4] += dy * dy;
    out[5] += dy * dz;
    out[8] += dz * dz;
  }
  out[3] = out[1];
  out[6] = out[2];
  out[7] = out[5];
  return out;
}
