/**
 * Image similarity metrics as functions of the fixed-to-moving transform, for the
 * gradient-free optimisers. LOWER IS BETTER: every metric returns a cost,
 *   "mi":   -MI, mutual information in nats (0 for independent images, down to -ln(bins));
 *   "nmi":  -NMI, NMI = (H(F) + H(M)) / H(F, M) (Studholme, Hill & Hawkes 1999,
 *           Pattern Recognition 32), between -2 and -1;
 *   "lncc": -mean(LNCC^2), squared local normalised cross-correlation, between -1 and 0.
 *
 * Conventions (design.md): the transform maps FIXED world mm to MOVING world mm. Each fixed
 * sample (src/metrics/sampler.ts: seeded, drawn once, world coordinates precomputed) is mapped
 * by moving.worldToIndex · T and the moving image is sampled there by trilinear interpolation.
 * A sample COUNTS only if it lies in the fixed mask (the sample set is drawn from it), its
 * mapped point lies inside the moving image box [-0.5, n - 0.5]^3 and the moving mask is set at
 * the nearest moving voxel (read from a bit-packed copy of the mask, small enough to stay in cache). `overlap` = counted / samples of the last evaluation. When fewer
 * than max(minSamples, minOverlap x samples) count, the cost is a penalty worse than any real
 * value and growing as the overlap shrinks: worst + 1 + (1 - overlap), worst being 0 (mi,
 * lncc) or -1 (nmi) — too little overlap can never look like a good match.
 *
 * Histograms (mi, nmi) follow Mattes et al. (2003, "PET-CT image registration in the chest
 * using free-form deformations", IEEE TMI 22(1)): intensities are scaled into `bins` bins over
 * a robust range (default the 0.5-99.5 percentiles of each image's unmasked voxels; values
 * outside are clamped to the end bins); the fixed image uses a zero-order (box) window, its
 * bin precomputed per sample; the moving image a cubic B-spline Parzen window over 4 bins, its
 * range mapped to bin positions 2 .. bins-3 so the window always fits. With `parzen: "box"`
 * both sides use plain equal-width bins (an ordinary joint histogram, as numpy.histogram2d).
 * Entropies use natural logarithms; sums are float64; the joint histogram and marginals are
 * allocated once and cleared with fill(0) per evaluation.
 *
 * LNCC window: each fixed sample x carries a window of P x P x P points (default P = 3) at
 * offsets (a, b, c) * windowMm / P, a, b, c in {-(P-1)/2 .. (P-1)/2}, along the world axes of the
 * FIXED space; the window moves with the transform (points x + o map to T(x + o)). The fixed
 * values of the window are interpolated once (trilinear); the moving ones on every evaluation.
 * LNCC(x) = cov(f, m) / (sd f . sd m) over the window points. Samples whose fixed window is
 * flat (no variance) or leaves the fixed image are dropped when the metric is built; a counted
 * sample needs its whole moving window inside the moving image; a flat moving window scores 0.
 */
import { CoxaError } from "../common/errors.js";
import { isFiniteMat, type Mat4, multiply } from "../geometry/mat4.js";
import type { Volume } from "../image/volume.js";
import { sampleLinear } from "../resample/kernels.js";
import { accumulateJoint } from "./joint-histogram.js";
import { createSampleSet, robustRange, type SampleSet } from "./sampler.js";
import type { MetricSplitter } from "./split.js";

/** Metric names: mutual information, normalised mutual information, squared LNCC. */
export type MetricKind = "mi" | "nmi" | "lncc";

/** Metric names accepted by the library and the CLI. */
export const METRIC_KINDS: readonly MetricKind[] = ["mi", "nmi", "lncc"];

