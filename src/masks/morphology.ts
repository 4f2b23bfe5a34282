/**
 * Morphology of binary masks in millimetres: Euclidean distance transform, dilation and
 * erosion by a true ball in mm (anisotropic voxels), hole filling, thresholding.
 *
 * Conventions: masks are Uint8Array, nonzero = inside, storage i fastest on a grid `dims`
 * with voxel spacing `spacingMm` (the column norms of the grid's affine; the ball is measured
 * in that voxel frame, which is exact for orthogonal voxel axes and for sheared grids only
 * approximately). The ball of radius r is the set of voxel-centre offsets (di, dj, dk) with
 * (di sx)^2 + (dj sy)^2 + (dk sz)^2 <= r^2.
 *
 * Method: squared Euclidean distance transform by the separable lower-envelope-of-parabolas
 * algorithm of Felzenszwalb & Huttenlocher (2012, "Distance transforms of sampled functions",
 * Theory of Computing 8), one pass per axis weighted by that axis' spacing; the dilation is
 * {d^2 <= r^2}. Work is restricted to the mask's bounding box grown by the radius. Hole
 * filling floods the background from the grid border with 6-connectivity (the complement of
 * a 26-connected foreground), as scipy.ndimage.binary_fill_holes does by default.
 */
import { CoxaError } from "../common/errors.js";
import type { VoxelArray } from "../image/datatypes.js";
import type { Dims } from "../image/volume.js";
import type { VoxelBox } from "./components.js";

const FAR = 1e20;

/** Bounding box of the nonzero voxels, or undefined for an empty mask. */
export function maskBounds(mask: Uint8Array, dims: Dims): VoxelBox | undefined {
  return thresholdBounds(mask, dims, 1);
}

/**
 * Voxel box of the voxels >= threshold (one read-only pass), or undefined. With `step` > 1 only
 * every step-th voxel along each axis is visited (a quick, possibly slightly small box).
 */
export function thresholdBounds(
  data: VoxelArray,
  dims: Dims,
  threshold: number,
  step = 1,
): VoxelBox | undefined {
  const [nx, ny, nz] = dims;
  const min: [number, number, number] = [nx, ny, nz];
  const max: [number, number, number] = [-1, -1, -1];
  for (let k = 0; k < nz; k += step)
    for (let j = 0; j < ny; j += step) {
      const row = nx * (j + ny * k);
      let first = -1;
      let last = -1;
      for (let i = 0; i < nx; i += step) {
        if (data[row + i] >= threshold) {
          if (first < 0) first = i;
          last = i;
        }
      }
      if (first < 0) continue;
      if (first < min[0]) min[0] = first;
      if (last > max[0]) max[0] = last;
      if (j < min[1]) min[1] = j;
      if (j > max[1]) max[1] = j;
      if (k < min[2]) min[2] = k;
      if (k > max[2]) max[2] = k;
    }
  if (max[0] < 0) return undefined;
  return { min, max: [max[0] + 1, max[1] + 1, max[2] + 1] };
}

/** Number of nonzero voxels. */
export function countNonzero(mask: Uint8Array): number {
  let c = 0;
  for (let q = 0; q < mask.length; q++) if (mask[q] !== 0) c++;
  return c;
}

/**
 * Squared Euclidean distance (mm^2) from every voxel centre to the nearest nonzero voxel of
 * `mask`; FAR (1e20) when the mask is empty.
 * @param mask - feature voxels (nonzero)
 * @param dims - grid [nx, ny, nz]
 * @param spacingMm - voxel spacing per axis (mm)
 * @returns Float64Array of squared distances in mm^2
 */
export function squaredDistanceMm(mask: Uint8Array, dims: Dims, spacingMm: readonly number[]): Float64Array {
  const [nx, ny, nz] = dims;
  const d = new Float64Array(mask.length);
  for (let q = 0; q < mask.length; q++) d[q] = mask[q] !== 0 ? 0 : FAR;
  const longest = Math.max(nx, ny, nz);
  const f = new Float64Array(longest);
  const out = new Float64Array(longest);
  const v = new Int32Array(longest);
  const z = new Float64Array(longest + 1);
  const nxy = nx * ny;
  const pass = (n: number, stride: number, start: number, w: number) => {
    for (let q = 0; q < n; q++) f[q] = d[start + q * stride];
    edt1d(f, n, w, out, v, z);
    for (let q = 0; q < n; q++) d[start + q * stride] = out[q];
  };
  for (let k = 0; k < nz; k++) for (let j = 0; j < ny; j++) pass(nx, 1, nx * (j + ny * k), spacingMm[0]);
  for (let k = 0; k < nz; k++) for (let i = 0; i < nx; i++) pass(ny, nx, i + nxy * k, spacingMm[1]);
  for (let j = 0; j < ny; j++) for (let i = 0; i < nx; i++) pass(nz, nxy, i + nx * j, spacingMm[2]);
  return d;
}

