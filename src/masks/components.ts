/**
 * Connected components of binary masks.
 *
 * Conventions: masks are Uint8Array, nonzero = inside, storage i fastest on a grid `dims`.
 * Connectivity 6 = face neighbours, 26 = face, edge and corner neighbours (the two usual
 * digital-topology choices; a 26-connected foreground pairs with a 6-connected background).
 * Labelling by breadth-first search with an explicit Int32 queue (no recursion), labels
 * 1..count in order of the first voxel met in storage order, as scipy.ndimage.label numbers them.
 */
import { CoxaError } from "../common/errors.js";
import type { Dims } from "../image/volume.js";
import type { VoxelBox } from "../pyramid/blocks.js";

/** Voxel box (re-exported from src/pyramid/blocks.ts). */
export type { VoxelBox } from "../pyramid/blocks.js";

/** Voxel connectivity: 6 (faces) or 26 (faces, edges, corners). */
export type Connectivity = 6 | 26;

/** Labelled components: labels (0 = background) and the voxel count of each label. */
export interface Components {
  labels: Int32Array;
  /** sizes[l - 1] = number of voxels with label l. */
  sizes: number[];
  count: number;
}

/** Neighbour offsets (di, dj, dk) for a connectivity. */
export function neighbourOffsets(connectivity: Connectivity): [number, number, number][] {
  const out: [number, number, number][] = [];
  for (let dk = -1; dk <= 1; dk++)
    for (let dj = -1; dj <= 1; dj++)
      for (let di = -1; di <= 1; di++) {
        const m = Math.abs(di) + Math.abs(dj) + Math.abs(dk);
        if (m === 0) continue;
        if (connectivity === 6 && m !== 1) continue;
        out.push([di, dj, dk]);
      }
  return out;
}

function checkMask(mask: Uint8Array, dims: Dims, connectivity: number): void {
  if (mask.length !== dims[0] * dims[1] * dims[2]) {
    throw new CoxaError("BAD_DIMS", `mask has ${mask.length} voxels, grid ${dims.join("x")}`);
  }
  if (connectivity !== 6 && connectivity !== 26) {
    throw new CoxaError("BAD_ARGUMENT", `connectivity ${connectivity} is not 6 or 26`);
  }
}

/**
 * Label the connected components of `mask`.
 * @param mask - nonzero = foreground
 * @param dims - grid [nx, ny, nz]
 * @param connectivity - 6 or 26
 * @throws CoxaError BAD_DIMS, BAD_ARGUMENT
 */
export function labelComponents(mask: Uint8Array, dims: Dims, connectivity: Connectivity = 26): Components {
  checkMask(mask, dims, connectivity);
  const [nx, ny, nz] = dims;
  const nxy = nx * ny;
  const labels = new Int32Array(mask.length);
  const queue = new Int32Array(mask.length);
  const offsets = neighbourOffsets(connectivity);
  const odi = Int32Array.from(offsets.map((o) => o[0]));
  const odj = Int32Array.from(offsets.map((o) => o[1]));
  const odk = Int32Array.from(offsets.map((o) => o[2]));
  const no = offsets.length;
  const sizes: number[] = [];
  let count = 0;
  if (connectivity === 6) {
    // Face neighbours written out: no offset tables, no coordinate decoding per neighbour.
    for (let seed = 0; seed < mask.length; seed++) {
      if (mask[seed] === 0 || labels[seed] !== 0) continue;
      count++;
      labels[seed] = count;
      let head = 0;
      let tail = 0;
      queue[tail++] = seed;
      while (head < tail) {
        const q = queue[head++];
        const k = (q / nxy) | 0;
        const rem = q - k * nxy;
        const j = (rem / nx) | 0;
        const i = rem - j * nx;
        let p = q - 1;
        if (i > 0 && mask[p] !== 0 && labels[p] === 0) {
          labels[p] = count;
          queue[tail++] = p;
        }
        p = q + 1;
        if (i < nx - 1 && mask[p] !== 0 && labels[p] === 0) {
          labels[p] = count;
          queue[tail++] = p;
        }
        p = q - nx;
        if (j > 0 && mask[p] !== 0 && labels[p] === 0) {
          labels[p] = count;
          queue[tail++] = p;
        }
        p = q + nx;
        if (j < ny - 1 && mask[p] !== 0 && labels[p] === 0) {
          labels[p] = count;
          queue[tail++] = p;
        }
        p = q - nxy;
        if (k > 0 && mask[p] !== 0 && labels[p] === 0) {
          labels[p] = count;
          queue[tail++] = p;
        }
        p = q + nxy;
        if (k < nz - 1 && mask[p] !== 0 && labels[p] === 0) {
          labels[p] = count;
          queue[tail++] = p;
        }
      }
      sizes.push(tail);
    }
    return { labels, sizes, count };
  }
  for (let seed = 0; seed < mask.length; seed++) {
    if (mask[seed] === 0 || labels[seed] !== 0) continue;
    count++;
    labels[seed] = count;
    let head = 0;
    let tail = 0;
    queue[tail++] = seed;
    while (head < tail) {
      const q = queue[head++];
      const k = (q / nxy) | 0;
      const rem = q - k * nxy;
      const j = (rem / nx) | 0;
      const i = rem - j * nx;
      for (let t = 0; t < no; t++) {
        const ii = i + odi[t];
        const jj = j + odj[t];
        const kk = k + odk[t];
        if (ii < 0 || ii >= nx || jj < 0 || jj >= ny || kk < 0 || kk >= nz) continue;
        const p = ii + nx * jj + nxy * kk;
        if (mask[p] !== 0 && labels[p] === 0) {
          labels[p] = count;
          queue[tail++] = p;
        }
      }
    }
    sizes.push(tail);
  }
  return { labels, sizes, count };
}

