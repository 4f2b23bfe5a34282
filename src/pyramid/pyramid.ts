/**
 * Multiresolution pyramid: per level a target sampling step h in mm (default 8, 4, 2 mm).
 *
 * Method, per voxel axis a with input spacing s_a (mm):
 *  1. Box reduction. The level grid is an integer block reduction of the input by
 *     F_a = b_a * d_a voxels, where b_a = max(1, floor(h_min / s_a)) is the "base" factor of
 *     the finest level (h_min) and d_a = max(1, floor(h / (s_a b_a))): the level spacing
 *     s_a F_a never exceeds h, and every level is a block reduction of the shared base grid
 *     (the full-resolution volume is read once, by the base reduction). Axes already coarser
 *     than h (thick MR slices) are not reduced (F_a = 1).
 *  2. Gaussian smoothing matched to the step. The target resolution is a Gaussian blur of
 *     full width at half maximum h applied to a signal already sampled at s_a, i.e. added
 *     variance sigma_t^2 = (h^2 - s_a^2) / (8 ln 2) mm^2 (FWHM = 2 sqrt(2 ln 2) sigma; variances
 *     of successive blurs add), and none at all where s_a >= h — so thick slices are never
 *     smoothed further along their axis. The box of F_a samples already contributed the
 *     variance s_a^2 (F_a^2 - 1) / 12 (discrete uniform distribution); the remainder
 *     sigma_g^2 = max(0, sigma_t^2 - s_a^2 (F_a^2 - 1) / 12) is applied as a separable Gaussian on
 *     the small reduced grid (src/pyramid/gaussian.ts: Lindeberg's discrete Gaussian, whose
 *     variance is exact even below one voxel), sigma_g / (s_a F_a) in level voxels.
 *
 * Speed: the finest level's in-plane Gaussian is applied to each slice of the base grid while
 * the reduction produces it (the base grid IS the finest level's grid), and the coarser levels,
 * reduced from that base, subtract its variance from their own Gaussian. Only the z pass of
 * the finest level and the passes on the small coarse grids remain.
 *
 * Approximation: box followed by Gaussian is treated as one Gaussian of the summed variance.
 * Its shape differs from a true Gaussian (flatter top, sinc side lobes of the box), which
 * lets slightly more energy near the level's Nyquist frequency through than a pure Gaussian
 * would; for the registration metrics, which only need a smooth, alias-poor image at each step,
 * this is harmless, and it avoids smoothing the full-resolution CT (tens of millions of
 * voxels) with a wide kernel.
 *
 * Geometry: the level's index-to-world matrix is input.indexToWorld · [diag(F) | (F - 1)/2]
 * (src/pyramid/blocks.ts), exact: a world point keeps mapping to the same physical feature.
 * Output volumes hold Float32Array data.
 */
import { CoxaError } from "../common/errors.js";
import type { ProgressFn } from "../common/progress.js";
import { isShared, sharedArray } from "../common/shared-arrays.js";
import { Volume } from "../image/volume.js";
import {
  type BlockFactors,
  blockAffine,
  blockDims,
  blockMean,
  blockMeanTracking,
  finishTracking,
  type HighValues,
} from "./blocks.js";
import { gaussianSmooth, planeSmoother } from "./gaussian.js";
import { newControl, type PlaneSmoothing, runShare, sharedInts, type WorkSharer } from "./parallel.js";

/** Default pyramid steps in mm, coarse to fine (design.md `--levels 8,4,2`). */
export const DEFAULT_LEVELS_MM: readonly number[] = [8, 4, 2];

const FWHM_TO_VARIANCE = 1 / (8 * Math.LN2);

/**
 * Gaussian kernel radius for the pyramid: ceil(3 sigma) + 1 taps each side of Lindeberg's
 * discrete Gaussian (gaussian.ts), which has exactly the requested variance even for the
 * typical sigma of 0.3-0.5 level voxels (a sampled Gaussian would blur far less there).
 */
