/**
 * The resampling loop over one slab of output slices, shared by the main thread and the
 * resampling worker (resample-worker.ts).
 *
 * Conventions: `outToSrc` is the 3x4 affine (row-major, 12 numbers) that maps an OUTPUT voxel
 * index (i, j, k) to a continuous SOURCE voxel index; it is the composition
 * source.worldToIndex · fixedToMoving · target.indexToWorld (src/resample/resample.ts).
 * Along an output row (i varying) the source index moves by the constant column 0 of that
 * affine, so each voxel costs three multiply-adds, no matrix product. The part of each row that
 * lies inside the source box [-0.5, n - 0.5]^3 is found in closed form (clipping the line
 * against the box); the rest of the row gets the fill value without being sampled.
 */
import { clipLine } from "../geometry/clip-line.js";
import { DATATYPES, datatypeOf, type VoxelArray } from "../image/datatypes.js";
import { cubicAt, type Interp } from "./kernels.js";

/** Everything one slab needs; plain data so that it can cross to a worker thread. */
export interface SlabJob {
  interp: Interp;
  /** Source voxels (nearest, linear) or B-spline coefficients (cubic). */
  src: VoxelArray;
  srcDims: readonly [number, number, number];
  out: VoxelArray;
  outDims: readonly [number, number, number];
  /** Output index -> source index, 12 numbers (3 rows of 4). */
  outToSrc: ArrayLike<number>;
  /** Output slices k0 <= k < k1, every kStep-th (default 1: all). */
  k0: number;
  k1: number;
  kStep?: number;
  /** Value written where the source has no data. */
  fill: number;
  /** Integer output: round to nearest and clamp to [outMin, outMax]. */
  outInteger: boolean;
  outMin: number;
  outMax: number;
}

/**
 * Resample output slices k0..k1-1 of `job.out`. Returns the number of output voxels that
 * received data (were inside the source).
 */
