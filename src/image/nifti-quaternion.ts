/**
 * The NIfTI-1 qform: quaternion (b, c, d), offsets, pixdim and qfac <-> 4x4 matrix.
 *
 * Formulas of the NIfTI-1 standard (nifti1.h, "METHOD 2"), with the numerical handling of its
 * reference library nifti1_io.c (nifti_quatern_to_mat44 / nifti_mat44_to_quatern, written here
 * from the published description): a = sqrt(1 - b² - c² - d²), or the quaternion is
 * renormalised with a = 0 when that is tiny; qfac = -1 flips the third column; the matrix ->
 * quaternion direction first orthogonalises the rotation part by the polar decomposition.
 */
import { identity, type Mat4 } from "../geometry/mat4.js";

/** qform parameters as stored in a NIfTI header. */
export interface QformParams {
  quaternB: number;
  quaternC: number;
  quaternD: number;
  qoffset: [number, number, number];
  /** pixdim[1..3] in mm */
  pixdim: [number, number, number];
  /** pixdim[0]: -1 or 1 */
  qfac: number;
}

/** The qform matrix (index -> world mm) of the standard's method 2. */
export function quaternionToMatrix(q: QformParams): Mat4 {
  let b = q.quaternB;
  let c = q.quaternC;
  let d = q.quaternD;
  let a = 1 - (b * b + c * c + d * d);
  if (a < 1e-7) {
    a = 1 / Math.sqrt(b * b + c * c + d * d);
    b *= a;
    c *= a;
    d *= a;
    a = 0;
  } else {
    a = Math.sqrt(a);
  }
  const xd = q.pixdim[0] > 0 ? q.pixdim[0] : 1;
  const yd = q.pixdim[1] > 0 ? q.pixdim[1] : 1;
  let zd = q.pixdim[2] > 0 ? q.pixdim[2] : 1;
  if (q.qfac < 0) zd = -zd;
  const m = identity();
  m[0] = (a * a + b * b - c * c - d * d) * xd;
  m[1] = 2 * (b * c - a * d) * yd;
  m[2] = 2 * (b * d + a * c) * zd;
  m[4] = 2 * (b * c + a * d) * xd;
  m[5] = (a * a + c * c - b * b - d * d) * yd;
  m[6] = 2 * (c * d - a * b) * zd;
  m[8] = 2 * (b * d - a * c) * xd;
  m[9] = 2 * (c * d + a * b) * yd;
  m[10] = (a * a + d * d - c * c - b * b) * zd;
  m[3] = q.qoffset[0];
  m[7] = q.qoffset[1];
  m[11] = q.qoffset[2];
  return m;
}

/** Orthogonal factor of the polar decomposition of a 3x3 matrix (row-major, 9 entries). */
function polarOrthogonal(r: number[]): number[] {
  let x = r.slice();
  for (let iter = 0; iter < 100; iter++) {
    const inv = invert3(x);
    if (!inv) break;
    // X <- (X + X^-T) / 2
    const next = new Array<number>(9);
    for (let i = 0; i < 3; i++)
      for (let j = 0; j < 3; j++) next[i * 3 + j] = 0.5 * (x[i * 3 + j] + inv[j * 3 + i]);
    let change = 0;
    for (let i = 0; i < 9; i++) change = Math.max(change, Math.abs(next[i] - x[i]));
    x = next;
    if (change < 1e-15) break;
  }
  return x;
}

function invert3(m: number[]): number[] | undefined {
  const [a, b, c, d, e, f, g, h, i] = m;
  const det = a * (e * i - f * h) - b * (d * i - f * g) + c * (d * h - e * g);
  if (!(Math.abs(det) > 1e-300)) return undefined;
  const k = 1 / det;
  return [
    (e * i - f * h) * k,
    (c * h - b * i) * k,
    (b * f - c * e) * k,
    (f * g - d * i) * k,
    (a * i - c * g) * k,
    (c * d - a * f) * k,
    (d * h - e * g) * k,
    (b * g - a * h) * k,
    (a * e - b * d) * k,
  ];
}

