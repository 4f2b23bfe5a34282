/**
 * Mask geometry the registration driver needs: world-space moments of a 0/1 mask, the part of
 * one image's mask that maps into another image's box, and world bounding boxes.
 *
 * Conventions: masks are 0/1 Uint8Array on a Volume's grid (i fastest); positions are voxel
 * centres in world mm (RAS+); `gridToOther` maps this grid's WORLD to the other image's WORLD.
 */

import { clipLine } from "../geometry/clip-line.js";
import type { Mat4 } from "../geometry/mat4.js";
import { multiply } from "../geometry/mat4.js";
import type { Volume } from "../image/volume.js";

/** Zeroth, first and second moments of a mask in world mm. */
export interface MaskMoments {
  /** Voxels set. */
  count: number;
  /** Volume in mm^3. */
  volumeMm3: number;
  /** Centroid, world mm. */
  centroidMm: [number, number, number];
  /** Covariance of the world positions (3x3 row-major, mm^2). */
  covariance: Float64Array;
  /** Third central moment tensor T[a*9 + b*3 + c] = mean(d_a d_b d_c) (mm^3), for axis signs. */
  third: Float64Array;
  /** RMS distance of the voxels from the centroid, mm. */
  radiusMm: number;
}

/**
 * Moments of the set voxels of `mask` on the grid of `volume`.
 * @param mask - 0/1 mask on the volume's grid
 * @param volume - supplies the grid geometry
 */
export function maskMoments(mask: Uint8Array, volume: Volume): MaskMoments {
  const [nx, ny, nz] = volume.dims;
  const m = volume.indexToWorld;
  let count = 0;
  let sx = 0;
  let sy = 0;
  let sz = 0;
  for (let k = 0, q = 0; k < nz; k++) {
    for (let j = 0; j < ny; j++) {
      for (let i = 0; i < nx; i++, q++) {
        if (mask[q] === 0) continue;
        count++;
        sx += m[0] * i + m[1] * j + m[2] * k;
        sy += m[4] * i + m[5] * j + m[6] * k;
        sz += m[8] * i + m[9] * j + m[10] * k;
      }
    }
  }
  const covariance = new Float64Array(9);
  const third = new Float64Array(27);
  if (count === 0) {
    return {
      count,
      volumeMm3: 0,
      centroidMm: [Number.NaN, Number.NaN, Number.NaN],
      covariance,
      third,
      radiusMm: 0,
    };
  }
  // Centroid in index-linear coordinates, then shift by the affine's translation.
  const cx = sx / count;
  const cy = sy / count;
  const cz = sz / count;
  let cxx = 0;
  let cxy = 0;
  let cxz = 0;
  let cyy = 0;
  let cyz = 0;
  let czz = 0;
  // Unique third moments: xxx xxy xxz xyy xyz xzz yyy yyz yzz zzz
  const t = new Float64Array(10);
  for (let k = 0, q = 0; k < nz; k++) {
    for (let j = 0; j < ny; j++) {
      for (let i = 0; i < nx; i++, q++) {
        if (mask[q] === 0) continue;
        const dx = m[0] * i + m[1] * j + m[2] * k - cx;
        const dy = m[4] * i + m[5] * j + m[6] * k - cy;
        const dz = m[8] * i + m[9] * j + m[10] * k - cz;
        cxx += dx * dx;
        cxy += dx * dy;
        cxz += dx * dz;
        cyy += dy * dy;
        cyz += dy * dz;
        czz += dz * dz;
        const xx = dx * dx;
        const yy = dy * dy;
        const zz = dz * dz;
        t[0] += xx * dx;
        t[1] += xx * dy;
        t[2] += xx * dz;
        t[3] += yy * dx;
        t[4] += dx * dy * dz;
        t[5] += zz * dx;
        t[6] += yy * dy;
        t[7] += yy * dz;
        t[8] += zz * dy;
        t[9] += zz * dz;
      }
    }
  }
  covariance.set([cxx, cxy, cxz, cxy, cyy, cyz, cxz, cyz, czz].map((v) => v / count));
  // Fill the symmetric tensor from the unique entries.
  const unique = (a: number, b: number, c: number): number => {
    const [p, q, r] = [a, b, c].sort();
    const key = `${p}${q}${r}`;
    return ["000", "001", "002", "011", "012", "022", "111", "112", "122", "222"].indexOf(key);
  };
  for (let a = 0; a < 3; a++)
    for (let b = 0; b < 3; b++)
      for (let c = 0; c < 3; c++) third[a * 9 + b * 3 + c] = t[unique(a, b, c)] / count;
  const voxelMm3 = Math.abs(
    m[0] * (m[5] * m[10] - m[6] * m[9]) -
      m[1] * (m[4] * m[10] - m[6] * m[8]) +
      m[2] * (m[4] * m[9] - m[5] * m[8]),
  );
  return {
    count,
    volumeMm3: count * voxelMm3,
    centroidMm: [cx + m[3], cy + m[7], cz + m[11]],
    covariance,
    third,
    radiusMm: Math.sqrt((cxx + cyy + czz) / count),
  };
}