/** Options of createMetric. */
export interface MetricOptions {
  /** Fixed image (a pyramid level). */
  fixed: Volume;
  /** Moving image (a pyramid level); copied to Float32 when it is not. */
  moving: Volume;
  /** Fixed voxels allowed as samples (nonzero), fixed grid. */
  fixedMask?: Uint8Array;
  /** Voxels set in fixedMask, when known and all of them have finite values (saves a pass). */
  fixedMaskCount?: number;
  /** Moving voxels allowed (nonzero), moving grid. */
  movingMask?: Uint8Array;
  /** Number of fixed samples; default 50,000 (all voxels if fewer). */
  samples?: number;
  /** Seed of the sample choice; default 1. */
  seed?: number;
  /** Histogram bins (mi, nmi), 8..256; default 32 (Mattes et al. use 32-64). */
  bins?: number;
  /** Parzen window: "bspline" (default, Mattes et al.) or "box" (plain histogram). */
  parzen?: "bspline" | "box";
  /** Percentiles of the robust ranges; default [0.5, 99.5]. */
  percentiles?: [number, number];
  /** Fixed intensity range (overrides the percentiles). */
  fixedRange?: [number, number];
  /** Moving intensity range (overrides the percentiles). */
  movingRange?: [number, number];
  /** LNCC window side in mm; default 4 x the largest fixed voxel spacing. */
  windowMm?: number;
  /** LNCC window points per axis (odd, 3..7); default 3. */
  windowPoints?: number;
  /** Fewer counted samples than this fraction of all gives the penalty; default 0.1. */
  minOverlap?: number;
  /** Fewer counted samples than this gives the penalty; default 64. */
  minSamples?: number;
  /** A helper thread to share large histogram evaluations with (split.ts); default none. */
  splitter?: MetricSplitter;
}

/** A metric bound to one fixed/moving pair and one sample set. */
export interface Metric {
  readonly kind: MetricKind;
  /** Samples in the set (fixed mask voxels drawn). */
  readonly sampleCount: number;
  /** Samples counted in the last evaluation. */
  readonly counted: number;
  /** counted / sampleCount of the last evaluation (0..1). */
  readonly overlap: number;
  /** Similarity of the last evaluation (MI nats, NMI, mean LNCC^2); NaN when penalised. */
  readonly similarity: number;
  /** Whether the last evaluation returned the low-overlap penalty. */
  readonly penalised: boolean;
  /** Intensity ranges used for the histograms (mi, nmi). */
  readonly fixedRange: [number, number];
  readonly movingRange: [number, number];
  /**
   * Cost (lower is better) for a transform.
   * @param fixedToMoving - fixed world mm -> moving world mm (row-major Mat4)
   */
  evaluate(fixedToMoving: Mat4): number;
}

/**
 * Build a metric.
 * @param kind - "mi", "nmi" or "lncc"
 * @param options - images, masks, sampling and histogram settings
 * @throws CoxaError BAD_ARGUMENT for an unknown kind or bad settings, BAD_DIMS for mask sizes,
 *   NO_OVERLAP when the fixed mask leaves nothing to sample
 */
export function createMetric(kind: MetricKind, options: MetricOptions): Metric {
  if (!METRIC_KINDS.includes(kind)) {
    throw new CoxaError("BAD_ARGUMENT", `unknown metric "${kind}" (use ${METRIC_KINDS.join(", ")})`);
  }
  const { fixed, moving } = options;
  if (options.movingMask && options.movingMask.length !== moving.count) {
    throw new CoxaError(
      "BAD_DIMS",
      `moving mask has ${options.movingMask.length} voxels, the moving image ${moving.count}`,
    );
  }
  const samples = createSampleSet(fixed, {
    mask: options.fixedMask,
    samples: options.samples,
    seed: options.seed,
    candidates: options.fixedMaskCount,
  });
  const minOverlap = options.minOverlap ?? 0.1;
  const minSamples = options.minSamples ?? 64;
  if (!(minOverlap >= 0 && minOverlap <= 1)) {
    throw new CoxaError("BAD_ARGUMENT", `minimum overlap ${minOverlap} is not in 0..1`);
  }
  const movingData = moving.data instanceof Float32Array ? moving.data : Float32Array.from(moving.data);
  const ctx: Context = {
    samples,
    movingData,
    movingDims: moving.dims,
    movingW2I: moving.worldToIndex,
    movingBits: options.movingMask ? packedMask(options.movingMask) : undefined,
    minCount: (n) => Math.max(minSamples, minOverlap * n),
  };
  if (kind === "lncc") return new LnccMetric(ctx, fixed, options);
  return new HistogramMetric(kind, ctx, fixed, moving, options);
}

const packedCache = new WeakMap<Uint8Array, Uint8Array>();

