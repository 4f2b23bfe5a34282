/**
 * The level-by-level registration driver: pyramid, masks, start, coarse global search,
 * Powell per level, inverse-consistency check. Pure computation on volumes in memory; file
 * input and output live in align.ts.
 *
 * Conventions (design.md): the result maps FIXED world mm -> MOVING world mm. Parameters are
 * those of src/geometry/transform-model.ts about `centerMm` (the fixed body centroid), scaled
 * so that one unit of any parameter moves points at the body's RMS radius by about 1 mm.
 *
 * Sampling direction: a metric samples one image (its mask, restricted to the part that maps
 * into the other image's field of view under the current estimate, plus a margin) and
 * interpolates the other. Per level the driver samples the image whose restricted mask is
 * smaller in mm^3 — usually the fixed CT, but a small-field MR around one hip is sampled
 * itself, so that every sample can count. The cost is then evaluated through the inverse of
 * the fixed->moving matrix. The inverse-consistency check repeats the finest level sampling the
 * other image and reports the largest disagreement of the two answers over the implant region
 * (the metal's bounding box grown by 30 mm; the exact maximum, since |A x - B x| is convex).
 *
 * Model schedule: the search and the first level are rigid; the requested model (similarity,
 * affine) takes over from the second level (common practice, no source).
 */
import { CoxaError } from "../common/errors.js";
import type { ProgressFn } from "../common/progress.js";
import { toShared } from "../common/shared-arrays.js";
import type { LandmarkPairs } from "../geometry/landmarks.js";
import { identity, inverse, invertAffine, type Mat4, transformPoint } from "../geometry/mat4.js";
import {
  convertParameters,
  matrixToParameters,
  parameterScales,
  parametersToMatrix,
  type TransformModel,
} from "../geometry/transform-model.js";
import { detectModality, type Modality } from "../image/modality.js";
import type { Volume } from "../image/volume.js";
import { DEFAULT_BODY_HU } from "../masks/body.js";
import type { VoxelBox } from "../masks/components.js";
import { contentBox, cropVolume } from "../masks/crop.js";
import { type ImageMasks, prepareLevelMasks } from "../masks/level-masks.js";
import { createMetric, type Metric, type MetricKind } from "../metrics/metric.js";
import { robustRange } from "../metrics/sampler.js";
import { MetricSplitter } from "../metrics/split.js";
import { powell } from "../optimize/powell.js";
import { buildPyramid, type Pyramid, pyramidPlan } from "../pyramid/pyramid.js";
import { type InitialTransform, type InitMethod, initialTransform } from "./initialise.js";
import {
  boxCorners,
  maskBoundsWorld,
  maskInsideOther,
  maskMoments,
  maxDisplacementMm,
  positionSums,
  radiusFromSums,
} from "./regions.js";
import { scanTranslations } from "./search.js";

/** Registration options; defaults in REGISTER_DEFAULTS. */
export interface RegisterOptions {
  model?: TransformModel;
  metric?: MetricKind;
  /** Sampling step per level, coarse to fine (mm). */
  levelsMm?: readonly number[];
  /** Exclude CT metal and its margin from the metric (default true). */
  metalMask?: boolean;
  metalHu?: number;
  metalMarginMm?: number;
  /** Modality override; detected from intensities when absent. */
  fixedModality?: Modality;
  movingModality?: Modality;
  /** User masks (any nonzero voxel = use), on their images' own grids and worlds. */
  fixedMask?: Volume;
  fixedMaskName?: string;
  movingMask?: Volume;
  movingMaskName?: string;
  /** Start method (default centroid); ignored when `startMatrix` is given. */
  init?: InitMethod;
  /** Explicit start transform (fixed -> moving), e.g. a stress trial's perturbed pose. */
  startMatrix?: Mat4;
  /** Landmark pairs for `init: "landmarks"`. */
  landmarks?: LandmarkPairs;
  /** Coarse translation scan + refinement on the first level (default true). */
  globalSearch?: boolean;
  /** Samples per level (default by level: 4000 / 12000 / 30000 ...). */
  samplesPerLevel?: readonly number[];
  /** Histogram bins for mi / nmi. */
  bins?: number;
  /** Which image the level metrics sample (default auto: the one with less to sample). */
  sampleFrom?: "auto" | "fixed" | "moving" | "coarser";
  /**
   * Threads for metric evaluation: 2 or more shares large sample sets with a helper thread
   * (src/metrics/split.ts); default 1 (callers that run several registrations at once keep 1).
   */
  threads?: number;
  /** Exclude the estimated MR signal void when the other image shows metal (default true). */
  mrVoid?: boolean;
  /** Crop a CT to its content (voxels above the body threshold, plus a margin) first (default true). */
  cropToContent?: boolean;
  /** Repeat the finest level sampling the other image and compare (default true). */
  inverseConsistency?: boolean;
  seed?: number;
  onProgress?: ProgressFn;
  /**
   * Called with the forward answer (fixed -> moving) as soon as the levels are done, before the
   * inverse-consistency run, so that a caller can start work that needs only the answer (e.g.
   * resampling on worker threads) while the check runs. The matrix is the caller's to keep.
   */
  onForwardResult?: (fixedToMoving: Mat4) => void;
  /** Images already prepared with prepareImage (same options), e.g. while the other was read. */
  prepared?: { fixed?: PreparedImage; moving?: PreparedImage };
}