/**
 * Running sums of set voxel centres (count, sum x, sum y, sum z, sum |x|^2, world mm), which
 * maskInsideOther can gather while it writes its output; radiusFromSums turns them into the
 * RMS distance from the centroid.
 */
export type PositionSums = Float64Array;

/** A zeroed PositionSums. */
export function positionSums(): PositionSums {
  return new Float64Array(5);
}

/** RMS distance (mm) of the summed voxels from their centroid: sqrt(E|x|^2 - |E x|^2). */
export function radiusFromSums(s: PositionSums): number {
  const n = s[0];
  if (n === 0) return 0;
  const cx = s[1] / n;
  const cy = s[2] / n;
  const cz = s[3] / n;
  return Math.sqrt(Math.max(0, s[4] / n - (cx * cx + cy * cy + cz * cz)));
}

/** Add the set voxels of row (j, k), i in [i0, i1], starting at flat index `rowStart`, to `s`. */
function addRowSums(
  s: PositionSums,
  mask: Uint8Array,
  rowStart: number,
  i0: number,
  i1: number,
  m: Mat4,
  j: number,
  k: number,
): void {
  const bx = m[1] * j + m[2] * k + m[3];
  const by = m[5] * j + m[6] * k + m[7];
  const bz = m[9] * j + m[10] * k + m[11];
  let n = 0;
  let sx = 0;
  let sy = 0;
  let sz = 0;
  let s2 = 0;
  for (let i = i0; i <= i1; i++) {
    if (mask[rowStart + i] === 0) continue;
    const x = m[0] * i + bx;
    const y = m[4] * i + by;
    const z = m[8] * i + bz;
    n++;
    sx += x;
    sy += y;
    sz += z;
    s2 += x * x + y * y + z * z;
  }
  s[0] += n;
  s[1] += sx;
  s[2] += sy;
  s[3] += sz;
  s[4] += s2;
}

/**
 * The voxels of `mask` whose centres map (through `gridToOther`) inside `other`'s voxel box
 * grown by `marginMm` on every side. Each row's inside part is found in closed form (the line
 * clipped against the box), so the pass costs a copy of the mask.
 * @param out - output mask (may be `mask`)
 * @param mask - 0/1 mask on `grid`
 * @param grid - the mask's image
 * @param other - the image whose box is tested
 * @param gridToOther - grid world mm -> other world mm
 * @param marginMm - margin added around the other image's box (mm, >= 0)
 * @param sums - if given, the world positions of the voxels set in `out` are added to it
 * @returns number of voxels set in `out`
 */