/** The mask as a bitset (bit q & 7 of byte q >> 3), cached per mask array. */
function packedMask(mask: Uint8Array): Uint8Array {
  let bits = packedCache.get(mask);
  if (!bits) {
    const n = mask.length;
    bits = new Uint8Array((n + 7) >> 3);
    // Eight mask bytes per output byte without branches (masks are mostly long runs of 0s or
    // 1s, but their edges make a per-voxel branch mispredict).
    const whole = n >> 3;
    for (let b = 0, q = 0; b < whole; b++, q += 8) {
      bits[b] =
        (mask[q] !== 0 ? 1 : 0) |
        (mask[q + 1] !== 0 ? 2 : 0) |
        (mask[q + 2] !== 0 ? 4 : 0) |
        (mask[q + 3] !== 0 ? 8 : 0) |
        (mask[q + 4] !== 0 ? 16 : 0) |
        (mask[q + 5] !== 0 ? 32 : 0) |
        (mask[q + 6] !== 0 ? 64 : 0) |
        (mask[q + 7] !== 0 ? 128 : 0);
    }
    for (let q = whole << 3; q < n; q++) if (mask[q] !== 0) bits[q >> 3] |= 1 << (q & 7);
    packedCache.set(mask, bits);
  }
  return bits;
}

interface Context {
  samples: SampleSet;
  movingData: Float32Array;
  movingDims: readonly [number, number, number];
  movingW2I: Mat4;
  /** Moving mask as a bitset, or undefined for none. */
  movingBits: Uint8Array | undefined;
  minCount: (n: number) => number;
}

function checkTransform(t: Mat4): void {
  if (!isFiniteMat(t)) throw new CoxaError("BAD_TRANSFORM", "transform has non-finite entries");
}

class HistogramMetric implements Metric {
  readonly kind: MetricKind;
  readonly sampleCount: number;
  readonly fixedRange: [number, number];
  readonly movingRange: [number, number];
  counted = 0;
  overlap = 0;
  similarity = Number.NaN;
  penalised = false;
  private readonly ctx: Context;
  private readonly bins: number;
  private readonly box: boolean;
  private readonly fixedBin: Int32Array;
  private readonly joint: Float64Array;
  private readonly fixedMarginal: Float64Array;
  private readonly movingMarginal: Float64Array;
  private readonly m = new Float64Array(16);
  private readonly mScale: number;
  private readonly mOffset: number;
  /** Two-thread evaluation: the helper takes samples split..count-1. */
  private readonly splitter: MetricSplitter | undefined;
  private readonly split: number;
  private helperJoint: Float64Array | undefined;

  constructor(kind: MetricKind, ctx: Context, fixed: Volume, moving: Volume, options: MetricOptions) {
    this.kind = kind;
    this.ctx = ctx;
    // Worth it only when an evaluation is long: many samples into a large moving image (small
    // images stay in cache and are fast on one thread; the hand-over costs the same either way).
    const useSplit =
      options.splitter !== undefined &&
      ctx.samples.count >= options.splitter.minSamples &&
      options.moving.count >= options.splitter.minMovingVoxels;
    this.splitter = useSplit ? options.splitter : undefined;
    this.split = useSplit ? Math.floor(ctx.samples.count / 2) : ctx.samples.count;
    const bins = options.bins ?? 32;
    if (!Number.isInteger(bins) || bins < 8 || bins > 256) {
      throw new CoxaError("BAD_ARGUMENT", `histogram bins ${bins} is not an integer in 8..256`);
    }
    this.bins = bins;
    this.box = options.parzen === "box";
    const percents = options.percentiles ?? [0.5, 99.5];
    this.fixedRange =
      options.fixedRange ??
      robustRange(fixed.data, options.fixedMask, percents, undefined, options.fixedMaskCount);
    this.movingRange = options.movingRange ?? robustRange(moving.data, options.movingMask, percents);
    for (const r of [this.fixedRange, this.movingRange]) {
      if (!(r[1] > r[0]) || !Number.isFinite(r[0]) || !Number.isFinite(r[1])) {
        throw new CoxaError("BAD_ARGUMENT", `intensity range ${r[0]}..${r[1]} is empty or not finite`);
      }
    }
    const s = ctx.samples;
    this.sampleCount = s.count;
    this.fixedBin = new Int32Array(s.count);
    const [flo, fhi] = this.fixedRange;
    const fscale = bins / (fhi - flo);
    for (let q = 0; q < s.count; q++) {
      let b = Math.floor((s.values[q] - flo) * fscale);
      b = b < 0 ? 0 : b >= bins ? bins - 1 : b;
      this.fixedBin[q] = b;
    }
    const [mlo, mhi] = this.movingRange;
    if (this.box) {
      this.mScale = bins / (mhi - mlo);
      this.mOffset = -mlo * this.mScale;
    } else {
      this.mScale = (bins - 5) / (mhi - mlo);
      this.mOffset = 2 - mlo * this.mScale;
    }
    this.joint = new Float64Array(bins * bins);
    this.fixedMarginal = new Float64Array(bins);
    this.movingMarginal = new Float64Array(bins);
  }

