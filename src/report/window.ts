/**
 * Display windows: which intensity range maps to black..white on a report panel.
 *
 * - CT (Hounsfield units): a fixed window given by level (centre) and width, low = level - width/2,
 *   high = level + width/2. The default preset (level 300 HU, width 1800 HU) shows fat, soft
 *   tissue and bone at once and saturates metal; common practice, no source.
 * - MR (arbitrary units): a percentile window (1 % .. 99 % of the finite voxels by default), so the
 *   result does not depend on the scanner's scale.
 *
 * Mapping (closed form): byte = round(255 * clamp((v - low) / (high - low), 0, 1)); NaN -> 0.
 * Percentiles use linear interpolation between order statistics, definition 7 of Hyndman & Fan
 * (1996), "Sample quantiles in statistical packages" (numpy.percentile's default).
 */
import { CoxaError } from "../common/errors.js";
import type { VoxelArray } from "../image/datatypes.js";
import { percentileBySelection } from "../metrics/sampler.js";

/** An intensity range in the image's own unit (HU for CT). */
export interface IntensityWindow {
  /** Value shown black. */
  low: number;
  /** Value shown white (> low). */
  high: number;
  /** Short human description, e.g. "level 300 / width 1800 HU". */
  label: string;
}

/** Named CT windows (level and width in HU; common practice, no source). */
export const CT_WINDOWS = {
  /** Fat, soft tissue and bone together; metal saturates. */
  "bone-soft": { level: 300, width: 1800 },
  /** Soft tissue only. */
  soft: { level: 40, width: 400 },
} as const;

/** Name of a CT preset window. */
export type CtWindowName = keyof typeof CT_WINDOWS;

/**
 * Window from level and width.
 * @param level - centre value (image unit, HU for CT)
 * @param width - range shown (> 0, same unit)
 * @param unit - unit for the label, e.g. "HU"
 * @throws CoxaError BAD_ARGUMENT for a width that is not positive and finite
 */
export function windowFromLevelWidth(level: number, width: number, unit = "HU"): IntensityWindow {
  if (!(width > 0) || !Number.isFinite(width) || !Number.isFinite(level)) {
    throw new CoxaError("BAD_ARGUMENT", `display window level ${level} width ${width} is not usable`);
  }
  return {
    low: level - width / 2,
    high: level + width / 2,
    label: `level ${formatPlain(level)} / width ${formatPlain(width)} ${unit}`.trim(),
  };
}

/**
 * A named CT preset window.
 * @param name - key of CT_WINDOWS
 */
export function ctWindow(name: CtWindowName = "bone-soft"): IntensityWindow {
  const w = CT_WINDOWS[name];
  return windowFromLevelWidth(w.level, w.width, "HU");
}

/**
 * Percentiles of the finite values of `data` (Hyndman & Fan definition 7). Large arrays are
 * read on a regular stride so that at most about `maxSamples` values are used (order
 * statistics by selection, no sort).
 * @param data - voxel values
 * @param percents - wanted percentiles, each in 0..100
 * @param maxSamples - cap on the values used (default 400 000)
 * @returns one value per requested percentile; NaN when no value is finite
 * @throws CoxaError BAD_ARGUMENT for a percentile outside 0..100
 */
export function percentiles(
  data: VoxelArray | ArrayLike<number>,
  percents: readonly number[],
  maxSamples = 400_000,
): number[] {
  for (const p of percents) {
    if (!(p >= 0 && p <= 100)) throw new CoxaError("BAD_ARGUMENT", `percentile ${p} is outside 0..100`);
  }
  const stride = Math.max(1, Math.ceil(data.length / Math.max(1, maxSamples)));
  const sample = new Float64Array(Math.ceil(data.length / stride));
  let n = 0;
  for (let i = 0; i < data.length; i += stride) {
    const v = data[i];
    if (v === v && v !== Infinity && v !== -Infinity) sample[n++] = v;
  }
  if (n === 0) return percents.map(() => Number.NaN);
  const values = sample.subarray(0, n);
  return percents.map((p) => percentileBySelection(values, p));
}

/**
 * Percentile window (default 1 % .. 99 %) of the finite values of `data`. When the two
 * percentiles coincide (a constant image) the window is widened to value ± 0.5 so that the
 * image shows mid-grey instead of dividing by zero.
 * @param data - voxel values
 * @param lowPercent - percentile shown black (0..100)
 * @param highPercent - percentile shown white (0..100, > lowPercent)
 * @throws CoxaError BAD_ARGUMENT for percentiles out of order or range
 */
export function percentileWindow(
  data: VoxelArray | ArrayLike<number>,
  lowPercent = 1,
  highPercent = 99,
): IntensityWindow {
  if (!(lowPercent < highPercent)) {
    throw new CoxaError("BAD_ARGUMENT", `percentile window ${lowPercent}..${highPercent} is empty`);
  }
  let [low, high] = percentiles(data, [lowPercent, highPercent]);
  if (!Number.isFinite(low) || !Number.isFinite(high)) {
    low = 0;
    high = 1;
  } else if (!(high > low)) {
    low -= 0.5;
    high += 0.5;
  }
  return {
    low,
    high,
    label: `percentiles ${formatPlain(lowPercent)}-${formatPlain(highPercent)} % (${formatPlain(low)} .. ${formatPlain(high)})`,
  };
}

/**
 * out[p] = round(255 * clamp((values[p] - low) / (high - low), 0, 1)); NaN maps to 0.
 * @param out - one byte per value (may be a RasterImage's data)
 * @param values - intensities in the window's unit
 * @param window - low/high
 * @returns out
 * @throws CoxaError BAD_ARGUMENT when the lengths differ or the window is empty
 */
export function applyWindow(out: Uint8Array, values: ArrayLike<number>, window: IntensityWindow): Uint8Array {
  if (out.length !== values.length) {
    throw new CoxaError("BAD_ARGUMENT", `window output has ${out.length} bytes for ${values.length} values`);
  }
  const low = window.low;
  const span = window.high - window.low;
  if (!(span > 0)) throw new CoxaError("BAD_ARGUMENT", "display window is empty (high <= low)");
  for (let p = 0; p < values.length; p++) {
    const v = values[p];
    if (v !== v) {
      out[p] = 0;
      continue;
    }
    const t = ((v - low) * 255) / span; // multiply first: exact at the half-way points
    out[p] = t <= 0 ? 0 : t >= 255 ? 255 : Math.round(t);
  }
  return out;
}

function formatPlain(v: number): string {
  if (Number.isInteger(v)) return String(v);
  const a = Math.abs(v);
  return a >= 100 ? v.toFixed(0) : a >= 1 ? v.toFixed(1) : v.toPrecision(3);
}
