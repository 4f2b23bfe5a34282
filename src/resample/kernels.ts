/**
 * Interpolation kernels that sample a voxel array at a continuous VOXEL index (i, j, k).
 *
 * Conventions:
 *  - storage: i fastest, flat index i + nx * (j + ny * k) (src/image/volume.ts);
 *  - voxel (i, j, k) is the centre of its cell, so the image covers the box
 *    -0.5 <= i <= nx - 0.5 (likewise j, k). A point outside that box is "no data": the
 *    kernels return NaN there, never 0 (`insideGrid` tells the same without sampling);
 *  - inside the box but beyond the outermost voxel centres (the half-voxel rim) the linear
 *    kernel repeats the edge voxel, the cubic kernel mirrors the coefficients.
 *
 * Methods:
 *  - nearest neighbour (labels): the voxel whose cell contains the point;
 *  - trilinear;
 *  - cubic B-spline interpolation: the samples are first turned into B-spline coefficients by
 *    the recursive prefilter of Unser, Aldroubi & Eden (1993, "B-spline signal processing",
 *    IEEE Trans. Signal Process. 41(2)), pole z = sqrt(3) - 2, with whole-sample mirror
 *    boundaries (... c b | a b c ... | x y | x ...), so that the spline passes through every
 *    sample; the cubic B-spline basis is then evaluated on 4x4x4 coefficients.
 */
import type { VoxelArray } from "../image/datatypes.js";
import type { Dims } from "../image/volume.js";

/** Interpolation methods of coxa. */
export type Interp = "nearest" | "linear" | "cubic";

/** The interpolation names accepted on the command line and in the library. */
export const INTERPS: readonly Interp[] = ["nearest", "linear", "cubic"];

const POLE = Math.sqrt(3) - 2;

/**
 * True when the continuous voxel index (x, y, z) lies inside the image box
 * [-0.5, n - 0.5] on every axis. NaN coordinates are outside.
 * @param dims - [nx, ny, nz]
 */
export function insideGrid(dims: Dims, x: number, y: number, z: number): boolean {
  return (
    x >= -0.5 && x <= dims[0] - 0.5 && y >= -0.5 && y <= dims[1] - 0.5 && z >= -0.5 && z <= dims[2] - 0.5
  );
}

/**
 * Nearest-neighbour value at a continuous voxel index; NaN outside the image box.
 * @param data - voxels, i fastest
 * @param dims - [nx, ny, nz]
 * @param x - continuous index along i (voxel units); likewise y (j) and z (k)
 */
export function sampleNearest(data: VoxelArray, dims: Dims, x: number, y: number, z: number): number {
  if (!insideGrid(dims, x, y, z)) return Number.NaN;
  const nx = dims[0];
  const ny = dims[1];
  let i = Math.floor(x + 0.5);
  let j = Math.floor(y + 0.5);
  let k = Math.floor(z + 0.5);
  if (i >= nx) i = nx - 1;
  if (j >= ny) j = ny - 1;
  if (k >= dims[2]) k = dims[2] - 1;
  return data[i + nx * (j + ny * k)];
}

/**
 * Trilinear value at a continuous voxel index; NaN outside the image box.
 * @param data - voxels, i fastest
 * @param dims - [nx, ny, nz]
 * @param x - continuous index along i (voxel units); likewise y (j) and z (k)
 */
export function sampleLinear(data: VoxelArray, dims: Dims, x: number, y: number, z: number): number {
  if (!insideGrid(dims, x, y, z)) return Number.NaN;
  const nx = dims[0];
  const ny = dims[1];
  const xmax = nx - 1;
  const ymax = ny - 1;
  const zmax = dims[2] - 1;
  if (x < 0) x = 0;
  else if (x > xmax) x = xmax;
  if (y < 0) y = 0;
  else if (y > ymax) y = ymax;
  if (z < 0) z = 0;
  else if (z > zmax) z = zmax;
  const i = Math.floor(x);
  const j = Math.floor(y);
  const k = Math.floor(z);
  const fx = x - i;
  const fy = y - j;
  const fz = z - k;
  const o = i + nx * (j + ny * k);
  const sx = i < xmax ? 1 : 0;
  const sy = j < ymax ? nx : 0;
  const sz = k < zmax ? nx * ny : 0;
  const c00 = data[o] + fx * (data[o + sx] - data[o]);
  const c10 = data[o + sy] + fx * (data[o + sy + sx] - data[o + sy]);
  const c01 = data[o + sz] + fx * (data[o + sz + sx] - data[o + sz]);
  const c11 = data[o + sz + sy] + fx * (data[o + sz + sy + sx] - data[o + sz + sy]);
  const c0 = c00 + fy * (c10 - c00);
  const c1 = c01 + fy * (c11 - c01);
  return c0 + fz * (c1 - c0);
}