export function resampleSlab(job: SlabJob): number {
  const { src, out, interp, fill } = job;
  const [nx, ny, nz] = job.srcDims;
  const [ox, oy] = job.outDims;
  const m = job.outToSrc;
  const m00 = m[0];
  const m01 = m[1];
  const m02 = m[2];
  const m03 = m[3];
  const m10 = m[4];
  const m11 = m[5];
  const m12 = m[6];
  const m13 = m[7];
  const m20 = m[8];
  const m21 = m[9];
  const m22 = m[10];
  const m23 = m[11];
  const fillValue = job.outInteger ? clampRound(fill, job.outMin, job.outMax) : fill;
  const integer = job.outInteger;
  const lo = job.outMin;
  const hi = job.outMax;
  // Integer source whose whole type range fits the output: nearest and trilinear values (convex
  // combinations of source voxels) need rounding at most, never clamping or a NaN check.
  const srcInfo = DATATYPES[datatypeOf(src)];
  const inRange = integer && interp !== "cubic" && srcInfo.integer && srcInfo.min >= lo && srcInfo.max <= hi;
  const xmax = nx - 1;
  const ymax = ny - 1;
  const zmax = nz - 1;
  const nxy = nx * ny;
  const range = new Float64Array(2);
  let inside = 0;
  const kStep = job.kStep ?? 1;
  for (let k = job.k0; k < job.k1; k += kStep) {
    for (let j = 0; j < oy; j++) {
      const rowStart = ox * (j + oy * k);
      const x0 = m01 * j + m02 * k + m03;
      const y0 = m11 * j + m12 * k + m13;
      const z0 = m21 * j + m22 * k + m23;
      range[0] = 0;
      range[1] = ox - 1;
      clipAxis(range, x0, m00, nx);
      clipAxis(range, y0, m10, ny);
      clipAxis(range, z0, m20, nz);
      const iStart = Math.ceil(range[0]);
      const iEnd = Math.floor(range[1]);
      // Plain loops: TypedArray.prototype.fill costs about a microsecond per call, which on
      // short row ends is more than the filling.
      if (iStart > iEnd) {
        for (let q = rowStart; q < rowStart + ox; q++) out[q] = fillValue;
        continue;
      }
      for (let q = rowStart; q < rowStart + iStart; q++) out[q] = fillValue;
      for (let q = rowStart + iEnd + 1; q < rowStart + ox; q++) out[q] = fillValue;
      inside += iEnd - iStart + 1;
      if (interp === "nearest" && m10 === 0 && m20 === 0) {
        // Row parallel to the source i axis (grids of the same orientation): one source row.
        let iy = Math.floor(y0 + 0.5);
        let iz = Math.floor(z0 + 0.5);
        iy = iy < 0 ? 0 : iy > ymax ? ymax : iy;
        iz = iz < 0 ? 0 : iz > zmax ? zmax : iz;
        const srcRow = nx * iy + nxy * iz;
        for (let i = iStart; i <= iEnd; i++) {
          let ix = Math.floor(x0 + i * m00 + 0.5);
          ix = ix < 0 ? 0 : ix > xmax ? xmax : ix;
          const v = src[srcRow + ix];
          out[rowStart + i] = integer && !inRange ? clampRound(v, lo, hi) : v;
        }
      } else if (interp === "nearest") {
        for (let i = iStart; i <= iEnd; i++) {
          let ix = Math.floor(x0 + i * m00 + 0.5);
          let iy = Math.floor(y0 + i * m10 + 0.5);
          let iz = Math.floor(z0 + i * m20 + 0.5);
          ix = ix < 0 ? 0 : ix > xmax ? xmax : ix;
          iy = iy < 0 ? 0 : iy > ymax ? ymax : iy;
          iz = iz < 0 ? 0 : iz > zmax ? zmax : iz;
          const v = src[ix + nx * iy + nxy * iz];
          out[rowStart + i] = integer && !inRange ? clampRound(v, lo, hi) : v;
        }
      } else if (interp === "linear") {
        // Sub-range where all 8 neighbours exist (no clamping): the fast loop.
        range[0] = iStart;
        range[1] = iEnd;
        clipInterior(range, x0, m00, nx);
        clipInterior(range, y0, m10, ny);
        clipInterior(range, z0, m20, nz);
        let aStart = Math.ceil(range[0]);
        let aEnd = Math.floor(range[1]);
        if (aStart > aEnd) {
          aStart = iEnd + 1;
          aEnd = iEnd;
        }
        for (let i = iStart; i <= iEnd; i++) {
          if (i === aStart) {
            // Interior: 0 <= x < nx - 1 (likewise y, z), neighbours at +1, +nx, +nxy.
            for (; i <= aEnd; i++) {
              const x = x0 + i * m00;
              const y = y0 + i * m10;
              const z = z0 + i * m20;
              const ix = x | 0;
              const iy = y | 0;
              const iz = z | 0;
              const fx = x - ix;
              const fy = y - iy;
              const fz = z - iz;
              const o = ix + nx * iy + nxy * iz;
              const p = o + nxy;
              const a = src[o];
              const b = src[o + nx];
              const c = src[p];
              const d = src[p + nx];
              const c00 = a + fx * (src[o + 1] - a);
              const c10 = b + fx * (src[o + nx + 1] - b);
              const c01 = c + fx * (src[p + 1] - c);
              const c11 = d + fx * (src[p + nx + 1] - d);
              const e = c00 + fy * (c10 - c00);
              const v = e + fz * (c01 + fy * (c11 - c01) - e);
              out[rowStart + i] = inRange ? Math.round(v) : integer ? clampRound(v, lo, hi) : v;
            }
            if (i > iEnd) break;
          }
          let x = x0 + i * m00;
          let y = y0 + i * m10;
          let z = z0 + i * m20;
          x = x < 0 ? 0 : x > xmax ? xmax : x;
          y = y < 0 ? 0 : y > ymax ? ymax : y;
          z = z < 0 ? 0 : z > zmax ? zmax : z;
          const ix = x | 0;
          const iy = y | 0;
          const iz = z | 0;
          const fx = x - ix;
          const fy = y - iy;
          const fz = z - iz;
          const o = ix + nx * iy + nxy * iz;
          const sx = ix < xmax ? 1 : 0;
          const sy = iy < ymax ? nx : 0;
          const sz = iz < zmax ? nxy : 0;
          const a = src[o];
          const b = src[o + sy];
          const c = src[o + sz];
          const d = src[o + sz + sy];
          const c00 = a + fx * (src[o + sx] - a);
          const c10 = b + fx * (src[o + sy + sx] - b);
          const c01 = c + fx * (src[o + sz + sx] - c);
          const c11 = d + fx * (src[o + sz + sy + sx] - d);
          const e = c00 + fy * (c10 - c00);
          const v = e + fz * (c01 + fy * (c11 - c01) - e);
          out[rowStart + i] = integer ? clampRound(v, lo, hi) : v;
        }
      } else {
        const coeffs = src as Float32Array | Float64Array;
        for (let i = iStart; i <= iEnd; i++) {
          const v = cubicAt(coeffs, nx, ny, nz, x0 + i * m00, y0 + i * m10, z0 + i * m20);
          out[rowStart + i] = integer ? clampRound(v, lo, hi) : v;
        }
      }
    }
  }
  return inside;
}

/**
 * Narrow the parameter range [range[0], range[1]] of i to where p0 + i * d lies in
 * [-0.5, n - 0.5]. An empty result has range[0] > range[1].
 */
function clipAxis(range: Float64Array, p0: number, d: number, n: number): void {
  // A hair of tolerance so that points exactly on the box face (identity grids) are kept;
  // the kernels clamp, so a point 1e-9 voxel outside cannot read out of bounds.
  clipLine(range, p0, d, -0.5, n - 0.5, 1e-9);
}

/**
 * Narrow [range[0], range[1]] to where p0 + i * d lies in [0, n - 1 - 1e-7] (voxel units), so
 * that the +1 neighbour along this axis exists. Empty when n == 1.
 */
function clipInterior(range: Float64Array, p0: number, d: number, n: number): void {
  clipLine(range, p0, d, 1e-7, n - 1 - 1e-7);
}

function clampRound(v: number, lo: number, hi: number): number {
  v = Math.round(v);
  if (v !== v) return 0;
  return v < lo ? lo : v > hi ? hi : v;
}