/**
 * One-dimensional squared distance transform of sampled function f at positions q*w
 * (Felzenszwalb & Huttenlocher 2012, algorithm DT(f)).
 */
function edt1d(
  f: Float64Array,
  n: number,
  w: number,
  out: Float64Array,
  v: Int32Array,
  z: Float64Array,
): void {
  let k = 0;
  v[0] = 0;
  z[0] = -Infinity;
  z[1] = Infinity;
  for (let q = 1; q < n; q++) {
    if (f[q] >= FAR) continue;
    if (f[v[0]] >= FAR) {
      // No parabola yet: the first finite sample starts the envelope.
      v[0] = q;
      continue;
    }
    const xq = q * w;
    for (;;) {
      const p = v[k];
      const xp = p * w;
      const s = (f[q] + xq * xq - (f[p] + xp * xp)) / (2 * (xq - xp));
      if (s <= z[k]) {
        if (k === 0) {
          v[0] = q;
          z[1] = Infinity;
          break;
        }
        k--;
        continue;
      }
      k++;
      v[k] = q;
      z[k] = s;
      z[k + 1] = Infinity;
      break;
    }
  }
  if (f[v[0]] >= FAR) {
    for (let q = 0; q < n; q++) out[q] = FAR;
    return;
  }
  k = 0;
  for (let q = 0; q < n; q++) {
    const x = q * w;
    while (z[k + 1] < x) k++;
    const dx = x - v[k] * w;
    out[q] = dx * dx + f[v[k]];
  }
}

function growBox(box: VoxelBox, dims: Dims, spacingMm: readonly number[], radiusMm: number): VoxelBox {
  const min: [number, number, number] = [0, 0, 0];
  const max: [number, number, number] = [0, 0, 0];
  for (let a = 0; a < 3; a++) {
    const g = Math.floor(radiusMm / spacingMm[a] + 1e-9);
    min[a] = Math.max(0, box.min[a] - g);
    max[a] = Math.min(dims[a], box.max[a] + g);
  }
  return { min, max };
}

function cropOf(mask: Uint8Array, dims: Dims, box: VoxelBox, pad: number, padValue: number): Uint8Array {
  const cx = box.max[0] - box.min[0] + 2 * pad;
  const cy = box.max[1] - box.min[1] + 2 * pad;
  const cz = box.max[2] - box.min[2] + 2 * pad;
  const crop = new Uint8Array(cx * cy * cz).fill(padValue);
  const [nx, ny] = dims;
  for (let k = box.min[2]; k < box.max[2]; k++)
    for (let j = box.min[1]; j < box.max[1]; j++) {
      const src = box.min[0] + nx * (j + ny * k);
      const dst = pad + cx * (j - box.min[1] + pad + cy * (k - box.min[2] + pad));
      crop.set(mask.subarray(src, src + box.max[0] - box.min[0]), dst);
    }
  return crop;
}

function checkRadius(radiusMm: number, mask: Uint8Array, dims: Dims): void {
  if (!(radiusMm >= 0) || !Number.isFinite(radiusMm)) {
    throw new CoxaError("BAD_ARGUMENT", `radius ${radiusMm} mm is not a number >= 0`);
  }
  if (mask.length !== dims[0] * dims[1] * dims[2]) {
    throw new CoxaError("BAD_DIMS", `mask has ${mask.length} voxels, grid ${dims.join("x")}`);
  }
}

/**
 * Dilation by a ball of `radiusMm` (voxel centres within r of the mask). Returns a new mask.
 * @param mask - input (nonzero = inside)
 * @param dims - grid [nx, ny, nz]
 * @param spacingMm - voxel spacing per axis (mm)
 * @param radiusMm - ball radius in mm (>= 0)
 * @throws CoxaError BAD_ARGUMENT for a negative radius, BAD_DIMS
 */
