/**
 * Transform models and their parameter vectors: rigid (6), similarity (7), affine (12).
 *
 * Every model is parameterised about an explicit centre c (world mm; the fixed image centre or
 * a mask centroid) as
 *     M(x) = R · S · H · (x - c) + c + t,    i.e.  M = T(c + t) · R · S · H · T(-c),
 * with R = Rz · Ry · Rx (angles in degrees about the world x, y, z axes, design.md), S = diag
 * of positive scales and H the upper-triangular shear
 *     H = [[1, h_xy, h_xz], [0, 1, h_yz], [0, 0, 1]].
 * M maps FIXED world mm to MOVING world mm (x_moving = M · x_fixed), like every coxa transform.
 *
 * Parameter vector layout (fixed; tests and the driver rely on it):
 *     index  0   1   2   3   4   5   6          7          8          9     10    11
 *     rigid  rx  ry  rz  tx  ty  tz
 *     simil. rx  ry  rz  tx  ty  tz  ln s
 *     affine rx  ry  rz  tx  ty  tz  ln sx      ln sy      ln sz      h_xy  h_xz  h_yz
 * Angles in degrees, translations in mm, scales as natural logarithms (so every real value is a
 * valid, orientation-preserving transform and 0 is identity), shears dimensionless. The
 * all-zero vector is the identity for every model.
 *
 * Decomposition (`matrixToParameters`): affine by QR of the 3x3 block (Gram-Schmidt, R the
 * orthogonal factor, S·H the upper-triangular factor with positive diagonal; unique for
 * det > 0). Rigid and similarity take the nearest rotation, the orthogonal polar factor
 * (computed by Higham's scaled Newton iteration, Higham 1986, "Computing the polar
 * decomposition - with applications", SIAM J. Sci. Stat. Comput. 7), and for similarity the
 * Frobenius-nearest scale trace(Rᵀ A) / 3. The translation always makes M(c) agree with the
 * input matrix at the centre.
 */
import { CoxaError } from "../common/errors.js";
import type { Mat4 } from "./mat4.js";

/** The three transform models. */
export type TransformModel = "rigid" | "similarity" | "affine";

/** All models, in order of increasing freedom. */
export const TRANSFORM_MODELS: readonly TransformModel[] = ["rigid", "similarity", "affine"];

/** The `parameters` block of transform.json (design.md), snake_case as in the file. */
export interface ParametersBlock {
  /** Centre c of rotation, scaling and shear, world mm. */
  center_mm: [number, number, number];
  /** [rx, ry, rz] in degrees, R = Rz·Ry·Rx. */
  rotation_deg: [number, number, number];
  /** t in mm: M(c) = c + t. */
  translation_mm: [number, number, number];
  /** [sx, sy, sz] (linear; 1 = none). */
  scale: [number, number, number];
  /** [h_xy, h_xz, h_yz] (0 = none). */
  shear: [number, number, number];
}

const DEG = Math.PI / 180;
const COUNTS: Readonly<Record<TransformModel, number>> = { rigid: 6, similarity: 7, affine: 12 };
const RIGID_NAMES = [
  "rotation_x_deg",
  "rotation_y_deg",
  "rotation_z_deg",
  "translation_x_mm",
  "translation_y_mm",
  "translation_z_mm",
] as const;
const NAMES: Readonly<Record<TransformModel, readonly string[]>> = {
  rigid: RIGID_NAMES,
  similarity: [...RIGID_NAMES, "log_scale"],
  affine: [...RIGID_NAMES, "log_scale_x", "log_scale_y", "log_scale_z", "shear_xy", "shear_xz", "shear_yz"],
};

/** True when `value` names a transform model. */
export function isTransformModel(value: unknown): value is TransformModel {
  return value === "rigid" || value === "similarity" || value === "affine";
}

/** Number of parameters of `model`: 6, 7 or 12. */
export function parameterCount(model: TransformModel): number {
  const n = COUNTS[model];
  if (n === undefined) throw new CoxaError("BAD_ARGUMENT", `unknown transform model "${model}"`);
  return n;
}