/** One image made ready for registration (prepareImage). */
export interface PreparedImage {
  /** The volume given. */
  source: Volume;
  modality: Modality | ReturnType<typeof detectModality>;
  /** What the registration works on (a CT cropped to its content, see workingVolume). */
  work: Volume;
  pyramid: Pyramid;
  masks: ImageMasks;
  /** Whether the masks exclude an MR signal void (built for another image that shows metal). */
  voidExcluded: boolean;
  seconds: { pyramid: number; masks: number };
}

export const REGISTER_DEFAULTS = {
  model: "rigid" as TransformModel,
  metric: "mi" as MetricKind,
  levelsMm: [8, 4, 2] as readonly number[],
  metalMask: true,
  metalHu: 2500,
  metalMarginMm: 5,
  init: "centroid" as InitMethod,
  globalSearch: true,
  bins: 32,
  inverseConsistency: true,
  cropToContent: true,
  mrVoid: true,
  sampleFrom: "auto" as "auto" | "fixed" | "moving" | "coarser",
  seed: 1,
  /** Samples by level index from the coarsest (common practice, no source; tuned on the phantom). */
  samples: [4000, 12000, 20000, 30000],
  /**
   * Powell's line-search and step tolerances in scaled units (1 unit moves points at the body's
   * RMS radius by about the level step / 2 mm, so 0.05 on the 2 mm level is ~0.05 mm).
   */
  lineToleranceMm: 0.05,
  stepToleranceMm: 0.03,
  /** Powell budget per level (evaluations). */
  maxEvaluationsPerLevel: 1500,
  /** Margin around the other image's box when restricting the sampled mask (mm). */
  roiMarginMm: 10,
  /** Translation scan: grid (mm), candidates kept, their separation (mm), samples. */
  scanGridMm: 16,
  scanKeep: 5,
  scanSeparationMm: 30,
  scanSamples: 1500,
  /** Screening of the scan: samples, share of grid points kept for the full score, least kept. */
  scanScreenSamples: 400,
  scanScreenKeep: 0.1,
  scanScreenMin: 60,
  /** Most samples a finest level may use after lever scaling (see buildMetric). */
  maxSamples: 80000,
  /** Samples of the inverse-consistency run (it starts at the forward answer). */
  inverseSamples: 15000,
  /** Implant region for inverse consistency: metal box grown by this (mm). */
  implantRegionMarginMm: 30,
};

/** What one pyramid level did. */
export interface LevelRecord {
  stepMm: number;
  model: TransformModel;
  /** Which image the metric sampled. */
  sampled: "fixed" | "moving";
  samples: number;
  evaluations: number;
  iterations: number;
  converged: boolean;
  reason: string;
  /** Similarity (MI nats, NMI, mean LNCC^2: higher is better) at the level's start and end. */
  startSimilarity: number;
  finalSimilarity: number;
  overlap: number;
  seconds: number;
  /** Of which choosing the sampled image and building the metric (sample set, ranges). */
  setupSeconds: number;
  /** Best similarity so far, after each evaluation (at most ~200 points). */
  trace: number[];
}

/** What the coarse search did. */
export interface SearchRecord {
  /** Grid points visited by the scan. */
  evaluated: number;
  /** Of those, scored by the full scan metric (the rest dropped out at screening). */
  scored: number;
  refined: number;
  /** Costs (lower better) of the refined candidates, best first. */
  refinedCosts: number[];
  /** Distance (mm, at the moving reference point) between the best and the start's refinement. */
  movedMm: number;
  /** The runner-up's cost gap to the best and its distance (mm), for ambiguity checks. */
  runnerUpGap: number | null;
  runnerUpDistanceMm: number | null;
  seconds: number;
}

/** Outcome of registerImages. */
export interface RegistrationResult {
  model: TransformModel;
  metric: MetricKind;
  /** Fixed world -> moving world. */
  matrix: Mat4;
  inverse: Mat4;
  parameters: Float64Array;
  centerMm: [number, number, number];
  init: InitialTransform;
  startMatrix: Mat4;
  levels: LevelRecord[];
  search: SearchRecord | null;
  /** Similarity on the finest level at the start and at the end (higher is better). */
  metricStart: number;
  metricFinal: number;
  /** Share of the finest-level samples that counted at the end. */
  overlapFraction: number;
  /** Largest disagreement (mm) between the forward answer and the one sampling the other image. */
  inverseConsistencyMm: number | null;
  /** The reverse answer (fixed -> moving) when computed. */
  reverseMatrix: Mat4 | null;
  /** World box of the implant region used for inverse consistency (null without metal). */
  implantBoxMm: { min: number[]; max: number[] } | null;
  fixedMasks: ImageMasks;
  movingMasks: ImageMasks;
  fixedPyramid: Pyramid;
  movingPyramid: Pyramid;
  /**
   * Voxel box (on the fixed image's own grid) of its voxels at or above the metal threshold,
   * when the metal mask was on (found during the pyramid pass); undefined when there are none.
   */
  fixedMetalBox: VoxelBox | undefined;
  /**
   * Seconds per stage; `prepared` is the pyramid and mask time of images prepared before the
   * call (prepareImage), not part of the others.
   */
  timings: {
    pyramid: number;
    masks: number;
    prepared: number;
    search: number;
    optimise: number;
    inverse: number;
  };
}