export const PYRAMID_TRUNCATE = 3;

/** One pyramid level. */
export interface PyramidLevel {
  /** The requested sampling step in mm. */
  stepMm: number;
  /** Smoothed, reduced image; its affine says exactly where each voxel centre is. */
  volume: Volume<Float32Array>;
  /** Block factors from the full-resolution grid to this level's grid. */
  factors: [number, number, number];
  /** Actual voxel spacing of the level in mm (input spacing times factors). */
  spacingMm: [number, number, number];
  /** Total smoothing per axis in mm (standard deviation of box plus Gaussian). */
  sigmaMm: [number, number, number];
  /**
   * Standard deviation of the Gaussian applied on the level grid, in level voxels (beyond the
   * in-plane smoothing already applied to the shared base grid, see buildPyramid).
   */
  gaussianSigmaVoxels: [number, number, number];
}

/** A pyramid: levels in the order of the requested steps, plus the shared base reduction. */
export interface Pyramid {
  levels: PyramidLevel[];
  /** Block factors of the base grid (the finest level's reduction of the input). */
  baseFactors: [number, number, number];
  /** With `trackAbove`: where the full-resolution voxels >= that value are (for the metal mask). */
  highValues?: HighValues;
}

/** Options of buildPyramid. */
export interface PyramidOptions {
  /** Sampling steps in mm, any order (the levels come back in this order); default 8, 4, 2. */
  levelsMm?: readonly number[];
  /** Progress of the "pyramid" stage. */
  onProgress?: ProgressFn;
  /**
   * Also record where the full-resolution voxels >= this value lie (e.g. the metal HU), in the
   * same pass that reads the volume; metalMask then skips its own full-resolution search.
   */
  trackAbove?: number;
  /**
   * A helper thread to share the base reduction and the finest level's k pass with (used when
   * the volume's data lives on a SharedArrayBuffer; the levels then do too).
   */
  sharer?: WorkSharer;
}

/**
 * Block factors and Gaussian sigma for one level on one axis.
 * @param spacingMm - input voxel spacing s (mm)
 * @param stepMm - requested level step h (mm)
 * @param baseFactor - b, the finest level's factor on this axis
 * @param size - number of input voxels on this axis (factors never exceed it)
 * @returns factor F, Gaussian sigma on the level grid (mm) and total sigma (mm)
 */
export function levelAxisPlan(
  spacingMm: number,
  stepMm: number,
  baseFactor: number,
  size: number,
): { factor: number; gaussianSigmaMm: number; totalSigmaMm: number } {
  const maxD = Math.max(1, Math.floor(size / baseFactor));
  const d = Math.min(maxD, Math.max(1, Math.floor(stepMm / (spacingMm * baseFactor) + 1e-6)));
  const factor = baseFactor * d;
  const { gaussianSigmaMm, totalSigmaMm } = axisSigma(spacingMm, stepMm, factor);
  return { factor, gaussianSigmaMm, totalSigmaMm };
}
/**
 * Block factors of every level (see the module header): the base factors and, per level and
 * axis, the level's plan.
 * @param dims - input grid size
 * @param spacing - input voxel spacing (mm)
 * @param levelsMm - level steps (mm)
 */
export function pyramidPlan(
  dims: readonly [number, number, number],
  spacing: readonly number[],
  levelsMm: readonly number[],
): { baseFactors: [number, number, number]; plans: ReturnType<typeof levelAxisPlan>[][] } {
  const hMin = Math.min(...levelsMm);
  const baseFactors: [number, number, number] = [0, 0, 0];
  for (let a = 0; a < 3; a++) {
    baseFactors[a] = Math.min(dims[a], Math.max(1, Math.floor(hMin / spacing[a] + 1e-6)));
  }
  const plans = levelsMm.map((h) =>
    [0, 1, 2].map((a) => levelAxisPlan(spacing[a], h, baseFactors[a], dims[a])),
  );
  return { baseFactors, plans };
}

