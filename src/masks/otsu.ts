/**
 * Histogram threshold by Otsu's method (N. Otsu 1979, "A threshold selection method from
 * gray-level histograms", IEEE Trans. SMC 9(1)): the cut that maximises the between-class
 * variance w1 w2 (mu1 - mu2)^2 of a histogram of `bins` equal-width bins over [min, max].
 * The threshold returned is the centre of the last bin of the lower class (the convention of
 * scikit-image's threshold_otsu, used as the test reference).
 */
import { CoxaError } from "../common/errors.js";

/**
 * Otsu threshold of the finite values (optionally only where `mask` is nonzero).
 * @param values - intensities
 * @param options - bins (default 256), mask, stride (visit every stride-th voxel; default 1)
 * @returns the threshold in the intensities' unit; the value itself for a constant image
 * @throws CoxaError BAD_INPUT when there is no finite value
 */
export function otsuThreshold(
  values: ArrayLike<number>,
  options: { bins?: number; mask?: Uint8Array; stride?: number } = {},
): number {
  const bins = options.bins ?? 256;
  const stride = Math.max(1, Math.floor(options.stride ?? 1));
  const mask = options.mask;
  let lo = Infinity;
  let hi = -Infinity;
  for (let q = 0; q < values.length; q += stride) {
    if (mask && mask[q] === 0) continue;
    const v = values[q];
    if (v !== v || v === Infinity || v === -Infinity) continue;
    if (v < lo) lo = v;
    if (v > hi) hi = v;
  }
  if (!(lo <= hi)) throw new CoxaError("BAD_INPUT", "no finite intensity to threshold");
  if (lo === hi) return lo;
  const hist = new Float64Array(bins);
  const scale = bins / (hi - lo);
  for (let q = 0; q < values.length; q += stride) {
    if (mask && mask[q] === 0) continue;
    const v = values[q];
    if (v !== v || v === Infinity || v === -Infinity) continue;
    let b = Math.floor((v - lo) * scale);
    if (b >= bins) b = bins - 1;
    hist[b]++;
  }
  const width = (hi - lo) / bins;
  let total = 0;
  let totalMoment = 0;
  for (let b = 0; b < bins; b++) {
    total += hist[b];
    totalMoment += hist[b] * (lo + (b + 0.5) * width);
  }
  let w1 = 0;
  let m1 = 0;
  let best = -1;
  let bestBin = 0;
  for (let b = 0; b < bins - 1; b++) {
    w1 += hist[b];
    m1 += hist[b] * (lo + (b + 0.5) * width);
    const w2 = total - w1;
    if (w1 === 0 || w2 === 0) continue;
    const mu1 = m1 / w1;
    const mu2 = (totalMoment - m1) / w2;
    const between = w1 * w2 * (mu1 - mu2) * (mu1 - mu2);
    if (between > best) {
      best = between;
      bestBin = b;
    }
  }
  return lo + (bestBin + 0.5) * width;
}