const seconds = (t0: number) => (performance.now() - t0) / 1000;

/** Volumes from this size on have their pyramid passes shared with the helper thread. */
const SHARE_PYRAMID_VOXELS = 8_000_000;
/** A CT from this size on is cropped to its content plus this margin (mm) before the pyramid. */
const CROP_MIN_VOXELS = 2_000_000;
const CROP_MARGIN_MM = 20;

/**
 * The volume the registration works on: a large CT cropped to the box of its voxels above the
 * body threshold plus CROP_MARGIN_MM (when that saves at least 10 %), else the volume itself;
 * on shared memory when a helper thread will share its passes.
 */
function workingVolume(
  v: Volume,
  modality: Modality,
  share: boolean,
  crop: boolean,
  levelsMm: readonly number[],
): Volume {
  if (crop && modality === "ct" && v.count >= CROP_MIN_VOXELS) {
    const box = contentBox(v, DEFAULT_BODY_HU, CROP_MARGIN_MM);
    if (box) {
      // The box starts on a multiple of every level's block factor and spans a multiple of
      // them (or reaches the far edge), so each level of the crop is a part of the same level
      // of the whole image: the same voxel centres and, inside the masks, the same values.
      const { plans } = pyramidPlan(v.dims, v.spacingMm, levelsMm);
      for (let a = 0; a < 3; a++) {
        const step = plans.reduce((l, p) => lcm(l, p[a].factor), 1);
        box.min[a] -= box.min[a] % step;
        const span = Math.ceil((box.max[a] - box.min[a]) / step) * step;
        box.max[a] = Math.min(v.dims[a], box.min[a] + span);
      }
      const kept = (box.max[0] - box.min[0]) * (box.max[1] - box.min[1]) * (box.max[2] - box.min[2]);
      if (kept < 0.9 * v.count) return cropVolume(v, box, share && kept >= SHARE_PYRAMID_VOXELS);
    }
  }
  return share && v.count >= SHARE_PYRAMID_VOXELS ? v.withData(toShared(v.data, v.datatype)) : v;
}

function lcm(a: number, b: number): number {
  let x = a;
  let y = b;
  while (y) [x, y] = [y, x % y];
  return (a / x) * b;
}

/**
 * Register `moving` to `fixed`.
 * @param fixed - fixed image (usually the CT), any datatype, world RAS mm
 * @param moving - moving image (usually the MR)
 * @param options - see RegisterOptions
 * @returns the fixed->moving transform and what each stage did
 * @throws CoxaError BAD_ARGUMENT for bad options, NO_OVERLAP when the images cannot overlap,
 *   BAD_MASK for an empty user mask
 */
export function registerImages(
  fixed: Volume,
  moving: Volume,
  options: RegisterOptions = {},
): RegistrationResult {
  const o = resolveRegisterOptions(options);
  const levelsMm = [...o.levelsMm];
  if (levelsMm.length === 0) throw new CoxaError("BAD_ARGUMENT", "at least one pyramid level is needed");
  const timings = { pyramid: 0, masks: 0, prepared: 0, search: 0, optimise: 0, inverse: 0 };
  const splitter = (options.threads ?? 1) > 1 ? new MetricSplitter() : undefined;
  try {
    return registerWith(fixed, moving, options, o, levelsMm, timings, splitter);
  } finally {
    void splitter?.close();
  }
}