/** Names of the parameters of `model` in vector order, with units (e.g. "rotation_x_deg"). */
export function parameterNames(model: TransformModel): readonly string[] {
  parameterCount(model);
  return NAMES[model];
}

/** The identity parameter vector of `model` (all zeros). */
export function identityParameters(model: TransformModel): Float64Array {
  return new Float64Array(parameterCount(model));
}

/**
 * out = M(params) about `centerMm`, the fixed-to-moving world matrix. Allocation-free; called
 * once per metric evaluation.
 * @param out - receives the 4x4 row-major matrix
 * @param model - transform model; `params` must have at least its parameter count
 * @param params - parameter vector (layout in the module header)
 * @param centerMm - centre c in world mm
 * @returns `out`
 */
export function parametersToMatrix(
  out: Mat4,
  model: TransformModel,
  params: ArrayLike<number>,
  centerMm: ArrayLike<number>,
): Mat4 {
  const cxr = Math.cos(params[0] * DEG);
  const sxr = Math.sin(params[0] * DEG);
  const cyr = Math.cos(params[1] * DEG);
  const syr = Math.sin(params[1] * DEG);
  const czr = Math.cos(params[2] * DEG);
  const szr = Math.sin(params[2] * DEG);
  // R = Rz · Ry · Rx
  const r00 = czr * cyr;
  const r01 = czr * syr * sxr - szr * cxr;
  const r02 = czr * syr * cxr + szr * sxr;
  const r10 = szr * cyr;
  const r11 = szr * syr * sxr + czr * cxr;
  const r12 = szr * syr * cxr - czr * sxr;
  const r20 = 0 - syr; // +0 (not -0) at zero angle
  const r21 = cyr * sxr;
  const r22 = cyr * cxr;
  let a00 = r00;
  let a01 = r01;
  let a02 = r02;
  let a10 = r10;
  let a11 = r11;
  let a12 = r12;
  let a20 = r20;
  let a21 = r21;
  let a22 = r22;
  if (model === "similarity") {
    const s = Math.exp(params[6]);
    a00 *= s;
    a01 *= s;
    a02 *= s;
    a10 *= s;
    a11 *= s;
    a12 *= s;
    a20 *= s;
    a21 *= s;
    a22 *= s;
  } else if (model === "affine") {
    // U = S · H = [[sx, sx h_xy, sx h_xz], [0, sy, sy h_yz], [0, 0, sz]]; A = R · U.
    const sx = Math.exp(params[6]);
    const sy = Math.exp(params[7]);
    const sz = Math.exp(params[8]);
    const u01 = sx * params[9];
    const u02 = sx * params[10];
    const u12 = sy * params[11];
    a00 = r00 * sx;
    a01 = r00 * u01 + r01 * sy;
    a02 = r00 * u02 + r01 * u12 + r02 * sz;
    a10 = r10 * sx;
    a11 = r10 * u01 + r11 * sy;
    a12 = r10 * u02 + r11 * u12 + r12 * sz;
    a20 = r20 * sx;
    a21 = r20 * u01 + r21 * sy;
    a22 = r20 * u02 + r21 * u12 + r22 * sz;
  }
  const cx = centerMm[0];
  const cy = centerMm[1];
  const cz = centerMm[2];
  out[0] = a00;
  out[1] = a01;
  out[2] = a02;
  out[3] = cx + params[3] - (a00 * cx + a01 * cy + a02 * cz);
  out[4] = a10;
  out[5] = a11;
  out[6] = a12;
  out[7] = cy + params[4] - (a10 * cx + a11 * cy + a12 * cz);
  out[8] = a20;
  out[9] = a21;
  out[10] = a22;
  out[11] = cz + params[5] - (a20 * cx + a21 * cy + a22 * cz);
  out[12] = 0;
  out[13] = 0;
  out[14] = 0;
  out[15] = 1;
  return out;
}

// Scratch for the decompositions (single-threaded module state; no re-entrancy).
const polarX = new Float64Array(9);
const polarInvT = new Float64Array(9);
const blockScratch = new Float64Array(9);
const rotationScratch = new Float64Array(9);

