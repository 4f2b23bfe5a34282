/**
 * Fixed-image sample sets for the metrics, and robust intensity ranges.
 *
 * A sample set is drawn once per pyramid level and reused for every evaluation: a seeded
 * random subset (without replacement, Floyd's algorithm) of the fixed-mask voxels with finite
 * values, kept in storage order (so that successive samples map to nearby moving voxels,
 * which is kind to caches). For each sample the WORLD coordinates (mm) of its voxel centre
 * and its fixed value are stored; the metrics map the world points through the
 * fixed-to-moving transform on each evaluation.
 *
 * Robust range: the pLow and pHigh percentiles (default 0.5 % and 99.5 %) of the finite values
 * inside the mask, with numpy's default "linear" interpolation between order statistics, on at
 * most `maxValues` voxels taken at a regular stride through the mask (exact below that size).
 */
import { CoxaError } from "../common/errors.js";
import { Rng } from "../common/random.js";
import type { VoxelArray } from "../image/datatypes.js";
import type { Volume } from "../image/volume.js";

/** Samples of the fixed image. */
export interface SampleSet {
  /** Number of samples. */
  count: number;
  /** World coordinates, x y z per sample (mm). */
  world: Float64Array;
  /** Fixed intensities at the samples. */
  values: Float32Array;
  /** Flat voxel index of each sample on the fixed grid. */
  voxel: Int32Array;
  /** Number of voxels the samples were drawn from (mask voxels with finite values). */
  candidates: number;
}

/** Options of createSampleSet. */
export interface SampleOptions {
  /** Voxels allowed (nonzero); default all. */
  mask?: Uint8Array;
  /** Number of samples; default 50,000; at least the candidates -> all of them. */
  samples?: number;
  /** Seed of the random choice; default 1. */
  seed?: number;
  /** Voxels set in `mask`, when known and all of them have finite values (saves a pass). */
  candidates?: number;
}

/** Default number of samples per level. */
export const DEFAULT_SAMPLES = 50_000;

/**
 * Draw the fixed sample set.
 * @param fixed - fixed image (a pyramid level)
 * @param options - mask, samples, seed
 * @throws CoxaError BAD_DIMS when the mask size differs, NO_OVERLAP when no voxel is available
 */
export function createSampleSet(fixed: Volume, options: SampleOptions = {}): SampleSet {
  const { mask } = options;
  const data = fixed.data;
  const n = fixed.count;
  if (mask && mask.length !== n) {
    throw new CoxaError("BAD_DIMS", `fixed mask has ${mask.length} voxels, the fixed image ${n}`);
  }
  let candidates = 0;
  if (options.candidates !== undefined && mask) candidates = options.candidates;
  else if (mask) for (let q = 0; q < n; q++) candidates += mask[q] !== 0 && data[q] === data[q] ? 1 : 0;
  else for (let q = 0; q < n; q++) candidates += data[q] === data[q] ? 1 : 0;
  if (candidates === 0) throw new CoxaError("NO_OVERLAP", "the fixed mask leaves no voxel to sample");
  const wanted = Math.max(1, Math.floor(options.samples ?? DEFAULT_SAMPLES));
  const count = Math.min(wanted, candidates);
  // Ranks (0..candidates-1) of the chosen voxels, ascending.
  let ranks: Int32Array | undefined;
  if (count < candidates) {
    const rng = new Rng(options.seed ?? 1);
    const chosen = new Set<number>();
    // Floyd's algorithm: for j = N-k .. N-1 pick t in [0, j]; take t, or j if t was taken.
    for (let j = candidates - count; j < candidates; j++) {
      const t = rng.int(j + 1);
      chosen.add(chosen.has(t) ? j : t);
    }
    ranks = Int32Array.from(chosen).sort();
  }
  const voxel = new Int32Array(count);
  let rank = 0;
  let next = 0;
  if (!ranks) {
    for (let q = 0; q < n && next < count; q++)
      if ((!mask || mask[q] !== 0) && data[q] === data[q]) voxel[next++] = q;
  } else {
    let want = ranks[0];
    for (let q = 0; q < n; q++) {
      if ((mask && mask[q] === 0) || data[q] !== data[q]) continue;
      if (rank++ === want) {
        voxel[next++] = q;
        if (next === count) break;
        want = ranks[next];
      }
    }
  }
  const world = new Float64Array(3 * count);
  const values = new Float32Array(count);
  const [nx, ny] = fixed.dims;
  const m = fixed.indexToWorld;
  for (let s = 0; s < count; s++) {
    const q = voxel[s];
    const k = Math.floor(q / (nx * ny));
    const rem = q - k * nx * ny;
    const j = Math.floor(rem / nx);
    const i = rem - j * nx;
    world[3 * s] = m[0] * i + m[1] * j + m[2] * k + m[3];
    world[3 * s + 1] = m[4] * i + m[5] * j + m[6] * k + m[7];
    world[3 * s + 2] = m[8] * i + m[9] * j + m[10] * k + m[11];
    values[s] = data[q];
  }
  return { count, world, values, voxel, candidates };
}