function registerWith(
  fixed: Volume,
  moving: Volume,
  options: RegisterOptions,
  o: ResolvedOptions,
  levelsMm: number[],
  timings: RegistrationResult["timings"],
  splitter: MetricSplitter | undefined,
): RegistrationResult {
  const progress = options.onProgress;

  // Each image: modality, working volume, pyramid, masks — the CT-like image first: when it
  // shows metal, the MR's signal void is excluded too (either image may be the CT). An image
  // prepared before the call (prepareImage, e.g. while the other was still being read) is
  // used as it is, its masks rebuilt only when its void assumption turns out wrong.
  let t0 = performance.now();
  progress?.({ stage: "pyramid", fraction: 0 });
  const given = options.prepared ?? {};
  const modalityOf = (which: "fixed" | "moving") =>
    given[which]?.modality ??
    (which === "fixed" ? o.fixedModality : o.movingModality) ??
    detectModality((which === "fixed" ? fixed : moving).data);
  const fixedModality = modalityOf("fixed");
  const movingModality = modalityOf("moving");
  const modalities = { fixed: fixedModality, moving: movingModality };
  const movingFirst = modalityName(movingModality) === "ct" && modalityName(fixedModality) !== "ct";
  const order: ("fixed" | "moving")[] = movingFirst ? ["moving", "fixed"] : ["fixed", "moving"];
  const prepared: Partial<Record<"fixed" | "moving", PreparedImage>> = {};
  for (let n = 0; n < 2; n++) {
    const which = order[n];
    const otherHasMetal = n === 1 && hasMetal(prepared[order[0]]!.masks);
    const early = given[which];
    const source = which === "fixed" ? fixed : moving;
    if (early && early.source !== source)
      throw new CoxaError("BAD_ARGUMENT", `the prepared ${which} image is not the ${which} image given`);
    const wantVoid = excludesVoid(o, modalities[which], otherHasMetal);
    prepared[which] =
      early && early.voidExcluded === wantVoid
        ? early
        : early
          ? { ...early, masks: masksFor(early, which, o, otherHasMetal), voidExcluded: wantVoid }
          : prepareWith(source, which, o, levelsMm, otherHasMetal, splitter, modalities[which]);
    const own = prepared[which]!.seconds;
    if (!early) {
      timings.pyramid += own.pyramid;
      timings.masks += own.masks;
    } else timings.prepared += own.pyramid + own.masks;
  }
  const { pyramid: fPyr, masks: fMasks } = prepared.fixed!;
  const { pyramid: mPyr, masks: mMasks } = prepared.moving!;
  t0 = performance.now();
  const L = levelsMm.length;
  const finest = L - 1;
  for (const [name, masks] of [
    ["fixed", fMasks],
    ["moving", mMasks],
  ] as const) {
    if (masks.levels[finest].includeVoxels === 0) {
      throw new CoxaError("NO_OVERLAP", `the ${name} image has no voxels left to register after masking`);
    }
  }

  // Body moments on the coarsest level for the start and the parameter centre.
  const fLevel0 = fPyr.levels[0].volume;
  const mLevel0 = mPyr.levels[0].volume;
  const fBody0 = fMasks.levels[0].body ?? fMasks.levels[0].include;
  const mBody0 = mMasks.levels[0].body ?? mMasks.levels[0].include;
  const fMoments = maskMoments(fBody0, fLevel0);
  const mMoments = maskMoments(mBody0, mLevel0);
  const init = options.startMatrix
    ? {
        method: o.init,
        matrix: new Float64Array(options.startMatrix),
        note: "start transform given by the caller",
      }
    : initialTransform(o.init, {
        fixedBody: fMoments,
        movingBody: mMoments,
        landmarks: o.landmarks,
        model: o.model,
      });
  const startMatrix = new Float64Array(init.matrix);
  {
    // The fields of view must overlap at the start (a header start between unrelated scanner
    // coordinates does not): the coarse search looks around the start, not everywhere.
    const scratch = new Uint8Array(fBody0.length);
    if (maskInsideOther(scratch, fBody0, fLevel0, mLevel0, startMatrix, 0) === 0) {
      throw new CoxaError(
        "NO_OVERLAP",
        `the fields of view do not overlap at the start transform (init ${init.method}); try --init centroid`,
      );
    }
  }

  const centerMm: [number, number, number] = fMoments.count > 0 ? fMoments.centroidMm : fixed.centerWorld();
  const radiusMm = Math.max(20, fMoments.radiusMm || 80);
  const rigidScales = parameterScales("rigid", radiusMm);

  let model: TransformModel = "rigid";
  let params = matrixToParameters("rigid", init.matrix, centerMm);
  const work = new Float64Array(16);
  const workInv = new Float64Array(16);

  /** A cost over parameter vectors for a metric sampling `sampled`. */
  const makeObjective = (
    metric: Metric,
    sampled: "fixed" | "moving",
    mdl: TransformModel,
    trace?: number[],
    overlapWeighted = false,
  ) => {
    let best = Infinity;
    let count = 0;
    return (x: Float64Array) => {
      parametersToMatrix(work, mdl, x, centerMm);
      let c: number;
      if (sampled === "fixed") c = metric.evaluate(work);
      else {
        invertAffine(workInv, work);
        c = metric.evaluate(workInv);
      }
      if (overlapWeighted && c < 0) c *= metric.overlap;
      count++;
      if (c < best) best = c;
      if (trace && (count < 200 || count % 4 === 0)) trace.push(-best);
      return c;
    };
  };

  /** Robust intensity range of an image's whole mask on a level, computed once. */
  const ranges = new Map<string, [number, number]>();
  const rangeOf = (level: number, image: "fixed" | "moving"): [number, number] | undefined => {
    if (o.metric === "lncc") return undefined;
    const key = `${level}:${image}`;
    let r = ranges.get(key);
    if (!r) {
      const pyr = image === "fixed" ? fPyr : mPyr;
      const masks = image === "fixed" ? fMasks : mMasks;
      const lm = masks.levels[level];
      r = robustRange(pyr.levels[level].volume.data, lm.include, undefined, undefined, lm.includeVoxels);
      ranges.set(key, r);
    }
    return r;
  };

  /**
   * The metric of a level sampling `sampled` inside the part of its mask the other image sees.
   * With `leverScaled`, the sample count grows with (body radius / region radius)^2, at most
   * `maxSamples`: the rotation precision of a small region (an MR around one hip) falls with its
   * radius while the error it causes at distant points grows with theirs.
   */
  const buildMetric = (
    level: number,
    sampled: "fixed" | "moving",
    current: Mat4,
    samples: number,
    seed: number,
    leverScaled = false,
    givenRoi?: { roi: Uint8Array; count: number; radiusMm: number },
  ) => {
    const fV = fPyr.levels[level].volume;
    const mV = mPyr.levels[level].volume;
    const fInc = fMasks.levels[level].include;
    const mInc = mMasks.levels[level].include;
    const [sV, oV, sInc, oInc, toOther] =
      sampled === "fixed" ? [fV, mV, fInc, mInc, current] : [mV, fV, mInc, fInc, inverse(current)];
    let roi = givenRoi?.roi;
    let roiCount = givenRoi?.count ?? 0;
    let roiRadiusMm = givenRoi?.radiusMm ?? 0;
    if (!roi) {
      roi = new Uint8Array(sInc.length);
      const sums = positionSums();
      roiCount = maskInsideOther(roi, sInc, sV, oV, toOther, o.roiMarginMm, sums);
      if (roiCount === 0)
        throw new CoxaError("NO_OVERLAP", "the images do not overlap at the start transform");
      roiRadiusMm = radiusFromSums(sums);
    }
    let count = samples;
    if (leverScaled) {
      const ratio = radiusMm / Math.max(1, roiRadiusMm);
      count = Math.round(Math.min(o.maxSamples, samples * Math.max(1, ratio * ratio)));
    }
    return createMetric(o.metric, {
      fixed: sV,
      moving: oV,
      fixedMask: roi,
      fixedMaskCount: roiCount,
      movingMask: oInc,
      samples: count,
      seed,
      bins: o.bins,
      splitter,
      // The sampled image's range comes from its own region (computed by createMetric); the
      // other image's from its whole mask, the same on every call of a level.
      movingRange: rangeOf(level, sampled === "fixed" ? "moving" : "fixed"),
    });
  };

  /** Which image to sample on a level: the one whose mask inside the other's view is smaller. */
  const chooseSampled = (
    level: number,
    current: Mat4,
  ): { sampled: "fixed" | "moving"; roi: { roi: Uint8Array; count: number; radiusMm: number } } => {
    const fV = fPyr.levels[level].volume;
    const mV = mPyr.levels[level].volume;
    const fInc = fMasks.levels[level].include;
    const mInc = mMasks.levels[level].include;
    const roiF = new Uint8Array(fInc.length);
    const roiM = new Uint8Array(mInc.length);
    const sumsF = positionSums();
    const sumsM = positionSums();
    const nf = maskInsideOther(roiF, fInc, fV, mV, current, o.roiMarginMm, sumsF);
    const nm = maskInsideOther(roiM, mInc, mV, fV, inverse(current), o.roiMarginMm, sumsM);
    if (nf === 0 || nm === 0)
      throw new CoxaError("NO_OVERLAP", "the images do not overlap at the current transform");
    let sampled: "fixed" | "moving";
    if (o.sampleFrom === "fixed" || o.sampleFrom === "moving") sampled = o.sampleFrom;
    else if (o.sampleFrom === "coarser") sampled = voxelVolume(mV) > voxelVolume(fV) ? "moving" : "fixed";
    else sampled = nm * voxelVolume(mV) < 0.7 * nf * voxelVolume(fV) ? "moving" : "fixed";
    return sampled === "fixed"
      ? { sampled, roi: { roi: roiF, count: nf, radiusMm: radiusFromSums(sumsF) } }
      : { sampled, roi: { roi: roiM, count: nm, radiusMm: radiusFromSums(sumsM) } };
  };

  const current = identity();
  parametersToMatrix(current, "rigid", params, centerMm);

  // --- Coarse global search on level 0 ---
  let search: SearchRecord | null = null;
  if (o.globalSearch) {
    t0 = performance.now();
    progress?.({ stage: `search (${levelsMm[0]} mm)`, fraction: 0, level: 0 });
    const sampled = mMoments.volumeMm3 < 0.7 * fMoments.volumeMm3 ? "moving" : "fixed";
    /** A level-0 metric over the whole masks (no field-of-view restriction yet), sampling `sampled`. */
    const levelZeroMetric = (samples: number, seed: number) => {
      const [sV, oV, sImg, oImg] =
        sampled === "fixed"
          ? ([fLevel0, mLevel0, fMasks, mMasks] as const)
          : ([mLevel0, fLevel0, mMasks, fMasks] as const);
      return createMetric(o.metric, {
        fixed: sV,
        moving: oV,
        fixedMask: sImg.levels[0].include,
        fixedMaskCount: sImg.levels[0].includeVoxels,
        movingMask: oImg.levels[0].include,
        samples,
        seed,
        bins: o.bins,
        splitter,
        fixedRange: rangeOf(0, sampled),
        movingRange: rangeOf(0, sampled === "fixed" ? "moving" : "fixed"),
      });
    };
    const scanInv = new Float64Array(16);
    /** Overlap-weighted cost of a metric sampling `sampled`, for the scan. */
    const scanCost = (metric: Metric) => (m: Mat4) =>
      (sampled === "fixed" ? metric.evaluate(m) : metric.evaluate(invertAffine(scanInv, m))) * metric.overlap;
    const scan = scanTranslations({
      start: current,
      cost: scanCost(levelZeroMetric(o.scanSamples, o.seed)),
      screen:
        o.scanScreenSamples > 0 ? scanCost(levelZeroMetric(o.scanScreenSamples, o.seed + 7)) : undefined,
      screenKeep: o.scanScreenKeep,
      screenMin: o.scanScreenMin,
      fixedBody: fBody0,
      fixedGrid: fLevel0,
      movingPointMm: mMoments.centroidMm,
      gridMm: Math.max(o.scanGridMm, 2 * levelsMm[0]),
      keep: o.scanKeep,
      separationMm: o.scanSeparationMm,
      seed: o.seed,
    });
    // Refine each candidate with Powell on level 0 (a richer sample set, the same for all).
    const refineMetric = levelZeroMetric(o.samples[0], o.seed + 101);
    // The search compares places with different overlaps: similarity weighted by the share of
    // samples that count, so that a small, accidentally similar overlap cannot win.
    const objective = makeObjective(refineMetric, sampled, "rigid", undefined, true);
    const refined: { x: Float64Array; value: number; isStart: boolean }[] = [];
    for (let c = 0; c < scan.candidates.length; c++) {
      const cand = scan.candidates[c];
      const x0 = matrixToParameters("rigid", cand.matrix, centerMm);
      const r = powell(objective, x0, {
        scales: scaleBy(rigidScales, levelsMm[0]),
        maxEvaluations: 400,
        lineTolerance: 0.05,
        tolerances: { x: 0.05, fRelative: 1e-5 },
      });
      refined.push({ x: r.x, value: r.value, isStart: cand.isStart });
      progress?.({
        stage: `search (${levelsMm[0]} mm)`,
        fraction: (c + 1) / scan.candidates.length,
        level: 0,
      });
    }
    refined.sort((a, b) => a.value - b.value);
    const best = refined[0];
    const startRef = refined.find((r) => r.isStart)!;
    const bestM = parametersToMatrix(new Float64Array(16), "rigid", best.x, centerMm);
    const startM = parametersToMatrix(new Float64Array(16), "rigid", startRef.x, centerMm);
    const q = mMoments.centroidMm;
    const pBest = invertPoint(bestM, q);
    const pStart = invertPoint(startM, q);
    let runnerUpGap: number | null = null;
    let runnerUpDistanceMm: number | null = null;
    if (refined.length > 1) {
      const second = refined[1];
      const secondM = parametersToMatrix(new Float64Array(16), "rigid", second.x, centerMm);
      runnerUpGap = second.value - best.value;
      const p2 = invertPoint(secondM, q);
      runnerUpDistanceMm = Math.hypot(p2[0] - pBest[0], p2[1] - pBest[1], p2[2] - pBest[2]);
    }
    params = best.x;
    parametersToMatrix(current, "rigid", params, centerMm);
    search = {
      evaluated: scan.evaluated,
      scored: scan.scored,
      refined: refined.length,
      refinedCosts: refined.map((r) => r.value),
      movedMm: Math.hypot(pBest[0] - pStart[0], pBest[1] - pStart[1], pBest[2] - pStart[2]),
      runnerUpGap,
      runnerUpDistanceMm,
      seconds: seconds(t0),
    };
    timings.search = search.seconds;
  }

  // --- Level by level ---
  t0 = performance.now();
  const levels: LevelRecord[] = [];
  let finestMetric: Metric | undefined;
  let finestSampled: "fixed" | "moving" = "fixed";
  for (let l = 0; l < L; l++) {
    const tl = performance.now();
    const levelModel: TransformModel = l === 0 ? "rigid" : o.model;
    if (levelModel !== model) {
      params = convertParameters(model, params, levelModel, centerMm);
      model = levelModel;
    }
    const { sampled, roi } = chooseSampled(l, current);
    const samples = o.samples[Math.min(l, o.samples.length - 1)];
    const metric = buildMetric(l, sampled, current, samples, o.seed + 17 * (l + 1), l === finest, roi);
    const setupSeconds = seconds(tl);
    const trace: number[] = [];
    const objective = makeObjective(metric, sampled, model, trace);
    const startValue = objective(params);
    const stageName = `level ${l + 1}/${L} (${levelsMm[l]} mm)`;
    const budget = o.maxEvaluationsPerLevel * (model === "affine" ? 2 : 1);
    const r = powell(objective, params, {
      scales: scaleBy(parameterScales(model, radiusMm), levelsMm[l] / 2),
      maxEvaluations: budget,
      lineTolerance: o.lineToleranceMm,
      tolerances: { x: o.stepToleranceMm, fRelative: 1e-6 },
      onIteration: (info) => {
        progress?.({
          stage: stageName,
          fraction: Math.min(0.99, info.evaluations / budget),
          level: l,
          iteration: info.evaluations,
          metric: -info.bestValue,
        });
      },
    });
    params = r.x;
    parametersToMatrix(current, model, params, centerMm);
    // Re-evaluate at the answer so that `overlap` belongs to it.
    const finalValue = objective(params);
    levels.push({
      stepMm: levelsMm[l],
      model,
      sampled,
      samples: metric.sampleCount,
      evaluations: r.evaluations,
      iterations: r.iterations,
      converged: r.converged,
      reason: r.reason,
      startSimilarity: -startValue,
      finalSimilarity: -finalValue,
      overlap: metric.overlap,
      seconds: seconds(tl),
      setupSeconds,
      trace: thin(trace, 200),
    });
    progress?.({ stage: stageName, fraction: 1, level: l, metric: -finalValue });
    if (l === finest) {
      finestMetric = metric;
      finestSampled = sampled;
    }
  }
  timings.optimise = seconds(t0);

  // Similarity at the start, measured with the finest metric.
  const finalMatrix = new Float64Array(current);
  options.onForwardResult?.(new Float64Array(finalMatrix));
  const metricAt = (m: Mat4) =>
    -(finestSampled === "fixed" ? finestMetric!.evaluate(m) : finestMetric!.evaluate(inverse(m)));
  const metricStart = metricAt(startMatrix);
  const metricFinal = metricAt(finalMatrix);
  const overlapFraction = finestMetric!.overlap;

  // --- Inverse consistency: the finest level again, sampling the other image ---
  let inverseConsistencyMm: number | null = null;
  let reverseMatrix: Mat4 | null = null;
  const metalLevel = fMasks.levels[finest].excluded ?? mMasks.levels[finest].excluded;
  const metalGrid = fMasks.levels[finest].excluded ? fPyr.levels[finest].volume : mPyr.levels[finest].volume;
  let implantBoxMm: { min: number[]; max: number[] } | null = null;
  if (metalLevel) {
    const box = maskBoundsWorld(metalLevel, metalGrid);
    if (box) {
      if (metalGrid === fPyr.levels[finest].volume) implantBoxMm = box;
      else {
        // Metal found in the moving image: carry its box corners into fixed space.
        const inv = inverse(finalMatrix);
        const corners = boxCorners(box).map((p) => transformPointArr(inv, p));
        implantBoxMm = {
          min: [0, 1, 2].map((a) => Math.min(...corners.map((c) => c[a]))),
          max: [0, 1, 2].map((a) => Math.max(...corners.map((c) => c[a]))),
        };
      }
    }
  }
  if (o.inverseConsistency) {
    t0 = performance.now();
    const other = finestSampled === "fixed" ? "moving" : "fixed";
    const stageName = "inverse consistency";
    progress?.({ stage: stageName, fraction: 0 });
    let metric: Metric | undefined;
    try {
      metric = buildMetric(finest, other, current, o.inverseSamples, o.seed + 991, true);
    } catch (err) {
      if (!(err instanceof CoxaError && err.code === "NO_OVERLAP")) throw err;
    }
    if (metric) {
      const objective = makeObjective(metric, other, model);
      const budget = o.maxEvaluationsPerLevel;
      // Steps a quarter of the level's (it starts at the forward answer); the tolerances are
      // scaled to match, so that they mean the same distances in mm as on the level.
      const stepShare = 1 / 4;
      const r = powell(objective, params, {
        scales: scaleBy(parameterScales(model, radiusMm), (levelsMm[finest] / 2) * stepShare),
        maxEvaluations: budget,
        lineTolerance: o.lineToleranceMm / stepShare,
        tolerances: { x: o.stepToleranceMm / stepShare, fRelative: 1e-6 },
        onIteration: (info) =>
          progress?.({ stage: stageName, fraction: Math.min(0.99, info.evaluations / budget) }),
      });
      reverseMatrix = parametersToMatrix(new Float64Array(16), model, r.x, centerMm);
      const region = implantBoxMm
        ? boxCorners(implantBoxMm, o.implantRegionMarginMm)
        : boxCorners(
            fMasks.levels[finest].body
              ? maskBoundsWorld(fMasks.levels[finest].include, fPyr.levels[finest].volume)!
              : fixed.boundsWorld(false),
          );
      inverseConsistencyMm = maxDisplacementMm(finalMatrix, reverseMatrix, region);
    }
    timings.inverse = seconds(t0);
    progress?.({ stage: stageName, fraction: 1 });
  }

  return {
    model: o.model,
    metric: o.metric,
    matrix: finalMatrix,
    inverse: inverse(finalMatrix),
    parameters: model === o.model ? params : convertParameters(model, params, o.model, centerMm),
    centerMm,
    init,
    startMatrix,
    levels,
    search,
    metricStart,
    metricFinal,
    overlapFraction,
    inverseConsistencyMm,
    reverseMatrix,
    implantBoxMm,
    fixedMasks: fMasks,
    movingMasks: mMasks,
    fixedPyramid: fPyr,
    fixedMetalBox: onSourceGrid(fPyr.highValues?.bounds, prepared.fixed!.work, fixed),
    movingPyramid: mPyr,
    timings,
  };
}