export function dilateMm(
  mask: Uint8Array,
  dims: Dims,
  spacingMm: readonly number[],
  radiusMm: number,
): Uint8Array {
  checkRadius(radiusMm, mask, dims);
  const out = new Uint8Array(mask.length);
  const bounds = maskBounds(mask, dims);
  if (!bounds) return out;
  const box = growBox(bounds, dims, spacingMm, radiusMm);
  const cdims: [number, number, number] = [
    box.max[0] - box.min[0],
    box.max[1] - box.min[1],
    box.max[2] - box.min[2],
  ];
  const d = squaredDistanceMm(cropOf(mask, dims, box, 0, 0), cdims, spacingMm);
  const r2 = radiusMm * radiusMm * (1 + 1e-12) + 1e-12;
  const [nx, ny] = dims;
  for (let k = 0; k < cdims[2]; k++)
    for (let j = 0; j < cdims[1]; j++) {
      const row = box.min[0] + nx * (j + box.min[1] + ny * (k + box.min[2]));
      const crow = cdims[0] * (j + cdims[1] * k);
      for (let i = 0; i < cdims[0]; i++) if (d[crow + i] <= r2) out[row + i] = 1;
    }
  return out;
}

/**
 * Erosion by a ball of `radiusMm`: a voxel stays when no background voxel, and no point
 * outside the grid, lies within r of it (outside counts as background, as in
 * scipy.ndimage.binary_erosion with border_value 0). Returns a new mask.
 * @param mask - input (nonzero = inside)
 * @param dims - grid [nx, ny, nz]
 * @param spacingMm - voxel spacing per axis (mm)
 * @param radiusMm - ball radius in mm (>= 0)
 * @throws CoxaError BAD_ARGUMENT for a negative radius, BAD_DIMS
 */
export function erodeMm(
  mask: Uint8Array,
  dims: Dims,
  spacingMm: readonly number[],
  radiusMm: number,
): Uint8Array {
  checkRadius(radiusMm, mask, dims);
  const out = new Uint8Array(mask.length);
  const bounds = maskBounds(mask, dims);
  if (!bounds) return out;
  // Complement inside the box grown by one voxel of "outside" padding (background).
  const cdims: [number, number, number] = [
    bounds.max[0] - bounds.min[0] + 2,
    bounds.max[1] - bounds.min[1] + 2,
    bounds.max[2] - bounds.min[2] + 2,
  ];
  const crop = cropOf(mask, dims, bounds, 1, 0);
  for (let q = 0; q < crop.length; q++) crop[q] = crop[q] !== 0 ? 0 : 1;
  const d = squaredDistanceMm(crop, cdims, spacingMm);
  const r2 = radiusMm * radiusMm * (1 + 1e-12) + 1e-12;
  const [nx, ny] = dims;
  for (let k = 0; k < cdims[2] - 2; k++)
    for (let j = 0; j < cdims[1] - 2; j++) {
      const row = bounds.min[0] + nx * (j + bounds.min[1] + ny * (k + bounds.min[2]));
      const crow = 1 + cdims[0] * (j + 1 + cdims[1] * (k + 1));
      for (let i = 0; i < cdims[0] - 2; i++) if (d[crow + i] > r2) out[row + i] = 1;
    }
  return out;
}

/**
 * Fill holes: background voxels not connected (6-connectivity) to the grid border become
 * foreground. An axis of size 1 has no border faces (a single slice is filled as a 2-D image,
 * 4-connected background). Returns a new 0/1 mask.
 * @param mask - input (nonzero = inside)
 * @param dims - grid [nx, ny, nz]
 */
export function fillHoles(mask: Uint8Array, dims: Dims): Uint8Array {
  const [nx, ny, nz] = dims;
  const nxy = nx * ny;
  const n = mask.length;
  // 0 = background not yet reached, 1 = foreground, 2 = background reached from the border.
  const state = new Uint8Array(n);
  for (let q = 0; q < n; q++) state[q] = mask[q] !== 0 ? 1 : 0;
  const queue = new Int32Array(n);
  let tail = 0;
  const seed = (q: number) => {
    if (state[q] === 0) {
      state[q] = 2;
      queue[tail++] = q;
    }
  };
  for (let k = 0; k < nz; k++)
    for (let j = 0; j < ny; j++) {
      const row = nx * (j + ny * k);
      const kBorder = nz > 1 && (k === 0 || k === nz - 1);
      const jBorder = ny > 1 && (j === 0 || j === ny - 1);
      if (kBorder || jBorder) for (let i = 0; i < nx; i++) seed(row + i);
      else if (nx > 1) {
        seed(row);
        seed(row + nx - 1);
      }
    }
  let head = 0;
  while (head < tail) {
    const q = queue[head++];
    const k = (q / nxy) | 0;
    const rem = q - k * nxy;
    const j = (rem / nx) | 0;
    const i = rem - j * nx;
    if (i > 0 && state[q - 1] === 0) {
      state[q - 1] = 2;
      queue[tail++] = q - 1;
    }
    if (i < nx - 1 && state[q + 1] === 0) {
      state[q + 1] = 2;
      queue[tail++] = q + 1;
    }
    if (j > 0 && state[q - nx] === 0) {
      state[q - nx] = 2;
      queue[tail++] = q - nx;
    }
    if (j < ny - 1 && state[q + nx] === 0) {
      state[q + nx] = 2;
      queue[tail++] = q + nx;
    }
    if (k > 0 && state[q - nxy] === 0) {
      state[q - nxy] = 2;
      queue[tail++] = q - nxy;
    }
    if (k < nz - 1 && state[q + nxy] === 0) {
      state[q + nxy] = 2;
      queue[tail++] = q + nxy;
    }
  }
  const out = new Uint8Array(n);
  for (let q = 0; q < n; q++) out[q] = state[q] === 2 ? 0 : 1;
  return out;
}

