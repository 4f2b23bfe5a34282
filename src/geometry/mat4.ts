/**
 * 4x4 homogeneous matrices for world-space geometry.
 *
 * Storage: `Mat4` is a Float64Array of 16 numbers in ROW-MAJOR order, m[r * 4 + c], so that
 * `m[3]`, `m[7]`, `m[11]` are the translation. Points are column vectors: p' = M · p.
 * Functions take `out` first and return it; `out` may alias an input.
 */
import { CoxaError } from "../common/errors.js";

export type Mat4 = Float64Array;
export type Vec3 = Float64Array | [number, number, number] | number[];

/** A new identity matrix. */
export function identity(): Mat4 {
  const m = new Float64Array(16);
  m[0] = m[5] = m[10] = m[15] = 1;
  return m;
}

/** Copy of `a`. */
export function clone(a: Mat4): Mat4 {
  return new Float64Array(a);
}

/** Matrix from nested rows ([[..4..] x 3 or 4]); a missing last row becomes [0,0,0,1]. */
export function fromRows(rows: readonly (readonly number[])[]): Mat4 {
  const m = identity();
  if (rows.length !== 3 && rows.length !== 4) {
    throw new CoxaError("BAD_ARGUMENT", `a 4x4 matrix needs 3 or 4 rows, got ${rows.length}`);
  }
  for (let r = 0; r < rows.length; r++) {
    const row = rows[r];
    if (row.length !== 4)
      throw new CoxaError("BAD_ARGUMENT", `matrix row ${r} has ${row.length} entries, not 4`);
    for (let c = 0; c < 4; c++) {
      const v = row[c];
      if (typeof v !== "number" || !Number.isFinite(v)) {
        throw new CoxaError("BAD_ARGUMENT", `matrix entry [${r}][${c}] is not a finite number`);
      }
      m[r * 4 + c] = v;
    }
  }
  return m;
}

/** Nested rows [[m00..m03],..,[m30..m33]] for JSON. */
export function toRows(m: Mat4): number[][] {
  return [0, 1, 2, 3].map((r) => [m[r * 4], m[r * 4 + 1], m[r * 4 + 2], m[r * 4 + 3]]);
}

/** out = a · b */
export function multiply(out: Mat4, a: Mat4, b: Mat4): Mat4 {
  const a00 = a[0],
    a01 = a[1],
    a02 = a[2],
    a03 = a[3];
  const a10 = a[4],
    a11 = a[5],
    a12 = a[6],
    a13 = a[7];
  const a20 = a[8],
    a21 = a[9],
    a22 = a[10],
    a23 = a[11];
  const a30 = a[12],
    a31 = a[13],
    a32 = a[14],
    a33 = a[15];
  for (let c = 0; c < 4; c++) {
    const b0 = b[c],
      b1 = b[4 + c],
      b2 = b[8 + c],
      b3 = b[12 + c];
    out[c] = a00 * b0 + a01 * b1 + a02 * b2 + a03 * b3;
    out[4 + c] = a10 * b0 + a11 * b1 + a12 * b2 + a13 * b3;
    out[8 + c] = a20 * b0 + a21 * b1 + a22 * b2 + a23 * b3;
    out[12 + c] = a30 * b0 + a31 * b1 + a32 * b2 + a33 * b3;
  }
  return out;
}

/** Product of several matrices, left to right: a · b · c ... */
export function compose(...ms: Mat4[]): Mat4 {
  const out = identity();
  for (const m of ms) multiply(out, out, m);
  return out;
}

/** Determinant of the upper-left 3x3 block. */
export function det3(m: Mat4): number {
  return (
    m[0] * (m[5] * m[10] - m[6] * m[9]) -
    m[1] * (m[4] * m[10] - m[6] * m[8]) +
    m[2] * (m[4] * m[9] - m[5] * m[8])
  );
}

/** True when all 16 entries are finite. */
export function isFiniteMat(m: Mat4): boolean {
  for (let i = 0; i < 16; i++) if (!Number.isFinite(m[i])) return false;
  return true;
}

/**
 * Reciprocal condition-style check of the 3x3 block: |det| relative to the product of the
 * column norms (1 for orthogonal columns, 0 for dependent ones). Scale-free, so a tolerance on
 * it does not depend on the voxel size in mm.
 */