/**
 * Prepare one image for registerImages ahead of time (its pyramid and masks), e.g. while the
 * other image is still being read. The masks of an MR assume that the other image shows metal
 * (signal void excluded); registerImages rebuilds them if it does not.
 * @param volume - the image, as it will be passed to registerImages
 * @param which - its role
 * @param options - the options registerImages will get (threads are not used here)
 */
export function prepareImage(
  volume: Volume,
  which: "fixed" | "moving",
  options: RegisterOptions = {},
): PreparedImage {
  const o = resolveRegisterOptions(options);
  return prepareWith(volume, which, o, [...o.levelsMm], true, undefined, undefined);
}

function prepareWith(
  volume: Volume,
  which: "fixed" | "moving",
  o: ResolvedOptions,
  levelsMm: readonly number[],
  otherHasMetal: boolean,
  splitter: MetricSplitter | undefined,
  modality: PreparedImage["modality"] | undefined,
): PreparedImage {
  if (levelsMm.length === 0) throw new CoxaError("BAD_ARGUMENT", "at least one pyramid level is needed");
  let t0 = performance.now();
  const mod =
    modality ?? (which === "fixed" ? o.fixedModality : o.movingModality) ?? detectModality(volume.data);
  const work = workingVolume(volume, modalityName(mod), splitter !== undefined, o.cropToContent, levelsMm);
  // Track voxels above the metal threshold during the pyramid's full-resolution pass, so the
  // metal mask needs no second pass over a large CT.
  const pyramid = buildPyramid(work, {
    levelsMm,
    trackAbove: o.metalMask ? o.metalHu : undefined,
    sharer: splitter,
  });
  const pyramidSeconds = seconds(t0);
  t0 = performance.now();
  const image = {
    source: volume,
    modality: mod,
    work,
    pyramid,
    voidExcluded: excludesVoid(o, mod, otherHasMetal),
  };
  const masks = masksFor(image, which, o, otherHasMetal);
  return { ...image, masks, seconds: { pyramid: pyramidSeconds, masks: seconds(t0) } };
}