/**
 * Fill holes slice by slice (2-D, 4-connected background) in the slices perpendicular to
 * voxel axis `axis`: closes cavities that touch the grid only through the slice direction
 * (e.g. gas in the bowel seen in every axial slice). Returns a new 0/1 mask.
 * @param mask - input (nonzero = inside)
 * @param dims - grid [nx, ny, nz]
 * @param axis - 0, 1 or 2: the slice normal
 */
export function fillHolesSlices(mask: Uint8Array, dims: Dims, axis: 0 | 1 | 2): Uint8Array {
  const [nx, ny] = dims;
  const out = new Uint8Array(mask.length);
  const strides = [1, nx, nx * ny];
  const ua = axis === 0 ? 1 : 0;
  const va = axis === 2 ? 1 : 2;
  const nu = dims[ua];
  const nv = dims[va];
  const slice = new Uint8Array(nu * nv);
  for (let s = 0; s < dims[axis]; s++) {
    for (let v = 0; v < nv; v++)
      for (let u = 0; u < nu; u++)
        slice[u + nu * v] = mask[s * strides[axis] + u * strides[ua] + v * strides[va]];
    const filled = fillHoles(slice, [nu, nv, 1]);
    for (let v = 0; v < nv; v++)
      for (let u = 0; u < nu; u++)
        out[s * strides[axis] + u * strides[ua] + v * strides[va]] = filled[u + nu * v];
  }
  return out;
}

/**
 * One-voxel dilation (grow = true) or erosion (grow = false) with the 6 face neighbours; for
 * erosion, points outside the grid count as background. Returns a new 0/1 mask.
 * @param mask - input (nonzero = inside)
 * @param dims - grid [nx, ny, nz]
 * @param grow - true: dilate, false: erode
 */
export function step6(mask: Uint8Array, dims: Dims, grow: boolean): Uint8Array {
  const [nx, ny, nz] = dims;
  const nxy = nx * ny;
  const out = new Uint8Array(mask.length);
  for (let k = 0; k < nz; k++)
    for (let j = 0; j < ny; j++) {
      const row = nx * j + nxy * k;
      for (let i = 0; i < nx; i++) {
        const q = row + i;
        const c = mask[q] !== 0;
        const l = i > 0 ? mask[q - 1] !== 0 : false;
        const r = i < nx - 1 ? mask[q + 1] !== 0 : false;
        const d = j > 0 ? mask[q - nx] !== 0 : false;
        const u = j < ny - 1 ? mask[q + nx] !== 0 : false;
        const b = k > 0 ? mask[q - nxy] !== 0 : false;
        const f = k < nz - 1 ? mask[q + nxy] !== 0 : false;
        out[q] = grow ? (c || l || r || d || u || b || f ? 1 : 0) : c && l && r && d && u && b && f ? 1 : 0;
      }
    }
  return out;
}

/**
 * out = 1 where data > threshold (or >= when `inclusive`), else 0; NaN is outside.
 * @param data - voxel values
 * @param threshold - cut value in the image's unit
 */
export function thresholdMask(data: ArrayLike<number>, threshold: number, inclusive = false): Uint8Array {
  const out = new Uint8Array(data.length);
  if (inclusive) for (let q = 0; q < data.length; q++) out[q] = data[q] >= threshold ? 1 : 0;
  else for (let q = 0; q < data.length; q++) out[q] = data[q] > threshold ? 1 : 0;
  return out;
}