  evaluate(fixedToMoving: Mat4): number {
    checkTransform(fixedToMoving);
    const { samples, movingData: data, movingDims } = this.ctx;
    const m = multiply(this.m, this.ctx.movingW2I, fixedToMoving);
    const [nx, ny, nz] = movingDims;
    const n = samples.count;
    let seq = 0;
    const splitter = this.splitter;
    if (splitter) {
      if (!splitter.serves(this) || !this.helperJoint) this.helperJoint = this.bindHelper(splitter);
      splitter.matrix.set(m);
      seq = splitter.start();
    }
    let counted = accumulateJoint(
      this.joint,
      this.fixedBin,
      this.bins,
      this.mScale,
      this.mOffset,
      this.box,
      samples.world,
      0,
      this.split,
      data,
      this.ctx.movingBits,
      nx,
      ny,
      nz,
      m,
    );
    if (splitter && this.helperJoint) {
      counted += splitter.finish(seq);
      const joint = this.joint;
      const other = this.helperJoint;
      for (let i = 0; i < joint.length; i++) joint[i] += other[i];
    }
    this.counted = counted;
    this.overlap = n > 0 ? counted / n : 0;
    if (counted < this.ctx.minCount(n) || counted === 0) {
      this.penalised = true;
      this.similarity = Number.NaN;
      return (this.kind === "nmi" ? -1 : 0) + 1 + (1 - this.overlap);
    }
    this.penalised = false;
    this.entropies(counted);
    const hFixed = this.hFixed;
    const hMoving = this.hMoving;
    const hJoint = this.hJoint;
    if (this.kind === "mi") {
      this.similarity = hFixed + hMoving - hJoint;
      return -this.similarity;
    }
    this.similarity = hJoint > 0 ? (hFixed + hMoving) / hJoint : 1;
    return -this.similarity;
  }

  /** Give the helper thread this metric's second half of the samples. */
  private bindHelper(splitter: MetricSplitter): Float64Array {
    const [nx, ny, nz] = this.ctx.movingDims;
    const bits = this.ctx.movingBits;
    return splitter.bind(this, {
      data: splitter.sharedCopy(this.ctx.movingData),
      bits: bits ? splitter.sharedCopy(bits) : undefined,
      world: splitter.sharedCopy(this.ctx.samples.world),
      fixedBin: splitter.sharedCopy(this.fixedBin),
      dims: [nx, ny, nz],
      start: this.split,
      end: this.ctx.samples.count,
      bins: this.bins,
      scale: this.mScale,
      offset: this.mOffset,
      box: this.box,
    });
  }

  /** Entropies (nats) of the last evaluation: fixed, moving and joint distributions. */
  hFixed = Number.NaN;
  hMoving = Number.NaN;
  hJoint = Number.NaN;

  /** Set hFixed, hMoving, hJoint from the current histogram (no allocation). */
  private entropies(total: number): void {
    const bins = this.bins;
    const joint = this.joint;
    const pf = this.fixedMarginal;
    const pm = this.movingMarginal;
    pf.fill(0);
    pm.fill(0);
    let jSum = 0;
    for (let r = 0; r < bins; r++) {
      const row = r * bins;
      let rowSum = 0;
      for (let c = 0; c < bins; c++) {
        const h = joint[row + c];
        if (h > 0) {
          rowSum += h;
          pm[c] += h;
          jSum += h * Math.log(h);
        }
      }
      pf[r] = rowSum;
    }
    let fSum = 0;
    let mSum = 0;
    for (let b = 0; b < bins; b++) {
      if (pf[b] > 0) fSum += pf[b] * Math.log(pf[b]);
      if (pm[b] > 0) mSum += pm[b] * Math.log(pm[b]);
    }
    const logN = Math.log(total);
    this.hFixed = logN - fSum / total;
    this.hMoving = logN - mSum / total;
    this.hJoint = logN - jSum / total;
  }
}