/**
 * Percentile of finite values with numpy's "linear" method (position p/100 * (n - 1)).
 * @param values - sorted or unsorted values (copied, not modified)
 * @param percent - 0..100
 */
export function percentile(values: ArrayLike<number>, percent: number): number {
  const a = Float64Array.from(values).filter((v) => v === v);
  if (a.length === 0) return Number.NaN;
  return percentileBySelection(a, Math.min(100, Math.max(0, percent)));
}

/**
 * Robust intensity range: [pLow, pHigh] percentiles of finite values inside `mask`.
 * @param data - voxel values
 * @param mask - allowed voxels (nonzero); default all
 * @param percents - [low, high] in percent; default [0.5, 99.5]
 * @param maxValues - about this many voxels are used (every step-th voxel inside the mask, exact
 *   for masks of up to twice this size); default 200,000
 * @param maskCount - voxels set in `mask`, when known (saves a counting pass)
 * @returns [lo, hi] with hi > lo (widened by 1 unit for a constant image)
 * @throws CoxaError NO_OVERLAP when there is no finite value
 */
export function robustRange(
  data: VoxelArray,
  mask?: Uint8Array,
  percents: readonly [number, number] = [0.5, 99.5],
  maxValues = 200_000,
  maskCount?: number,
): [number, number] {
  // Take every step-th voxel of the mask (exact, step 1, up to 2 x maxValues of them); fall
  // back to every voxel when NaNs leave too few.
  let inside = data.length;
  if (mask && maskCount !== undefined) inside = maskCount;
  else if (mask) {
    inside = 0;
    for (let q = 0; q < mask.length; q++) inside += mask[q] !== 0 ? 1 : 0;
  }
  let picked = pickValues(data, mask, Math.max(1, Math.floor(inside / (2 * maxValues))));
  if (picked.length < 1000) picked = pickValues(data, mask, 1);
  if (picked.length === 0) throw new CoxaError("NO_OVERLAP", "no finite voxel inside the mask");
  const values = picked;
  const at = (p: number) => percentileBySelection(values, p);
  let lo = at(percents[0]);
  let hi = at(percents[1]);
  if (!(hi > lo)) {
    lo -= 0.5;
    hi += 0.5;
  }
  return [lo, hi];
}

/**
 * The p-th percentile (0..100, Hyndman & Fan definition 7: linear between order statistics) of
 * `values`, by selection in linear time instead of a sort; reorders `values`.
 */
export function percentileBySelection(values: Float64Array, p: number): number {
  const pos = ((values.length - 1) * p) / 100;
  const lo = Math.floor(pos);
  const a = selectKth(values, lo);
  if (lo + 1 >= values.length || pos === lo) return a;
  // After the selection everything beyond lo is >= a: the next order statistic is their minimum.
  let b = Number.POSITIVE_INFINITY;
  for (let i = lo + 1; i < values.length; i++) if (values[i] < b) b = values[i];
  return a + (pos - lo) * (b - a);
}

/**
 * The k-th smallest value (0-based) of `a`, reordering `a` so that a[k] holds it, every
 * element before k is <= it and every element after is >= it (Hoare's selection, median of
 * three pivots).
 */
export function selectKth(a: Float64Array, k: number): number {
  let lo = 0;
  let hi = a.length - 1;
  while (hi > lo) {
    const mid = (lo + hi) >>> 1;
    // Median of three into a[mid], with a[lo] <= a[mid] <= a[hi].
    if (a[mid] < a[lo]) swap(a, mid, lo);
    if (a[hi] < a[lo]) swap(a, hi, lo);
    if (a[hi] < a[mid]) swap(a, hi, mid);
    const pivot = a[mid];
    let i = lo;
    let j = hi;
    while (i <= j) {
      while (a[i] < pivot) i++;
      while (a[j] > pivot) j--;
      if (i <= j) {
        swap(a, i, j);
        i++;
        j--;
      }
    }
    if (k <= j) hi = j;
    else if (k >= i) lo = i;
    else return a[k];
  }
  return a[k];
}

function swap(a: Float64Array, i: number, j: number): void {
  const t = a[i];
  a[i] = a[j];
  a[j] = t;
}

/**
 * Finite values of `data` inside `mask`: of every `step` voxels inside the mask, the first (so
 * the choice depends on the masked voxels and their order only, not on where the grid starts);
 * without a mask, every `step`-th voxel.
 */
function pickValues(data: VoxelArray, mask: Uint8Array | undefined, step: number): Float64Array {
  const out = new Float64Array(Math.ceil(data.length / step));
  let c = 0;
  if (mask) {
    let skip = 0;
    for (let q = 0; q < data.length; q++) {
      if (mask[q] === 0) continue;
      if (skip > 0) {
        skip--;
        continue;
      }
      const v = data[q];
      if (v === v) {
        out[c++] = v;
        skip = step - 1;
      }
    }
  } else {
    for (let q = 0; q < data.length; q += step) {
      const v = data[q];
      if (v === v) out[c++] = v;
    }
  }
  return out.subarray(0, c);
}