/** Inverse-transpose of the 3x3 row-major `a` into `out`; returns the determinant. */
function inverseTranspose3(out: Float64Array, a: Float64Array): number {
  const c00 = a[4] * a[8] - a[5] * a[7];
  const c01 = a[5] * a[6] - a[3] * a[8];
  const c02 = a[3] * a[7] - a[4] * a[6];
  const det = a[0] * c00 + a[1] * c01 + a[2] * c02;
  const inv = 1 / det;
  // (A^-1)^T = cofactor matrix / det.
  out[0] = c00 * inv;
  out[1] = c01 * inv;
  out[2] = c02 * inv;
  out[3] = (a[2] * a[7] - a[1] * a[8]) * inv;
  out[4] = (a[0] * a[8] - a[2] * a[6]) * inv;
  out[5] = (a[1] * a[6] - a[0] * a[7]) * inv;
  out[6] = (a[1] * a[5] - a[2] * a[4]) * inv;
  out[7] = (a[2] * a[3] - a[0] * a[5]) * inv;
  out[8] = (a[0] * a[4] - a[1] * a[3]) * inv;
  return det;
}

/** Orthogonal polar factor of the 3x3 row-major `a` (det > 0) into `out`. */
function polarRotation(out: Float64Array, a: ArrayLike<number>): Float64Array {
  const x = polarX;
  for (let i = 0; i < 9; i++) x[i] = a[i];
  for (let iter = 0; iter < 50; iter++) {
    inverseTranspose3(polarInvT, x);
    let nx = 0;
    let ni = 0;
    for (let i = 0; i < 9; i++) {
      nx += x[i] * x[i];
      ni += polarInvT[i] * polarInvT[i];
    }
    // Frobenius-norm scaling (Higham 1986, eq. 3.2) speeds up the early iterations.
    const gamma = iter < 6 ? Math.sqrt(Math.sqrt(ni / nx)) : 1;
    let change = 0;
    for (let i = 0; i < 9; i++) {
      const next = 0.5 * (gamma * x[i] + polarInvT[i] / gamma);
      change = Math.max(change, Math.abs(next - x[i]));
      x[i] = next;
    }
    if (change < 1e-15 && iter >= 6) break;
  }
  for (let i = 0; i < 9; i++) out[i] = x[i];
  return out;
}

/** Write [rx, ry, rz] in degrees for the row-major rotation `r` into out[0..2]. */
function anglesFromRotation(out: Float64Array, r: ArrayLike<number>): void {
  const sy = Math.max(-1, Math.min(1, -r[6]));
  const ry = Math.asin(sy);
  let rx: number;
  let rz: number;
  if (Math.abs(sy) < 1 - 1e-12) {
    rx = Math.atan2(r[7], r[8]);
    rz = Math.atan2(r[3], r[0]);
  } else {
    // Gimbal lock (ry = ±90 deg): only rz ∓ rx is determined; put it all in rz.
    rx = 0;
    rz = Math.atan2(-r[1], r[4]);
  }
  out[0] = rx / DEG;
  out[1] = ry / DEG;
  out[2] = rz / DEG;
}

/**
 * Parameters of `model` about `centerMm` for a fixed-to-moving matrix (the inverse of
 * `parametersToMatrix`; exact for a matrix of that model, the nearest model member otherwise,
 * see the module header).
 * @param model - transform model
 * @param matrix - 4x4 row-major affine (last row 0 0 0 1)
 * @param centerMm - centre c in world mm
 * @param out - optional output of the model's parameter count
 * @returns the parameter vector; angles with rx, rz in (-180, 180], ry in [-90, 90]
 * @throws CoxaError BAD_TRANSFORM when the matrix is not finite, singular or mirrors
 *   (determinant <= 0), which no model here can represent
 */