/**
 * Build the multiresolution pyramid of `volume`.
 * @param volume - full-resolution image (any datatype; CT in HU, MR in its own unit)
 * @param options - levelsMm (steps in mm), onProgress
 * @returns levels in the order of `levelsMm`, each a Float32 volume with exact geometry
 * @throws CoxaError BAD_ARGUMENT when a step is not a positive finite number or the list is empty
 */
export function buildPyramid(volume: Volume, options: PyramidOptions = {}): Pyramid {
  const levelsMm = options.levelsMm ?? DEFAULT_LEVELS_MM;
  if (levelsMm.length === 0) throw new CoxaError("BAD_ARGUMENT", "the pyramid needs at least one level");
  for (const h of levelsMm) {
    if (!(h > 0) || !Number.isFinite(h)) {
      throw new CoxaError("BAD_ARGUMENT", `pyramid step ${h} mm is not a positive number`);
    }
  }
  const spacing = volume.spacingMm;
  const hMin = Math.min(...levelsMm);
  const { baseFactors, plans } = pyramidPlan(volume.dims, spacing, levelsMm);
  const baseDims = blockDims(volume.dims, baseFactors);
  const baseCount = baseDims[0] * baseDims[1] * baseDims[2];
  // The finest level's grid is the base grid (its factors are the base factors); its in-plane
  // Gaussian is applied to each base slice as the reduction finishes it (no extra pass), and
  // every level then needs that much less of its own Gaussian (variances add).
  const finest = plans[levelsMm.indexOf(hMin)];
  const track = options.trackAbove;
  const reduce =
    baseFactors[0] * baseFactors[1] * baseFactors[2] > 1 ||
    !(volume.data instanceof Float32Array) ||
    track !== undefined;
  const preSigmaMm = [0, 0, 0];
  let smoothing: PlaneSmoothing | undefined;
  if (reduce) {
    preSigmaMm[0] = finest[0].gaussianSigmaMm;
    preSigmaMm[1] = finest[1].gaussianSigmaMm;
    const sx = preSigmaMm[0] / (spacing[0] * baseFactors[0]);
    const sy = preSigmaMm[1] / (spacing[1] * baseFactors[1]);
    if (sx >= 1e-3 || sy >= 1e-3)
      smoothing = {
        nx: baseDims[0],
        ny: baseDims[1],
        sigmaX: sx,
        sigmaY: sy,
        truncate: PYRAMID_TRUNCATE,
        gauss: "discrete",
      };
  }
  const sharer = options.sharer && isShared(volume.data) ? options.sharer : undefined;
  const floats = (n: number) => (sharer ? (sharedArray("float32", n) as Float32Array) : new Float32Array(n));
  let highValues: HighValues | undefined;
  let baseData: Float32Array;
  if (!reduce) {
    baseData = volume.data as Float32Array;
  } else if (sharer) {
    // Both threads reduce output slices from one counter (src/pyramid/parallel.ts).
    baseData = floats(baseCount);
    const threshold = track ?? Number.POSITIVE_INFINITY;
    const helperPart = sharedInts(7);
    helperPart.set([0, volume.dims[0], volume.dims[1], volume.dims[2], -1, -1, -1]);
    const task = {
      kind: "block-mean" as const,
      control: newControl(),
      out: baseData,
      data: volume.data,
      dims: volume.dims,
      factors: baseFactors,
      threshold,
      smoothing,
      helperPart,
    };
    const wait = sharer.share(task);
    const own = runShare(task)!;
    wait();
    if (track !== undefined)
      highValues = finishTracking([own, helperPart], volume.data, volume.dims, baseFactors, track);
  } else {
    const hook = smoothing
      ? planeSmoother(
          smoothing.nx,
          smoothing.ny,
          smoothing.sigmaX,
          smoothing.sigmaY,
          PYRAMID_TRUNCATE,
          "discrete",
        )
      : undefined;
    baseData = new Float32Array(baseCount);
    if (track !== undefined)
      highValues = blockMeanTracking(baseData, volume.data, volume.dims, baseFactors, track, hook);
    else blockMean(baseData, volume.data, volume.dims, baseFactors, hook);
  }
  options.onProgress?.({ stage: "pyramid", fraction: 0.5 });
  const levels: PyramidLevel[] = [];
  for (let li = 0; li < levelsMm.length; li++) {
    const h = levelsMm[li];
    const factors: [number, number, number] = [1, 1, 1];
    const sigmaVox: [number, number, number] = [0, 0, 0];
    const sigmaMm: [number, number, number] = [0, 0, 0];
    for (let a = 0; a < 3; a++) {
      const plan = plans[li][a];
      factors[a] = plan.factor;
      const g2 = Math.max(0, plan.gaussianSigmaMm ** 2 - preSigmaMm[a] ** 2);
      sigmaVox[a] = Math.sqrt(g2) / (spacing[a] * plan.factor);
      const box = (spacing[a] * spacing[a] * (plan.factor * plan.factor - 1)) / 12;
      sigmaMm[a] = Math.sqrt(box + preSigmaMm[a] ** 2 + g2);
    }
    const rel: BlockFactors = [
      factors[0] / baseFactors[0],
      factors[1] / baseFactors[1],
      factors[2] / baseFactors[2],
    ];
    const dims = blockDims(baseDims, rel);
    const n = dims[0] * dims[1] * dims[2];
    let reduced: Float32Array;
    if (
      rel[0] * rel[1] * rel[2] === 1 &&
      sharer &&
      sigmaVox[0] < 1e-3 &&
      sigmaVox[1] < 1e-3 &&
      sigmaVox[2] >= 1e-3 &&
      dims[2] > 1
    ) {
      // The finest level: only its k pass is left (the in-plane one ran with the reduction);
      // shared by sheets of constant j.
      reduced = floats(n);
      const task = {
        kind: "smooth-k" as const,
        control: newControl(),
        out: reduced,
        data: baseData,
        dims,
        sigma: sigmaVox[2],
        truncate: PYRAMID_TRUNCATE,
        gauss: "discrete" as const,
      };
      const wait = sharer.share(task);
      runShare(task);
      wait();
    } else if (rel[0] * rel[1] * rel[2] === 1) {
      // Smoothed straight from the base grid into a new array (the base stays intact).
      reduced = gaussianSmooth(floats(n), baseData, dims, sigmaVox, PYRAMID_TRUNCATE, "discrete");
    } else {
      reduced = blockMean(floats(n), baseData, baseDims, rel);
      gaussianSmooth(reduced, reduced, dims, sigmaVox, PYRAMID_TRUNCATE, "discrete");
    }
    const affine = blockAffine(volume.indexToWorld, factors);
    levels.push({
      stepMm: h,
      volume: new Volume(dims, reduced, affine),
      factors,
      spacingMm: [spacing[0] * factors[0], spacing[1] * factors[1], spacing[2] * factors[2]],
      sigmaMm,
      gaussianSigmaVoxels: sigmaVox,
    });
    options.onProgress?.({ stage: "pyramid", fraction: 0.5 + (0.5 * (li + 1)) / levelsMm.length });
  }
  return highValues ? { levels, baseFactors, highValues } : { levels, baseFactors };
}

/** Gaussian remainder and total blur (mm) for a box of `factor` samples at `spacingMm`, target FWHM `stepMm`. */
function axisSigma(spacingMm: number, stepMm: number, factor: number) {
  const target = Math.max(0, (stepMm * stepMm - spacingMm * spacingMm) * FWHM_TO_VARIANCE);
  const box = (spacingMm * spacingMm * (factor * factor - 1)) / 12;
  const g = Math.max(0, target - box);
  return { gaussianSigmaMm: Math.sqrt(g), totalSigmaMm: Math.sqrt(box + g) };
}
