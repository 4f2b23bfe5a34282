/**
 * Integer block reduction of a voxel grid (box averaging, maximum, "any set").
 *
 * Conventions: storage i fastest. A block factor [fx, fy, fz] groups fx*fy*fz input voxels
 * into one output voxel; the output has floor(n / f) voxels per axis (an incomplete block at
 * the far edge is dropped, so every output voxel is a full block). Output voxel (I, J, K) is
 * the block of input voxels f*I .. f*I + f - 1 (per axis); its centre is at input index
 * f*I + (f - 1)/2, which `blockAffine` turns into the exact index-to-world matrix of the
 * reduced grid: world geometry is kept exactly, the voxel centres move.
 */
import { CoxaError } from "../common/errors.js";
import { type Mat4, multiply } from "../geometry/mat4.js";
import type { VoxelArray } from "../image/datatypes.js";
import type { Dims } from "../image/volume.js";

/** Integer block sizes [fx, fy, fz] in input voxels along i, j, k. */
export type BlockFactors = readonly [number, number, number];

/** A box of voxel indices, min inclusive, max exclusive, per axis i, j, k. */
export interface VoxelBox {
  min: [number, number, number];
  max: [number, number, number];
}

/** Voxels at or above a threshold, found during a reduction pass. */
export interface HighValues {
  threshold: number;
  /** Number of voxels >= threshold. */
  count: number;
  /** Their voxel box on the input grid, or undefined when there are none. */
  bounds: VoxelBox | undefined;
}

/**
 * Dimensions of a grid reduced by integer blocks: floor(n / f) per axis.
 * @throws CoxaError BAD_ARGUMENT when a factor is not a positive integer or exceeds the size
 */
export function blockDims(dims: Dims, factors: BlockFactors): [number, number, number] {
  const out: [number, number, number] = [0, 0, 0];
  for (let a = 0; a < 3; a++) {
    const f = factors[a];
    if (!Number.isInteger(f) || f < 1 || f > dims[a]) {
      throw new CoxaError("BAD_ARGUMENT", `block factor ${f} is not an integer in 1..${dims[a]}`);
    }
    out[a] = Math.floor(dims[a] / f);
  }
  return out;
}

/**
 * Index-to-world matrix of the reduced grid: A · [diag(f) | (f - 1)/2].
 * @param indexToWorld - the input grid's matrix (voxel centre index -> world mm)
 * @param factors - block factors
 */
export function blockAffine(indexToWorld: Mat4, factors: BlockFactors): Mat4 {
  const s = new Float64Array(16);
  for (let a = 0; a < 3; a++) {
    s[a * 4 + a] = factors[a];
    s[a * 4 + 3] = (factors[a] - 1) / 2;
  }
  s[15] = 1;
  return multiply(new Float64Array(16), indexToWorld, s);
}

/**
 * out = mean of each full block (box average), accumulated in float64.
 * @param out - output, length = product of blockDims(dims, factors)
 * @param data - input voxels
 * @param dims - input [nx, ny, nz]
 * @param factors - block factors
 * @param planeHook - optional, applied to each finished output slice (float64, i fastest)
 *   before it is stored, e.g. in-plane smoothing (planeSmoother)
 * @returns out
 */
export function blockMean(
  out: Float32Array,
  data: VoxelArray,
  dims: Dims,
  factors: BlockFactors,
  planeHook?: (plane: Float64Array) => void,
): Float32Array {
  reduceBlocks(out, data, dims, factors, "mean", 0, undefined, planeHook);
  return out;
}

/**
 * blockMean that also finds the voxels >= `threshold` in the same pass over the input
 * (including the incomplete far-edge blocks that the mean drops), so that a later search for
 * them (e.g. CT metal) can skip the rest of a large volume.
 * @param out - output, length = product of blockDims(dims, factors)
 * @param data - input voxels
 * @param dims - input [nx, ny, nz]
 * @param factors - block factors
 * @param threshold - value at or above which a voxel is recorded
 * @param planeHook - optional, applied to each finished output slice (float64, i fastest)
 *   before it is stored, e.g. in-plane smoothing (planeSmoother)
 * @returns the count and voxel box of the voxels >= threshold
 */