export function matrixToParameters(
  model: TransformModel,
  matrix: Mat4,
  centerMm: ArrayLike<number>,
  out: Float64Array = new Float64Array(parameterCount(model)),
): Float64Array {
  const a = blockScratch;
  for (let r = 0; r < 3; r++) for (let c = 0; c < 3; c++) a[r * 3 + c] = matrix[r * 4 + c];
  for (let i = 0; i < 16; i++) {
    if (!Number.isFinite(matrix[i])) throw new CoxaError("BAD_TRANSFORM", "matrix has non-finite entries");
  }
  const det =
    a[0] * (a[4] * a[8] - a[5] * a[7]) -
    a[1] * (a[3] * a[8] - a[5] * a[6]) +
    a[2] * (a[3] * a[7] - a[4] * a[6]);
  let norm = 0;
  for (let i = 0; i < 9; i++) norm = Math.max(norm, Math.abs(a[i]));
  if (!(det > 1e-12 * norm * norm * norm)) {
    throw new CoxaError(
      "BAD_TRANSFORM",
      det < 0
        ? `matrix mirrors space (determinant ${det.toPrecision(3)}); a ${model} transform cannot`
        : "matrix is singular",
    );
  }
  const rot = rotationScratch;
  if (model === "affine") {
    // Gram-Schmidt on the columns: A = Q U with U upper triangular, positive diagonal.
    const c0x = a[0];
    const c0y = a[3];
    const c0z = a[6];
    const u00 = Math.hypot(c0x, c0y, c0z);
    const q0x = c0x / u00;
    const q0y = c0y / u00;
    const q0z = c0z / u00;
    const u01 = q0x * a[1] + q0y * a[4] + q0z * a[7];
    let c1x = a[1] - u01 * q0x;
    let c1y = a[4] - u01 * q0y;
    let c1z = a[7] - u01 * q0z;
    const u11 = Math.hypot(c1x, c1y, c1z);
    c1x /= u11;
    c1y /= u11;
    c1z /= u11;
    const u02 = q0x * a[2] + q0y * a[5] + q0z * a[8];
    let c2x = a[2] - u02 * q0x;
    let c2y = a[5] - u02 * q0y;
    let c2z = a[8] - u02 * q0z;
    const u12 = c1x * c2x + c1y * c2y + c1z * c2z;
    c2x -= u12 * c1x;
    c2y -= u12 * c1y;
    c2z -= u12 * c1z;
    const u22 = Math.hypot(c2x, c2y, c2z);
    c2x /= u22;
    c2y /= u22;
    c2z /= u22;
    rot[0] = q0x;
    rot[1] = c1x;
    rot[2] = c2x;
    rot[3] = q0y;
    rot[4] = c1y;
    rot[5] = c2y;
    rot[6] = q0z;
    rot[7] = c1z;
    rot[8] = c2z;
    anglesFromRotation(out, rot);
    out[6] = Math.log(u00);
    out[7] = Math.log(u11);
    out[8] = Math.log(u22);
    out[9] = u01 / u00;
    out[10] = u02 / u00;
    out[11] = u12 / u11;
  } else {
    polarRotation(rot, a);
    anglesFromRotation(out, rot);
    if (model === "similarity") {
      let tr = 0;
      for (let i = 0; i < 9; i++) tr += rot[i] * a[i];
      out[6] = Math.log(tr / 3);
    } else if (model !== "rigid") {
      throw new CoxaError("BAD_ARGUMENT", `unknown transform model "${model}"`);
    }
  }
  const cx = centerMm[0];
  const cy = centerMm[1];
  const cz = centerMm[2];
  out[3] = matrix[0] * cx + matrix[1] * cy + matrix[2] * cz + matrix[3] - cx;
  out[4] = matrix[4] * cx + matrix[5] * cy + matrix[6] * cz + matrix[7] - cy;
  out[5] = matrix[8] * cx + matrix[9] * cy + matrix[10] * cz + matrix[11] - cz;
  return out;
}

/**
 * Per-parameter steps such that one step of any parameter moves points at `radiusMm` from the
 * centre by about 1 mm: rotations 180/(π r) deg, translations 1 mm, log-scales and shears 1/r.
 * Pass them as the optimiser's `scales` so millimetres and degrees weigh alike.
 * @param model - transform model
 * @param radiusMm - typical distance of image content from the centre, mm (> 0)
 * @throws CoxaError BAD_ARGUMENT for a radius that is not finite and > 0
 */