/** The level masks of a prepared image (see prepareLevelMasks). */
function masksFor(
  image: Pick<PreparedImage, "modality" | "work" | "pyramid">,
  which: "fixed" | "moving",
  o: ResolvedOptions,
  otherHasMetal: boolean,
): ImageMasks {
  const isFixed = which === "fixed";
  const given = isFixed ? o.fixedModality : o.movingModality;
  const detected = image.modality;
  return prepareLevelMasks(image.work, image.pyramid, {
    modality: typeof detected === "string" ? detected : detected.modality,
    modalityReason: given ? undefined : typeof detected === "string" ? undefined : detected.reason,
    metalMask: o.metalMask,
    metalHu: o.metalHu,
    metalMarginMm: o.metalMarginMm,
    userMask: isFixed ? o.fixedMask : o.movingMask,
    userMaskName: isFixed ? o.fixedMaskName : o.movingMaskName,
    mrVoid: o.mrVoid && otherHasMetal,
  });
}

/** A voxel box of the working volume (a crop of `source`) on the source's own grid. */
function onSourceGrid(box: VoxelBox | undefined, work: Volume, source: Volume): VoxelBox | undefined {
  if (!box) return undefined;
  const p = [0, 0, 0];
  work.indexToWorldPoint(p, 0, 0, 0);
  const q = [0, 0, 0];
  transformPoint(q, source.worldToIndex, p[0], p[1], p[2]);
  const off = q.map((v) => Math.round(v));
  return {
    min: [box.min[0] + off[0], box.min[1] + off[1], box.min[2] + off[2]],
    max: [box.max[0] + off[0], box.max[1] + off[1], box.max[2] + off[2]],
  };
}