export function blockMeanTracking(
  out: Float32Array,
  data: VoxelArray,
  dims: Dims,
  factors: BlockFactors,
  threshold: number,
  planeHook?: (plane: Float64Array) => void,
): HighValues {
  const part = blockMeanPart(out, data, dims, factors, threshold, planeHook);
  return finishTracking([part], data, dims, factors, threshold);
}

/** What one thread's share of a tracking reduction found: count, then min and max i, j, k. */
export type TrackedPart = Int32Array;

/**
 * One thread's share of blockMean(Tracking): the output slices handed out by `claim` (a shared
 * counter, slot 0), or all of them without it.
 * @param threshold - track voxels >= this (+Infinity: none)
 * @returns the part's tracked voxels (see TrackedPart)
 */
export function blockMeanPart(
  out: Float32Array,
  data: VoxelArray,
  dims: Dims,
  factors: BlockFactors,
  threshold: number,
  planeHook?: (plane: Float64Array) => void,
  claim?: Int32Array,
): TrackedPart {
  const tracker = { threshold, count: 0, min: [dims[0], dims[1], dims[2]], max: [-1, -1, -1] };
  reduceBlocks(
    out,
    data,
    dims,
    factors,
    "mean",
    0,
    Number.isFinite(threshold) ? tracker : undefined,
    planeHook,
    claim,
  );
  return Int32Array.of(tracker.count, ...tracker.min, ...tracker.max);
}

/**
 * Merge the parts of a tracking reduction and add the voxels of the incomplete far-edge
 * blocks, which the reduction does not visit.
 */
export function finishTracking(
  parts: readonly TrackedPart[],
  data: VoxelArray,
  dims: Dims,
  factors: BlockFactors,
  threshold: number,
): HighValues {
  const tracker = { threshold, count: 0, min: [dims[0], dims[1], dims[2]], max: [-1, -1, -1] };
  for (const p of parts) {
    tracker.count += p[0];
    for (let a = 0; a < 3; a++) {
      tracker.min[a] = Math.min(tracker.min[a], p[1 + a]);
      tracker.max[a] = Math.max(tracker.max[a], p[4 + a]);
    }
  }
  const [nx, ny, nz] = dims;
  const used = blockDims(dims, factors).map((o, a) => o * factors[a]);
  for (let k = 0; k < nz; k++)
    for (let j = 0; j < ny; j++) {
      const row = nx * (j + ny * k);
      const full = k < used[2] && j < used[1];
      for (let i = full ? used[0] : 0; i < nx; i++) if (data[row + i] >= threshold) track(tracker, i, j, k);
    }
  const bounds: VoxelBox | undefined =
    tracker.max[0] < 0
      ? undefined
      : {
          min: [tracker.min[0], tracker.min[1], tracker.min[2]],
          max: [tracker.max[0] + 1, tracker.max[1] + 1, tracker.max[2] + 1],
        };
  return { threshold, count: tracker.count, bounds };
}

interface Tracker {
  threshold: number;
  count: number;
  min: number[];
  max: number[];
}

function track(t: Tracker, i: number, j: number, k: number): void {
  t.count++;
  if (i < t.min[0]) t.min[0] = i;
  if (i > t.max[0]) t.max[0] = i;
  if (j < t.min[1]) t.min[1] = j;
  if (j > t.max[1]) t.max[1] = j;
  if (k < t.min[2]) t.min[2] = k;
  if (k > t.max[2]) t.max[2] = k;
}

/**
 * out = 1 where any voxel of the block is >= threshold (for masks: threshold 1 on a 0/1 mask),
 * else 0.
 * @param out - output, length = product of blockDims(dims, factors)
 * @param data - input voxels
 * @param dims - input [nx, ny, nz]
 * @param factors - block factors
 * @param threshold - value at or above which a voxel counts
 * @returns out
 */
export function blockAny(
  out: Uint8Array,
  data: VoxelArray,
  dims: Dims,
  factors: BlockFactors,
  threshold = 1,
): Uint8Array {
  reduceBlocks(out, data, dims, factors, "any", threshold);
  return out;
}

/**
 * out = 1 where at least half of the block's voxels are nonzero (majority vote; for masks).
 * @param out - output, length = product of blockDims(dims, factors)
 * @param data - 0/1 input mask
 * @param dims - input [nx, ny, nz]
 * @param factors - block factors
 * @returns out
 */