class LnccMetric implements Metric {
  readonly kind: MetricKind = "lncc";
  readonly sampleCount: number;
  readonly fixedRange: [number, number] = [Number.NaN, Number.NaN];
  readonly movingRange: [number, number] = [Number.NaN, Number.NaN];
  counted = 0;
  overlap = 0;
  similarity = Number.NaN;
  penalised = false;
  private readonly ctx: Context;
  private readonly points: number;
  /** Window offsets in fixed world mm, 3 per point. */
  private readonly offsets: Float64Array;
  /** Mapped offsets in moving voxel units for the current transform, 3 per point. */
  private readonly delta: Float64Array;
  /** Per kept sample: centred fixed values (points per sample) and 1 / sqrt(sum of squares). */
  private readonly fixedCentred: Float64Array;
  private readonly fixedInvNorm: Float64Array;
  private readonly world: Float64Array;
  private readonly m = new Float64Array(16);

  constructor(ctx: Context, fixed: Volume, options: MetricOptions) {
    this.ctx = ctx;
    const per = options.windowPoints ?? 3;
    if (!Number.isInteger(per) || per < 3 || per > 7 || per % 2 === 0) {
      throw new CoxaError("BAD_ARGUMENT", `LNCC window points ${per} is not an odd integer in 3..7`);
    }
    const windowMm = options.windowMm ?? 4 * Math.max(...fixed.spacingMm);
    if (!(windowMm > 0) || !Number.isFinite(windowMm)) {
      throw new CoxaError("BAD_ARGUMENT", `LNCC window ${windowMm} mm is not a positive number`);
    }
    const points = per * per * per;
    this.points = points;
    this.offsets = new Float64Array(3 * points);
    const step = windowMm / per;
    const half = (per - 1) / 2;
    let p = 0;
    for (let c = -half; c <= half; c++)
      for (let b = -half; b <= half; b++)
        for (let a = -half; a <= half; a++) {
          this.offsets[3 * p] = a * step;
          this.offsets[3 * p + 1] = b * step;
          this.offsets[3 * p + 2] = c * step;
          p++;
        }
    this.delta = new Float64Array(3 * points);
    // Fixed windows, interpolated once; flat windows and windows leaving the image are dropped.
    const s = ctx.samples;
    const keptCentred: number[] = [];
    const keptNorm: number[] = [];
    const keptWorld: number[] = [];
    const idx = [0, 0, 0];
    const vals = new Float64Array(points);
    const fdata = fixed.data;
    for (let q = 0; q < s.count; q++) {
      const x = s.world[3 * q];
      const y = s.world[3 * q + 1];
      const z = s.world[3 * q + 2];
      let ok = true;
      let mean = 0;
      for (let t = 0; t < points && ok; t++) {
        fixed.worldToIndexPoint(
          idx,
          x + this.offsets[3 * t],
          y + this.offsets[3 * t + 1],
          z + this.offsets[3 * t + 2],
        );
        const v = sampleLinear(fdata, fixed.dims, idx[0], idx[1], idx[2]);
        if (v !== v) ok = false;
        vals[t] = v;
        mean += v;
      }
      if (!ok) continue;
      mean /= points;
      let ss = 0;
      for (let t = 0; t < points; t++) ss += (vals[t] - mean) ** 2;
      if (!(ss > 1e-12 * points * (1 + mean * mean))) continue;
      for (let t = 0; t < points; t++) keptCentred.push(vals[t] - mean);
      keptNorm.push(1 / Math.sqrt(ss));
      keptWorld.push(x, y, z);
    }
    this.fixedCentred = Float64Array.from(keptCentred);
    this.fixedInvNorm = Float64Array.from(keptNorm);
    this.world = Float64Array.from(keptWorld);
    this.sampleCount = keptNorm.length;
    if (this.sampleCount === 0) {
      throw new CoxaError("NO_OVERLAP", "no fixed sample has a non-flat LNCC window inside the fixed image");
    }
  }