/** Whether an image's masks exclude an MR signal void (prepareLevelMasks' rule). */
function excludesVoid(
  o: ResolvedOptions,
  modality: PreparedImage["modality"],
  otherHasMetal: boolean,
): boolean {
  return o.metalMask && o.mrVoid && otherHasMetal && modalityName(modality) === "mr";
}

function hasMetal(m: ImageMasks): boolean {
  return (m.metal?.metalVoxels ?? 0) > 0;
}

type ResolvedOptions = ReturnType<typeof resolveRegisterOptions>;

/** The modality name of a detection or an override. */
function modalityName(m: Modality | ReturnType<typeof detectModality>): Modality {
  return typeof m === "string" ? m : m.modality;
}

/** Options with the defaults of REGISTER_DEFAULTS filled in. */
function resolveRegisterOptions(options: RegisterOptions) {
  const o = { ...REGISTER_DEFAULTS, ...stripUndefined(options) };
  if (options.samplesPerLevel) o.samples = [...options.samplesPerLevel];
  return o;
}

function stripUndefined<T extends object>(o: T): Partial<T> {
  const out: Partial<T> = {};
  for (const [k, v] of Object.entries(o)) if (v !== undefined) (out as Record<string, unknown>)[k] = v;
  return out;
}

function scaleBy(scales: Float64Array, factor: number): Float64Array {
  const out = new Float64Array(scales.length);
  for (let i = 0; i < scales.length; i++) out[i] = scales[i] * factor;
  return out;
}

function voxelVolume(v: Volume): number {
  const s = v.spacingMm;
  return s[0] * s[1] * s[2];
}

function invertPoint(m: Mat4, p: readonly number[]): [number, number, number] {
  return transformPointArr(inverse(m), p);
}

function transformPointArr(m: Mat4, p: readonly number[]): [number, number, number] {
  return [
    m[0] * p[0] + m[1] * p[1] + m[2] * p[2] + m[3],
    m[4] * p[0] + m[5] * p[1] + m[6] * p[2] + m[7],
    m[8] * p[0] + m[9] * p[1] + m[10] * p[2] + m[11],
  ];
}

function thin(values: number[], max: number): number[] {
  if (values.length <= max) return values;
  const out: number[] = [];
  for (let i = 0; i < max; i++) out.push(values[Math.round((i * (values.length - 1)) / (max - 1))]);
  return out;
}