/**
 * The largest connected component of `mask` (ties: the lower label), as a new 0/1 mask.
 * An empty mask gives an empty mask.
 * @param mask - nonzero = foreground
 * @param dims - grid [nx, ny, nz]
 * @param connectivity - 6 or 26
 */
export function largestComponent(mask: Uint8Array, dims: Dims, connectivity: Connectivity = 6): Uint8Array {
  const { labels, sizes } = labelComponents(mask, dims, connectivity);
  const out = new Uint8Array(mask.length);
  if (sizes.length === 0) return out;
  let best = 0;
  for (let l = 1; l < sizes.length; l++) if (sizes[l] > sizes[best]) best = l;
  const keep = best + 1;
  for (let q = 0; q < out.length; q++) out[q] = labels[q] === keep ? 1 : 0;
  return out;
}

/**
 * Remove components smaller than `minVoxels` from `mask` in place, visiting only foreground
 * voxels (suitable for sparse masks on large grids: no label array, the queue holds one
 * component at a time). Returns the sizes of the components kept.
 * @param mask - 0/1 mask, modified in place
 * @param dims - grid [nx, ny, nz]
 * @param connectivity - 6 or 26
 * @param minVoxels - smallest component kept
 * @param region - optional voxel box [i0, i1) x [j0, j1) x [k0, k1) that contains every foreground voxel
 */
export function removeSmallComponents(
  mask: Uint8Array,
  dims: Dims,
  connectivity: Connectivity,
  minVoxels: number,
  region?: VoxelBox,
): number[] {
  checkMask(mask, dims, connectivity);
  const [nx, ny, nz] = dims;
  const nxy = nx * ny;
  const box = region ?? { min: [0, 0, 0], max: [nx, ny, nz] };
  const offsets = neighbourOffsets(connectivity);
  const no = offsets.length;
  const odi = Int32Array.from(offsets.map((o) => o[0]));
  const odj = Int32Array.from(offsets.map((o) => o[1]));
  const odk = Int32Array.from(offsets.map((o) => o[2]));
  let queue = new Int32Array(1024);
  const kept: number[] = [];
  // Mark: 1 = unvisited foreground, 2 = visited (kept), 3 = visited (to drop, cleared at the end).
  for (let k = box.min[2]; k < box.max[2]; k++)
    for (let j = box.min[1]; j < box.max[1]; j++)
      for (let i = box.min[0]; i < box.max[0]; i++) {
        const seed = i + nx * j + nxy * k;
        if (mask[seed] !== 1) continue;
        mask[seed] = 2;
        let head = 0;
        let tail = 0;
        queue[tail++] = seed;
        while (head < tail) {
          const q = queue[head++];
          const kq = (q / nxy) | 0;
          const rem = q - kq * nxy;
          const jq = (rem / nx) | 0;
          const iq = rem - jq * nx;
          for (let t = 0; t < no; t++) {
            const ii = iq + odi[t];
            const jj = jq + odj[t];
            const kk = kq + odk[t];
            if (ii < 0 || ii >= nx || jj < 0 || jj >= ny || kk < 0 || kk >= nz) continue;
            const p = ii + nx * jj + nxy * kk;
            if (mask[p] === 1) {
              mask[p] = 2;
              if (tail === queue.length) {
                const bigger = new Int32Array(queue.length * 2);
                bigger.set(queue);
                queue = bigger;
              }
              queue[tail++] = p;
            }
          }
        }
        if (tail < minVoxels) for (let q = 0; q < tail; q++) mask[queue[q]] = 3;
        else kept.push(tail);
      }
  for (let k = box.min[2]; k < box.max[2]; k++)
    for (let j = box.min[1]; j < box.max[1]; j++) {
      const row = nx * j + nxy * k;
      for (let i = box.min[0]; i < box.max[0]; i++) {
        const v = mask[row + i];
        if (v !== 0) mask[row + i] = v === 2 ? 1 : 0;
      }
    }
  return kept;
}