  evaluate(fixedToMoving: Mat4): number {
    checkTransform(fixedToMoving);
    const { movingData: data, movingDims, movingBits: bits } = this.ctx;
    const m = multiply(this.m, this.ctx.movingW2I, fixedToMoving);
    const points = this.points;
    const off = this.offsets;
    const delta = this.delta;
    for (let t = 0; t < points; t++) {
      const ox = off[3 * t];
      const oy = off[3 * t + 1];
      const oz = off[3 * t + 2];
      delta[3 * t] = m[0] * ox + m[1] * oy + m[2] * oz;
      delta[3 * t + 1] = m[4] * ox + m[5] * oy + m[6] * oz;
      delta[3 * t + 2] = m[8] * ox + m[9] * oy + m[10] * oz;
    }
    const [nx, ny, nz] = movingDims;
    const nxy = nx * ny;
    const xmax = nx - 1;
    const ymax = ny - 1;
    const zmax = nz - 1;
    const bx = nx - 0.5;
    const by = ny - 0.5;
    const bz = nz - 0.5;
    const world = this.world;
    const fc = this.fixedCentred;
    const finv = this.fixedInvNorm;
    const n = this.sampleCount;
    let counted = 0;
    let total = 0;
    for (let s = 0; s < n; s++) {
      const x = world[3 * s];
      const y = world[3 * s + 1];
      const z = world[3 * s + 2];
      const u0 = m[0] * x + m[1] * y + m[2] * z + m[3];
      const v0 = m[4] * x + m[5] * y + m[6] * z + m[7];
      const w0 = m[8] * x + m[9] * y + m[10] * z + m[11];
      if (!(u0 >= -0.5 && u0 <= bx && v0 >= -0.5 && v0 <= by && w0 >= -0.5 && w0 <= bz)) continue;
      if (bits !== undefined) {
        let ri = (u0 + 0.5) | 0;
        let rj = (v0 + 0.5) | 0;
        let rk = (w0 + 0.5) | 0;
        if (ri > xmax) ri = xmax;
        if (rj > ymax) rj = ymax;
        if (rk > zmax) rk = zmax;
        const q = ri + nx * rj + nxy * rk;
        if ((bits[q >> 3] & (1 << (q & 7))) === 0) continue;
      }
      let sum = 0;
      let sum2 = 0;
      let cross = 0;
      let inside = true;
      const base = s * points;
      for (let t = 0; t < points; t++) {
        let u = u0 + delta[3 * t];
        let v = v0 + delta[3 * t + 1];
        let w = w0 + delta[3 * t + 2];
        if (!(u >= -0.5 && u <= bx && v >= -0.5 && v <= by && w >= -0.5 && w <= bz)) {
          inside = false;
          break;
        }
        u = u < 0 ? 0 : u > xmax ? xmax : u;
        v = v < 0 ? 0 : v > ymax ? ymax : v;
        w = w < 0 ? 0 : w > zmax ? zmax : w;
        const i = u | 0;
        const j = v | 0;
        const k = w | 0;
        const fx = u - i;
        const fy = v - j;
        const fz = w - k;
        const o = i + nx * j + nxy * k;
        const sx = i < xmax ? 1 : 0;
        const sy = j < ymax ? nx : 0;
        const sz = k < zmax ? nxy : 0;
        const a = data[o];
        const b = data[o + sy];
        const c = data[o + sz];
        const d = data[o + sz + sy];
        const c00 = a + fx * (data[o + sx] - a);
        const c10 = b + fx * (data[o + sy + sx] - b);
        const c01 = c + fx * (data[o + sz + sx] - c);
        const c11 = d + fx * (data[o + sz + sy + sx] - d);
        const e = c00 + fy * (c10 - c00);
        const val = e + fz * (c01 + fy * (c11 - c01) - e);
        sum += val;
        sum2 += val * val;
        cross += fc[base + t] * val;
      }
      if (!inside || sum !== sum) continue;
      counted++;
      const varM = sum2 - (sum * sum) / points;
      if (varM > 1e-12 * (sum2 + 1e-300)) {
        const r = cross * finv[s];
        total += (r * r) / varM;
      }
    }
    this.counted = counted;
    this.overlap = n > 0 ? counted / n : 0;
    if (counted < this.ctx.minCount(n) || counted === 0) {
      this.penalised = true;
      this.similarity = Number.NaN;
      return 1 + (1 - this.overlap);
    }
    this.penalised = false;
    this.similarity = total / counted;
    return -this.similarity;
  }
}