/** Whole-sample mirror of index `k` into [0, n-1] (period 2n - 2). */
export function mirrorIndex(k: number, n: number): number {
  if (n === 1) return 0;
  const period = 2 * n - 2;
  k %= period;
  if (k < 0) k += period;
  return k < n ? k : period - k;
}

/**
 * Cubic B-spline coefficients of `data` (prefilter), so that `sampleCubic(out, ...)` passes
 * exactly through every voxel value. Separable, in place along i, then j, then k; Float64
 * line buffer, coefficients stored in `out`. `out` may be a Float32Array or Float64Array and
 * may be the same array as `data` when `data` is float.
 * @param out - nx*ny*nz coefficients (output)
 * @param data - voxels, i fastest
 * @param dims - [nx, ny, nz]
 * @param kRange - optional [k0, k1) restricting the i and j passes to slices k0..k1-1, and
 *   `jRange` the k pass to rows j0..j1-1 (for splitting over threads); both default to all
 * @returns out
 */
export function bsplinePrefilter<T extends Float32Array | Float64Array>(
  out: T,
  data: VoxelArray,
  dims: Dims,
  passes: { axes?: readonly (0 | 1 | 2)[]; kRange?: [number, number]; jRange?: [number, number] } = {},
): T {
  const [nx, ny, nz] = dims;
  const nxy = nx * ny;
  const axes = passes.axes ?? [0, 1, 2];
  const [k0, k1] = passes.kRange ?? [0, nz];
  const [j0, j1] = passes.jRange ?? [0, ny];
  if ((out as VoxelArray) !== data) {
    for (let k = k0; k < k1; k++) {
      const start = k * nxy;
      for (let q = start; q < start + nxy; q++) out[q] = data[q];
    }
  }
  const line = new Float64Array(Math.max(nx, ny, nz));
  for (const axis of axes) {
    if (axis === 0 && nx > 1) {
      for (let k = k0; k < k1; k++)
        for (let j = 0; j < ny; j++) filterLine(out, line, nx, (j + ny * k) * nx, 1);
    } else if (axis === 1 && ny > 1) {
      for (let k = k0; k < k1; k++) for (let i = 0; i < nx; i++) filterLine(out, line, ny, i + nxy * k, nx);
    } else if (axis === 2 && nz > 1) {
      for (let j = j0; j < j1; j++) for (let i = 0; i < nx; i++) filterLine(out, line, nz, i + nx * j, nxy);
    }
  }
  return out;
}

/** Recursive cubic B-spline prefilter of one strided line (Unser et al. 1993, mirror ends). */
function filterLine(
  arr: Float32Array | Float64Array,
  c: Float64Array,
  n: number,
  offset: number,
  stride: number,
): void {
  const z = POLE;
  for (let q = 0; q < n; q++) c[q] = arr[offset + q * stride] * 6; // gain (1 - z)(1 - 1/z) = 6
  // Causal initialisation: c+(0) = sum_k z^k c(k) over the mirrored signal (period 2n - 2).
  const horizon = Math.ceil(Math.log(1e-15) / Math.log(Math.abs(z)));
  let sum: number;
  if (horizon < n) {
    let zn = z;
    sum = c[0];
    for (let q = 1; q < horizon; q++) {
      sum += zn * c[q];
      zn *= z;
    }
  } else {
    let zn = z;
    const iz = 1 / z;
    let z2n = z ** (n - 1);
    sum = c[0] + z2n * c[n - 1];
    z2n = z2n * z2n * iz; // z^(2n-3)
    for (let q = 1; q < n - 1; q++) {
      sum += (zn + z2n) * c[q];
      zn *= z;
      z2n *= iz;
    }
    sum /= 1 - zn * zn;
  }
  c[0] = sum;
  for (let q = 1; q < n; q++) c[q] += z * c[q - 1];
  // Anti-causal initialisation for the mirror boundary.
  c[n - 1] = (z / (z * z - 1)) * (z * c[n - 2] + c[n - 1]);
  for (let q = n - 2; q >= 0; q--) c[q] = z * (c[q + 1] - c[q]);
  for (let q = 0; q < n; q++) arr[offset + q * stride] = c[q];
}

/**
 * Cubic B-spline value at a continuous voxel index from prefiltered coefficients; NaN outside
 * the image box. Coefficients beyond the edges are mirrored (whole-sample).
 * @param coeffs - output of bsplinePrefilter
 * @param dims - [nx, ny, nz]
 * @param x - continuous index along i (voxel units); likewise y (j) and z (k)
 */
export function sampleCubic(
  coeffs: Float32Array | Float64Array,
  dims: Dims,
  x: number,
  y: number,
  z: number,
): number {
  if (!insideGrid(dims, x, y, z)) return Number.NaN;
  return cubicAt(coeffs, dims[0], dims[1], dims[2], x, y, z);
}