export function maskInsideOther(
  out: Uint8Array,
  mask: Uint8Array,
  grid: Volume,
  other: Volume,
  gridToOther: Mat4,
  marginMm: number,
  sums?: PositionSums,
): number {
  const a = new Float64Array(16);
  multiply(a, gridToOther, grid.indexToWorld);
  multiply(a, other.worldToIndex, a);
  const [nx, ny, nz] = grid.dims;
  const [ox, oy, oz] = other.dims;
  const sp = other.spacingMm;
  const mx = marginMm / sp[0] + 0.5;
  const my = marginMm / sp[1] + 0.5;
  const mz = marginMm / sp[2] + 0.5;
  const range = new Float64Array(2);
  const m = grid.indexToWorld;
  let count = 0;
  for (let k = 0, q = 0; k < nz; k++) {
    for (let j = 0; j < ny; j++, q += nx) {
      range[0] = 0;
      range[1] = nx - 1;
      clipLine(range, a[1] * j + a[2] * k + a[3], a[0], -mx, ox - 1 + mx);
      clipLine(range, a[5] * j + a[6] * k + a[7], a[4], -my, oy - 1 + my);
      clipLine(range, a[9] * j + a[10] * k + a[11], a[8], -mz, oz - 1 + mz);
      const i0 = Math.ceil(range[0]);
      const i1 = Math.floor(range[1]);
      if (i0 > i1) {
        for (let i = 0; i < nx; i++) out[q + i] = 0;
        continue;
      }
      for (let i = 0; i < i0; i++) out[q + i] = 0;
      for (let i = i1 + 1; i < nx; i++) out[q + i] = 0;
      let c = 0;
      for (let i = i0; i <= i1; i++) {
        const v = mask[q + i] !== 0 ? 1 : 0;
        out[q + i] = v;
        c += v;
      }
      count += c;
      if (sums !== undefined && c > 0) addRowSums(sums, out, q, i0, i1, m, j, k);
    }
  }
  return count;
}

/** World bounding box (voxel centres) of the set voxels of a mask; undefined when empty. */
export function maskBoundsWorld(
  mask: Uint8Array,
  volume: Volume,
): { min: [number, number, number]; max: [number, number, number] } | undefined {
  const [nx, ny, nz] = volume.dims;
  let i0 = nx;
  let i1 = -1;
  let j0 = ny;
  let j1 = -1;
  let k0 = nz;
  let k1 = -1;
  for (let k = 0, q = 0; k < nz; k++) {
    for (let j = 0; j < ny; j++) {
      for (let i = 0; i < nx; i++, q++) {
        if (mask[q] === 0) continue;
        if (i < i0) i0 = i;
        if (i > i1) i1 = i;
        if (j < j0) j0 = j;
        if (j > j1) j1 = j;
        if (k < k0) k0 = k;
        if (k > k1) k1 = k;
      }
    }
  }
  if (i1 < 0) return undefined;
  const min: [number, number, number] = [Infinity, Infinity, Infinity];
  const max: [number, number, number] = [-Infinity, -Infinity, -Infinity];
  const p = [0, 0, 0];
  for (let c = 0; c < 8; c++) {
    volume.indexToWorldPoint(p, c & 1 ? i1 : i0, c & 2 ? j1 : j0, c & 4 ? k1 : k0);
    for (let a = 0; a < 3; a++) {
      if (p[a] < min[a]) min[a] = p[a];
      if (p[a] > max[a]) max[a] = p[a];
    }
  }
  return { min, max };
}

/** The 8 corners of a world box grown by `marginMm`. */
export function boxCorners(
  box: { min: readonly number[]; max: readonly number[] },
  marginMm = 0,
): [number, number, number][] {
  const out: [number, number, number][] = [];
  for (let c = 0; c < 8; c++) {
    out.push([
      c & 1 ? box.max[0] + marginMm : box.min[0] - marginMm,
      c & 2 ? box.max[1] + marginMm : box.min[1] - marginMm,
      c & 4 ? box.max[2] + marginMm : box.min[2] - marginMm,
    ]);
  }
  return out;
}

/**
 * Largest distance between the images of the same points under two transforms, over the given
 * points: max_p |A p - B p| (mm). For a convex region the maximum of this convex function lies
 * at a vertex, so the 8 corners of a box give the exact maximum over the whole box.
 */
export function maxDisplacementMm(a: Mat4, b: Mat4, points: readonly (readonly number[])[]): number {
  let worst = 0;
  for (const p of points) {
    const dx = (a[0] - b[0]) * p[0] + (a[1] - b[1]) * p[1] + (a[2] - b[2]) * p[2] + (a[3] - b[3]);
    const dy = (a[4] - b[4]) * p[0] + (a[5] - b[5]) * p[1] + (a[6] - b[6]) * p[2] + (a[7] - b[7]);
    const dz = (a[8] - b[8]) * p[0] + (a[9] - b[9]) * p[1] + (a[10] - b[10]) * p[2] + (a[11] - b[11]);
    worst = Math.max(worst, Math.hypot(dx, dy, dz));
  }
  return worst;
}
