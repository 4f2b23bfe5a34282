/**
 * Channel statistics and intensity normalisation for the training export.
 *
 * Statistics: count, min, max, mean and population standard deviation (ddof 0, like
 * numpy.std's default) over the voxels a mask selects, by Welford's (1962) running update in
 * float64 ("Note on a method for calculating corrected sums of squares and products").
 *
 * Normalisation `window` maps an intensity range linearly onto 0..1 and clips:
 *   out = clamp((v - low) / (high - low), 0, 1)
 * - CT: a fixed HU window given by level (centre) and width, low = level - width/2,
 *   high = level + width/2. Default level 500 HU, width 3000 HU (-1000..2000 HU: air to dense
 *   cortical bone, metal saturates at 1); common practice, no source.
 * - MR: the p_low and p_high percentiles (default 1 and 99) of the MR values inside the body
 *   and inside the MR field of view, by linear interpolation between order statistics
 *   (Hyndman & Fan 1996, definition 7 — numpy.percentile's default "linear" method).
 * Voxels are flat arrays, i fastest, on the CT grid.
 */
import { CoxaError } from "../common/errors.js";
import type { VoxelArray } from "../image/datatypes.js";
import { percentiles } from "../report/window.js";

/** Summary statistics of one channel over some voxels. */
export interface ChannelStats {
  /** Voxels counted. */
  count: number;
  min: number;
  max: number;
  mean: number;
  /** Population standard deviation (divides by count). */
  std: number;
}

/**
 * Statistics of `data` over the voxels where `mask` (if given) is non-zero; NaN voxels are skipped.
 * @param data - values (flat, any typed array)
 * @param mask - 0/1 selector of the same length, or undefined for all voxels
 * @param mask2 - a second selector (both must be non-zero), or undefined
 * @returns count 0 and NaN values when nothing is selected
 * @throws CoxaError BAD_ARGUMENT when a mask length differs from the data
 */
export function channelStats(data: VoxelArray, mask?: Uint8Array, mask2?: Uint8Array): ChannelStats {
  if ((mask && mask.length !== data.length) || (mask2 && mask2.length !== data.length)) {
    throw new CoxaError("BAD_ARGUMENT", "statistics mask and data differ in length");
  }
  let count = 0;
  let mean = 0;
  let m2 = 0;
  let min = Infinity;
  let max = -Infinity;
  const n = data.length;
  for (let q = 0; q < n; q++) {
    if (mask !== undefined && mask[q] === 0) continue;
    if (mask2 !== undefined && mask2[q] === 0) continue;
    const v = data[q];
    if (v !== v) continue;
    count++;
    const delta = v - mean;
    mean += delta / count;
    m2 += delta * (v - mean);
    if (v < min) min = v;
    if (v > max) max = v;
  }
  if (count === 0) return { count: 0, min: Number.NaN, max: Number.NaN, mean: Number.NaN, std: Number.NaN };
  return { count, min, max, mean, std: Math.sqrt(m2 / count) };
}

/** A linear map of an intensity range onto 0..1 with clipping. */
export interface UnitWindow {
  /** Value mapped to 0. */
  low: number;
  /** Value mapped to 1 (> low). */
  high: number;
}

/** Default CT window (HU; common practice, no source). */
export const DEFAULT_CT_LEVEL_HU = 500;
export const DEFAULT_CT_WIDTH_HU = 3000;
/** Default MR percentiles. */
export const DEFAULT_MR_PERCENTILES: readonly [number, number] = [1, 99];
/** At most this many MR values are sorted for the percentiles (a regular stride beyond). */
export const MR_PERCENTILE_MAX_SAMPLES = 8_000_000;

/**
 * The CT window from level and width.
 * @param levelHu - centre (HU)
 * @param widthHu - width (HU, > 0)
 * @throws CoxaError BAD_ARGUMENT for a width that is not positive or non-finite values
 */
export function ctUnitWindow(levelHu: number, widthHu: number): UnitWindow {
  if (!Number.isFinite(levelHu) || !Number.isFinite(widthHu) || !(widthHu > 0)) {
    throw new CoxaError("BAD_ARGUMENT", `CT window level ${levelHu} HU, width ${widthHu} HU is not usable`);
  }
  return { low: levelHu - widthHu / 2, high: levelHu + widthHu / 2 };
}

/**
 * The MR percentile window over the voxels both masks select.
 * @param mr - MR values on the CT grid (NaN where the MR has no data)
 * @param body - 0/1 body mask on the same grid
 * @param lowPercent - percentile mapped to 0 (0..100)
 * @param highPercent - percentile mapped to 1 (> lowPercent)
 * @param name - file named in errors
 * @returns the window and how many values it was computed from
 * @throws CoxaError BAD_ARGUMENT for percentiles out of order; BAD_INPUT when no MR value lies
 *   inside the body or the two percentiles coincide (no contrast)
 */
export function mrUnitWindow(
  mr: Float32Array,
  body: Uint8Array,
  lowPercent: number,
  highPercent: number,
  name: string,
): UnitWindow & { samples: number } {
  if (!(lowPercent >= 0 && highPercent <= 100 && lowPercent < highPercent)) {
    throw new CoxaError(
      "BAD_ARGUMENT",
      `MR percentiles ${lowPercent},${highPercent} are not 0 <= low < high <= 100`,
    );
  }
  let n = 0;
  for (let q = 0; q < mr.length; q++) if (body[q] !== 0 && mr[q] === mr[q]) n++;
  if (n === 0)
    throw new CoxaError("BAD_INPUT", "no MR voxel lies inside the CT body, cannot scale the MR", name);
  const stride = Math.max(1, Math.ceil(n / MR_PERCENTILE_MAX_SAMPLES));
  const values = new Float32Array(Math.ceil(n / stride));
  let seen = 0;
  let kept = 0;
  for (let q = 0; q < mr.length; q++) {
    if (body[q] === 0 || mr[q] !== mr[q]) continue;
    if (seen++ % stride === 0) values[kept++] = mr[q];
  }
  const [low, high] = percentiles(
    values.subarray(0, kept),
    [lowPercent, highPercent],
    Number.POSITIVE_INFINITY,
  );
  if (!(high > low)) {
    throw new CoxaError(
      "BAD_INPUT",
      `MR has no contrast inside the body (percentiles ${lowPercent} and ${highPercent} are both ${low})`,
      name,
    );
  }
  return { low, high, samples: kept };
}

/**
 * out[q] = clamp((data[q] - low) / (high - low), 0, 1) where `where` (if given) is non-zero;
 * other voxels are left as they are. `out` may be `data`.
 * @param out - destination (same length)
 * @param data - source values
 * @param window - low/high
 * @param where - 0/1 selector, or undefined for all voxels
 * @returns out
 */
export function applyUnitWindow(
  out: Float32Array,
  data: ArrayLike<number>,
  window: UnitWindow,
  where?: Uint8Array,
): Float32Array {
  const low = window.low;
  const scale = 1 / (window.high - window.low);
  const n = out.length;
  for (let q = 0; q < n; q++) {
    if (where !== undefined && where[q] === 0) continue;
    const t = (data[q] - low) * scale;
    out[q] = t < 0 ? 0 : t > 1 ? 1 : t;
  }
  return out;
}