export function relativeDeterminant(m: Mat4): number {
  const n0 = Math.hypot(m[0], m[4], m[8]);
  const n1 = Math.hypot(m[1], m[5], m[9]);
  const n2 = Math.hypot(m[2], m[6], m[10]);
  const denom = n0 * n1 * n2;
  return denom > 0 ? Math.abs(det3(m)) / denom : 0;
}

/**
 * out = a⁻¹ for an affine matrix (last row 0,0,0,1).
 * @throws CoxaError BAD_AFFINE when the matrix is non-finite or (relatively) singular
 */
export function invertAffine(out: Mat4, a: Mat4): Mat4 {
  if (!isFiniteMat(a)) throw new CoxaError("BAD_AFFINE", "matrix has non-finite entries");
  if (relativeDeterminant(a) < 1e-10) throw new CoxaError("BAD_AFFINE", "matrix is singular");
  const a00 = a[0],
    a01 = a[1],
    a02 = a[2],
    a03 = a[3];
  const a10 = a[4],
    a11 = a[5],
    a12 = a[6],
    a13 = a[7];
  const a20 = a[8],
    a21 = a[9],
    a22 = a[10],
    a23 = a[11];
  const c00 = a11 * a22 - a12 * a21;
  const c01 = a02 * a21 - a01 * a22;
  const c02 = a01 * a12 - a02 * a11;
  const c10 = a12 * a20 - a10 * a22;
  const c11 = a00 * a22 - a02 * a20;
  const c12 = a02 * a10 - a00 * a12;
  const c20 = a10 * a21 - a11 * a20;
  const c21 = a01 * a20 - a00 * a21;
  const c22 = a00 * a11 - a01 * a10;
  const inv = 1 / (a00 * c00 + a01 * c10 + a02 * c20);
  out[0] = c00 * inv;
  out[1] = c01 * inv;
  out[2] = c02 * inv;
  out[4] = c10 * inv;
  out[5] = c11 * inv;
  out[6] = c12 * inv;
  out[8] = c20 * inv;
  out[9] = c21 * inv;
  out[10] = c22 * inv;
  out[3] = -(out[0] * a03 + out[1] * a13 + out[2] * a23);
  out[7] = -(out[4] * a03 + out[5] * a13 + out[6] * a23);
  out[11] = -(out[8] * a03 + out[9] * a13 + out[10] * a23);
  out[12] = out[13] = out[14] = 0;
  out[15] = 1;
  return out;
}

/** A new matrix holding the inverse of affine `a`. @throws CoxaError BAD_AFFINE */
export function inverse(a: Mat4): Mat4 {
  return invertAffine(new Float64Array(16), a);
}

/** out = M · (x, y, z, 1), the first three components. */
export function transformPoint(
  out: Float64Array | number[],
  m: Mat4,
  x: number,
  y: number,
  z: number,
): typeof out {
  out[0] = m[0] * x + m[1] * y + m[2] * z + m[3];
  out[1] = m[4] * x + m[5] * y + m[6] * z + m[7];
  out[2] = m[8] * x + m[9] * y + m[10] * z + m[11];
  return out;
}

/** Translation matrix. */
export function translation(tx: number, ty: number, tz: number): Mat4 {
  const m = identity();
  m[3] = tx;
  m[7] = ty;
  m[11] = tz;
  return m;
}

/** Diagonal scaling matrix. */
export function scaling(sx: number, sy: number, sz: number): Mat4 {
  const m = identity();
  m[0] = sx;
  m[5] = sy;
  m[10] = sz;
  return m;
}

/** Largest absolute entry-wise difference between two matrices. */
export function maxAbsDiff(a: Mat4, b: Mat4): number {
  let d = 0;
  for (let i = 0; i < 16; i++) d = Math.max(d, Math.abs(a[i] - b[i]));
  return d;
}

/** Column norms of the 3x3 block: the voxel spacing in mm of an index-to-world matrix. */
export function columnNorms(m: Mat4): [number, number, number] {
  return [Math.hypot(m[0], m[4], m[8]), Math.hypot(m[1], m[5], m[9]), Math.hypot(m[2], m[6], m[10])];
}