export function blockMajority(
  out: Uint8Array,
  data: Uint8Array,
  dims: Dims,
  factors: BlockFactors,
): Uint8Array {
  reduceBlocks(out, data, dims, factors, "majority", 0);
  return out;
}

function reduceBlocks(
  out: Float32Array | Uint8Array,
  data: VoxelArray,
  dims: Dims,
  factors: BlockFactors,
  mode: "mean" | "any" | "majority",
  threshold: number,
  tracker?: Tracker,
  planeHook?: (plane: Float64Array) => void,
  claim?: Int32Array,
): void {
  const [ox, oy, oz] = blockDims(dims, factors);
  const [fx, fy, fz] = factors;
  const [nx, ny] = dims;
  if (out.length !== ox * oy * oz) {
    throw new CoxaError("BAD_DIMS", `block output needs ${ox * oy * oz} voxels, got ${out.length}`);
  }
  const nxy = nx * ny;
  const acc = new Float64Array(ox * oy);
  const count = fx * fy * fz;
  const scale = 1 / count;
  const usedX = ox * fx;
  const thr = tracker ? tracker.threshold : Number.POSITIVE_INFINITY;
  // Output slices in order, or (with `claim`) whichever the shared counter hands out next, so
  // that two threads can share one reduction (src/pyramid/parallel.ts).
  for (
    let kk = claim ? Atomics.add(claim, 0, 1) : 0;
    kk < oz;
    kk = claim ? Atomics.add(claim, 0, 1) : kk + 1
  ) {
    acc.fill(0);
    for (let dk = 0; dk < fz; dk++) {
      const k = kk * fz + dk;
      for (let jj = 0; jj < oy; jj++) {
        const arow = jj * ox;
        for (let dj = 0; dj < fy; dj++) {
          const row = (jj * fy + dj) * nx + k * nxy;
          if (mode === "mean") {
            // thr is +Infinity unless tracking: the comparison then never fires.
            const y = jj * fy + dj;
            if (fx === 1) {
              for (let i = 0; i < usedX; i++) {
                const v = data[row + i];
                acc[arow + i] += v;
                if (v >= thr) track(tracker!, i, y, k);
              }
            } else if (fx === 2) {
              for (let ii = 0, i = row; ii < ox; ii++, i += 2) {
                const a = data[i];
                const b = data[i + 1];
                acc[arow + ii] += a + b;
                if (a >= thr || b >= thr) {
                  if (a >= thr) track(tracker!, i - row, y, k);
                  if (b >= thr) track(tracker!, i + 1 - row, y, k);
                }
              }
            } else {
              let i = row;
              for (let ii = 0; ii < ox; ii++) {
                let s = 0;
                for (let d = 0; d < fx; d++) {
                  const v = data[i++];
                  s += v;
                  if (v >= thr) track(tracker!, i - 1 - row, y, k);
                }
                acc[arow + ii] += s;
              }
            }
          } else if (mode === "any") {
            let i = row;
            for (let ii = 0; ii < ox; ii++) {
              let hit = 0;
              for (let d = 0; d < fx; d++) if (data[i++] >= threshold) hit = 1;
              if (hit) acc[arow + ii] = 1;
            }
          } else {
            let i = row;
            for (let ii = 0; ii < ox; ii++) {
              let s = 0;
              for (let d = 0; d < fx; d++) s += data[i++] !== 0 ? 1 : 0;
              acc[arow + ii] += s;
            }
          }
        }
      }
    }
    const base = kk * ox * oy;
    if (mode === "mean" && planeHook) {
      for (let q = 0; q < ox * oy; q++) acc[q] *= scale;
      planeHook(acc);
      for (let q = 0; q < ox * oy; q++) out[base + q] = acc[q];
    } else if (mode === "mean") for (let q = 0; q < ox * oy; q++) out[base + q] = acc[q] * scale;
    else if (mode === "any") for (let q = 0; q < ox * oy; q++) out[base + q] = acc[q];
    else for (let q = 0; q < ox * oy; q++) out[base + q] = 2 * acc[q] >= count ? 1 : 0;
  }
}