/** The qform parameters that reproduce the rotation, pixdim and offset of `m` (standard's method). */
export function matrixToQuaternion(m: Mat4): QformParams {
  const qoffset: [number, number, number] = [m[3], m[7], m[11]];
  let r11 = m[0],
    r12 = m[1],
    r13 = m[2];
  let r21 = m[4],
    r22 = m[5],
    r23 = m[6];
  let r31 = m[8],
    r32 = m[9],
    r33 = m[10];
  let xd = Math.sqrt(r11 * r11 + r21 * r21 + r31 * r31);
  let yd = Math.sqrt(r12 * r12 + r22 * r22 + r32 * r32);
  let zd = Math.sqrt(r13 * r13 + r23 * r23 + r33 * r33);
  if (xd === 0) {
    r11 = 1;
    r21 = r31 = 0;
    xd = 1;
  }
  if (yd === 0) {
    r22 = 1;
    r12 = r32 = 0;
    yd = 1;
  }
  if (zd === 0) {
    r33 = 1;
    r13 = r23 = 0;
    zd = 1;
  }
  const pixdim: [number, number, number] = [xd, yd, zd];
  const p = polarOrthogonal([
    r11 / xd,
    r12 / yd,
    r13 / zd,
    r21 / xd,
    r22 / yd,
    r23 / zd,
    r31 / xd,
    r32 / yd,
    r33 / zd,
  ]);
  [r11, r12, r13, r21, r22, r23, r31, r32, r33] = p;
  const det = r11 * (r22 * r33 - r32 * r23) - r12 * (r21 * r33 - r31 * r23) + r13 * (r21 * r32 - r31 * r22);
  let qfac = 1;
  if (det <= 0) {
    qfac = -1;
    r13 = -r13;
    r23 = -r23;
    r33 = -r33;
  }
  let a = r11 + r22 + r33 + 1;
  let b: number;
  let c: number;
  let d: number;
  if (a > 0.5) {
    a = 0.5 * Math.sqrt(a);
    b = (0.25 * (r32 - r23)) / a;
    c = (0.25 * (r13 - r31)) / a;
    d = (0.25 * (r21 - r12)) / a;
  } else {
    const xx = 1 + r11 - (r22 + r33);
    const yy = 1 + r22 - (r11 + r33);
    const zz = 1 + r33 - (r11 + r22);
    if (xx > 1) {
      b = 0.5 * Math.sqrt(xx);
      c = (0.25 * (r12 + r21)) / b;
      d = (0.25 * (r13 + r31)) / b;
      a = (0.25 * (r32 - r23)) / b;
    } else if (yy > 1) {
      c = 0.5 * Math.sqrt(yy);
      b = (0.25 * (r12 + r21)) / c;
      d = (0.25 * (r23 + r32)) / c;
      a = (0.25 * (r13 - r31)) / c;
    } else {
      d = 0.5 * Math.sqrt(zz);
      b = (0.25 * (r13 + r31)) / d;
      c = (0.25 * (r23 + r32)) / d;
      a = (0.25 * (r21 - r12)) / d;
    }
    if (a < 0) {
      b = -b;
      c = -c;
      d = -d;
    }
  }
  return { quaternB: b, quaternC: c, quaternD: d, qoffset, pixdim, qfac };
}

/**
 * Largest deviation of the 3x3 block's columns from mutual orthogonality (|cos| of the angle
 * between unit columns). Zero for rotation·scaling; larger when the affine has shear.
 */
export function shearOf(m: Mat4): number {
  const cols = [0, 1, 2].map((c) => {
    const v = [m[c], m[4 + c], m[8 + c]];
    const n = Math.hypot(v[0], v[1], v[2]) || 1;
    return [v[0] / n, v[1] / n, v[2] / n];
  });
  let worst = 0;
  for (const [p, q] of [
    [0, 1],
    [0, 2],
    [1, 2],
  ]) {
    worst = Math.max(
      worst,
      Math.abs(cols[p][0] * cols[q][0] + cols[p][1] * cols[q][1] + cols[p][2] * cols[q][2]),
    );
  }
  return worst;
}