/**
 * Cubic B-spline value without the inside test (caller guarantees the box). Exported for the
 * resampling loop.
 */
export function cubicAt(
  coeffs: Float32Array | Float64Array,
  nx: number,
  ny: number,
  nz: number,
  x: number,
  y: number,
  z: number,
): number {
  const i = Math.floor(x);
  const j = Math.floor(y);
  const k = Math.floor(z);
  const tx = x - i;
  const ty = y - j;
  const tz = z - k;
  const wx0 = bs0(tx);
  const wx1 = bs1(tx);
  const wx2 = bs1(1 - tx);
  const wx3 = bs0(1 - tx);
  const wy0 = bs0(ty);
  const wy1 = bs1(ty);
  const wy2 = bs1(1 - ty);
  const wy3 = bs0(1 - ty);
  const wz0 = bs0(tz);
  const wz1 = bs1(tz);
  const wz2 = bs1(1 - tz);
  const wz3 = bs0(1 - tz);
  const nxy = nx * ny;
  if (i >= 1 && i + 2 < nx && j >= 1 && j + 2 < ny && k >= 1 && k + 2 < nz) {
    // Fast path: all 4x4x4 coefficients inside, no mirroring.
    const o = i - 1 + nx * (j - 1) + nxy * (k - 1);
    return (
      wz0 * plane4(coeffs, o, nx, wx0, wx1, wx2, wx3, wy0, wy1, wy2, wy3) +
      wz1 * plane4(coeffs, o + nxy, nx, wx0, wx1, wx2, wx3, wy0, wy1, wy2, wy3) +
      wz2 * plane4(coeffs, o + 2 * nxy, nx, wx0, wx1, wx2, wx3, wy0, wy1, wy2, wy3) +
      wz3 * plane4(coeffs, o + 3 * nxy, nx, wx0, wx1, wx2, wx3, wy0, wy1, wy2, wy3)
    );
  }
  let total = 0;
  for (let c = 0; c < 4; c++) {
    const kk = mirrorIndex(k - 1 + c, nz);
    const wz = c === 0 ? wz0 : c === 1 ? wz1 : c === 2 ? wz2 : wz3;
    let plane = 0;
    for (let b = 0; b < 4; b++) {
      const jj = mirrorIndex(j - 1 + b, ny);
      const wy = b === 0 ? wy0 : b === 1 ? wy1 : b === 2 ? wy2 : wy3;
      const row = nx * jj + nxy * kk;
      const r =
        wx0 * coeffs[row + mirrorIndex(i - 1, nx)] +
        wx1 * coeffs[row + mirrorIndex(i, nx)] +
        wx2 * coeffs[row + mirrorIndex(i + 1, nx)] +
        wx3 * coeffs[row + mirrorIndex(i + 2, nx)];
      plane += wy * r;
    }
    total += wz * plane;
  }
  return total;
}

/** Sum over a 4x4 patch of coefficients starting at `o` (rows nx apart) with separable weights. */
function plane4(
  c: Float32Array | Float64Array,
  o: number,
  nx: number,
  wx0: number,
  wx1: number,
  wx2: number,
  wx3: number,
  wy0: number,
  wy1: number,
  wy2: number,
  wy3: number,
): number {
  const o1 = o + nx;
  const o2 = o1 + nx;
  const o3 = o2 + nx;
  return (
    wy0 * (wx0 * c[o] + wx1 * c[o + 1] + wx2 * c[o + 2] + wx3 * c[o + 3]) +
    wy1 * (wx0 * c[o1] + wx1 * c[o1 + 1] + wx2 * c[o1 + 2] + wx3 * c[o1 + 3]) +
    wy2 * (wx0 * c[o2] + wx1 * c[o2 + 1] + wx2 * c[o2 + 2] + wx3 * c[o2 + 3]) +
    wy3 * (wx0 * c[o3] + wx1 * c[o3 + 1] + wx2 * c[o3 + 2] + wx3 * c[o3 + 3])
  );
}

/** Cubic B-spline weight of the coefficient at offset -1 for fraction t in [0, 1): (1 - t)^3 / 6. */
function bs0(t: number): number {
  const u = 1 - t;
  return (u * u * u) / 6;
}

/** Weight of the coefficient at offset 0: (4 - 6 t^2 + 3 t^3) / 6. */
function bs1(t: number): number {
  return (4 - 6 * t * t + 3 * t * t * t) / 6;
}

/**
 * Cubic B-spline basis beta3(x), the kernel used by the spline and by Parzen histograms.
 * @param x - distance in sample units
 */
export function bspline3(x: number): number {
  const a = Math.abs(x);
  if (a < 1) return (4 - 6 * a * a + 3 * a * a * a) / 6;
  if (a < 2) {
    const u = 2 - a;
    return (u * u * u) / 6;
  }
  return 0;
}