export function parameterScales(model: TransformModel, radiusMm: number): Float64Array {
  if (!(radiusMm > 0) || !Number.isFinite(radiusMm)) {
    throw new CoxaError(
      "BAD_ARGUMENT",
      `parameter-scale radius is ${radiusMm} mm; it must be finite and > 0`,
    );
  }
  const out = new Float64Array(parameterCount(model));
  const rotation = 1 / (radiusMm * DEG);
  out[0] = out[1] = out[2] = rotation;
  out[3] = out[4] = out[5] = 1;
  for (let i = 6; i < out.length; i++) out[i] = 1 / radiusMm;
  return out;
}

/**
 * The transform.json `parameters` block for a parameter vector.
 * @param model - transform model
 * @param params - parameter vector
 * @param centerMm - centre c in world mm
 */
export function describeParameters(
  model: TransformModel,
  params: ArrayLike<number>,
  centerMm: ArrayLike<number>,
): ParametersBlock {
  parameterCount(model);
  let scale: [number, number, number] = [1, 1, 1];
  let shear: [number, number, number] = [0, 0, 0];
  if (model === "similarity") {
    const s = Math.exp(params[6]);
    scale = [s, s, s];
  } else if (model === "affine") {
    scale = [Math.exp(params[6]), Math.exp(params[7]), Math.exp(params[8])];
    shear = [params[9], params[10], params[11]];
  }
  return {
    center_mm: [centerMm[0], centerMm[1], centerMm[2]],
    rotation_deg: [params[0], params[1], params[2]],
    translation_mm: [params[3], params[4], params[5]],
    scale,
    shear,
  };
}

/**
 * The same transform expressed about another centre: only the translation changes,
 * t' = t + (I - A)(c - c'), where A is the 3x3 block.
 * @param model - transform model
 * @param params - parameters about `fromCenterMm`
 * @param fromCenterMm - current centre, world mm
 * @param toCenterMm - new centre, world mm
 * @param out - optional output (may be `params`)
 * @returns parameters about `toCenterMm` giving the identical matrix
 */
export function recenterParameters(
  model: TransformModel,
  params: ArrayLike<number>,
  fromCenterMm: ArrayLike<number>,
  toCenterMm: ArrayLike<number>,
  out: Float64Array = new Float64Array(parameterCount(model)),
): Float64Array {
  const m = parametersToMatrix(new Float64Array(16), model, params, fromCenterMm);
  const n = parameterCount(model);
  for (let i = 0; i < n; i++) out[i] = params[i];
  const dx = fromCenterMm[0] - toCenterMm[0];
  const dy = fromCenterMm[1] - toCenterMm[1];
  const dz = fromCenterMm[2] - toCenterMm[2];
  out[3] = params[3] + dx - (m[0] * dx + m[1] * dy + m[2] * dz);
  out[4] = params[4] + dy - (m[4] * dx + m[5] * dy + m[6] * dz);
  out[5] = params[5] + dz - (m[8] * dx + m[9] * dy + m[10] * dz);
  return out;
}

/**
 * Parameters of another model for (nearly) the same transform about the same centre. Going to
 * a richer model is exact (rigid -> similarity adds ln s = 0; -> affine copies the scale to all
 * three axes with zero shear); going to a poorer one projects through `matrixToParameters`.
 * @param fromModel - model of `params`
 * @param params - parameter vector
 * @param toModel - wanted model
 * @param centerMm - the centre both vectors refer to, world mm
 * @throws CoxaError BAD_TRANSFORM when a projection meets a mirroring matrix
 */
export function convertParameters(
  fromModel: TransformModel,
  params: ArrayLike<number>,
  toModel: TransformModel,
  centerMm: ArrayLike<number>,
): Float64Array {
  const nFrom = parameterCount(fromModel);
  const nTo = parameterCount(toModel);
  if (nTo >= nFrom) {
    const out = new Float64Array(nTo);
    for (let i = 0; i < nFrom; i++) out[i] = params[i];
    if (fromModel === "similarity" && toModel === "affine") {
      out[7] = params[6];
      out[8] = params[6];
    }
    return out;
  }
  const m = parametersToMatrix(new Float64Array(16), fromModel, params, centerMm);
  return matrixToParameters(toModel, m, centerMm);
}
