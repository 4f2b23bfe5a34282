/**
 * `coxa align` as a library call: read and validate the pair, register, resample the moving
 * image onto the fixed grid, measure (landmarks, labels, inverse consistency), judge, and write
 * transform.json, moving-on-fixed.nii.gz, summary.json and report.html into the output folder.
 *
 * Order matters for safety: every input is read and checked before anything is written, so bad
 * input leaves the output folder untouched; each output is written to a temporary name and
 * renamed (src/common/atomic.ts), so an interrupted run never leaves a half-written file under
 * a final name; no output may replace an input file.
 */
import { existsSync, mkdirSync, statSync } from "node:fs";
import { join, resolve } from "node:path";
import { refuseOverwritingInputs, writeJsonAtomic } from "../common/atomic.js";
import { CoxaError } from "../common/errors.js";
import { sha256File } from "../common/hash.js";
import type { ProgressFn } from "../common/progress.js";
import { softwareInfo } from "../common/version.js";
import { threadsFor } from "../common/workers.js";
import { evaluateLandmarks, landmarkEvaluationToJson } from "../geometry/landmark-evaluation.js";
import { type LandmarkPairs, pairLandmarks, readLandmarks } from "../geometry/landmarks.js";
import { inverse, type Mat4, toRows, transformPoint } from "../geometry/mat4.js";
import { buildTransformRecord, imageRef, writeTransform } from "../geometry/transform-file.js";
import { describeParameters, type TransformModel } from "../geometry/transform-model.js";
import { DATATYPES } from "../image/datatypes.js";
import type { Modality } from "../image/modality.js";
import { type NiftiImage, type NiftiImageRead, readNifti } from "../image/nifti-read.js";
import { writeNiftiAsync } from "../image/nifti-write.js";
import { readVolume3d } from "../image/read-volume.js";
import type { Volume } from "../image/volume.js";
import { readUserMask } from "../masks/user-mask.js";
import type { MetricKind } from "../metrics/metric.js";
import { writeAlignReport } from "../report/align-report.js";
import { createResamplePool, resampleOnto } from "../resample/resample.js";
import {
  type PreparedImage,
  prepareImage,
  REGISTER_DEFAULTS,
  type RegisterOptions,
  type RegistrationResult,
  registerImages,
} from "./driver.js";
import type { InitMethod } from "./initialise.js";
import { propagateAndDice, readLabelNames } from "./labels.js";
import { DEFAULT_THRESHOLDS, judgeRegistration, type QualityThresholds, type Verdict } from "./quality.js";

/** Options of alignPair (the same names as the CLI flags, camelCase). */
export interface AlignOptions {
  fixed: string;
  moving: string;
  out: string;
  model?: TransformModel;
  metric?: MetricKind;
  levelsMm?: readonly number[];
  metalHu?: number;
  metalMarginMm?: number;
  /** false = `--no-metal-mask`. */
  metalMask?: boolean;
  fixedModality?: Modality;
  movingModality?: Modality;
  fixedMask?: string;
  movingMask?: string;
  fixedLandmarks?: string;
  movingLandmarks?: string;
  /** Landmark files hold LPS coordinates (x and y flipped on input). */
  lps?: boolean;
  fixedLabels?: string;
  movingLabels?: string;
  init?: InitMethod;
  seed?: number;
  /**
   * Threads for the metric helper and the resampling (default: all cores for an image of
   * PARALLEL_MIN_VOXELS or more, else 1; see threadsFor).
   */
  threads?: number;
  /** Quality-gate thresholds (defaults in quality.ts). */
  thresholds?: Partial<QualityThresholds>;
  /** Skip the HTML report (batch runs that only need numbers); default false. */
  noReport?: boolean;
  onProgress?: ProgressFn;
}

/** What alignPair returns. */
export interface AlignResult {
  summary: AlignSummary;
  /** 0 for pass/review, 3 for fail (design.md). */
  exitCode: 0 | 3;
  files: { transform: string; movingOnFixed: string; summary: string; report: string };
  registration: RegistrationResult;
}

/** summary.json (design.md keys plus more). */
export interface AlignSummary {
  format: "coxa.summary";
  version: 1;
  verdict: Verdict;
  reasons: string[];
  gates: { name: string; verdict: Verdict; reason: string }[];
  fixed: ImageSummary;
  moving: ImageSummary;
  /** Which input looked like CT ("fixed", "moving", "both", "neither") and why. */
  ct_image: "fixed" | "moving" | "both" | "neither";
  model: TransformModel;
  metric: { name: MetricKind; start: number; final: number; higher_is_better: true };
  overlap_fraction: number;
  inverse_consistency_mm: number | null;
  init: { method: string; note: string };
  search: RegistrationResult["search"];
  levels: {
    step_mm: number;
    model: TransformModel;
    sampled: "fixed" | "moving";
    samples: number;
    evaluations: number;
    converged: boolean;
    start: number;
    final: number;
    overlap: number;
    seconds: number;
  }[];
  transform: { matrix: number[][]; parameters: ReturnType<typeof describeParameters> };
  masks: { fixed: MaskSummary; moving: MaskSummary };
  landmarks?: ReturnType<typeof landmarkEvaluationToJson>;
  labels?: {
    dice: Record<string, number>;
    mean_dice: number;
    per_label: {
      label: number;
      name: string | null;
      dice: number;
      fixed_voxels: number;
      moving_voxels: number;
    }[];
  };
  thresholds: QualityThresholds;
  timing_s: Record<string, number>;
  outputs: { transform: string; moving_on_fixed: string; summary: string; report: string | null };
  seed: number;
  software: { name: string; version: string };
  note: string;
}

interface ImageSummary {
  path: string;
  sha256: string;
  shape: number[];
  spacing_mm: number[];
  orientation: string;
  datatype: string;
  modality: Modality;
  modality_reason: string;
}

interface MaskSummary {
  metal_excluded: boolean;
  metal_voxels: number | null;
  metal_volume_mm3: number | null;
  user_mask: string | null;
}

const CARE_NOTE =
  "Research software, not a medical device: results must be reviewed by a qualified person; clinical use follows local regulations and licensed practice.";

/**
 * Align `moving` to `fixed` and write the outputs.
 * @throws CoxaError for bad input (exit 2), before anything is written
 */
export async function alignPair(options: AlignOptions): Promise<AlignResult> {
  const tStart = performance.now();
  const timing: Record<string, number> = {};
  const progress = options.onProgress;

  // ---- Read and validate everything first ----
  let t0 = performance.now();
  progress?.({ stage: "read", fraction: 0 });
  const fixedRead = readVolume3d(options.fixed);
  const movingRead = readVolume3d(options.moving);
  const shaRead = Promise.all([sha256File(options.fixed), sha256File(options.moving)]);
  // Rejections are awaited below; these handlers only keep a failure that arrives while the
  // main thread is busy from counting as unhandled.
  for (const p of [fixedRead, movingRead, shaRead]) p.catch(() => undefined);
  const fixedMask = options.fixedMask ? readUserMask(options.fixedMask) : undefined;
  const movingMask = options.movingMask ? readUserMask(options.movingMask) : undefined;
  const seed = options.seed ?? REGISTER_DEFAULTS.seed;
  const regOptions: RegisterOptions = {
    model: options.model,
    metric: options.metric,
    levelsMm: options.levelsMm,
    metalMask: options.metalMask,
    metalHu: options.metalHu,
    metalMarginMm: options.metalMarginMm,
    fixedModality: options.fixedModality,
    movingModality: options.movingModality,
    fixedMask,
    fixedMaskName: options.fixedMask,
    movingMask,
    movingMaskName: options.movingMask,
    init: options.init,
    seed,
    onProgress: progress,
  };
  // The image read first is prepared (pyramid, masks) while the other is still inflating.
  const prepared = await prepareWhileReading(fixedRead, movingRead, regOptions);
  const [fixedImage, movingImage] = await Promise.all([fixedRead, movingRead]);
  const readyAtMs = Math.max(fixedImage.readyAtMs, movingImage.readyAtMs);
  let pairs: LandmarkPairs | undefined;
  if (options.fixedLandmarks || options.movingLandmarks) {
    if (!options.fixedLandmarks || !options.movingLandmarks) {
      throw new CoxaError("BAD_ARGUMENT", "landmarks need both --fixed-landmarks and --moving-landmarks");
    }
    pairs = pairLandmarks(
      readLandmarks(options.fixedLandmarks, { lps: options.lps }),
      readLandmarks(options.movingLandmarks, { lps: options.lps }),
      options.fixedLandmarks,
      options.movingLandmarks,
    );
  }
  let fixedLabels: Volume | undefined;
  let movingLabels: Volume | undefined;
  if (options.fixedLabels || options.movingLabels) {
    if (!options.fixedLabels || !options.movingLabels) {
      throw new CoxaError("BAD_ARGUMENT", "label overlap needs both --fixed-labels and --moving-labels");
    }
    fixedLabels = readLabels(options.fixedLabels);
    movingLabels = readLabels(options.movingLabels);
  }
  if (options.init === "landmarks" && !pairs) {
    throw new CoxaError("BAD_ARGUMENT", "--init landmarks needs --fixed-landmarks and --moving-landmarks");
  }
  const outDir = resolve(options.out);
  const files = {
    transform: join(outDir, "transform.json"),
    movingOnFixed: join(outDir, "moving-on-fixed.nii.gz"),
    summary: join(outDir, "summary.json"),
    report: join(outDir, "report.html"),
  };
  refuseOverwritingInputs(
    [
      options.fixed,
      options.moving,
      options.fixedMask,
      options.movingMask,
      options.fixedLandmarks,
      options.movingLandmarks,
      options.fixedLabels,
      options.movingLabels,
    ],
    Object.values(files),
  );
  if (existsSync(outDir) && !statSync(outDir).isDirectory()) {
    throw new CoxaError("BAD_ARGUMENT", "output path exists and is not a folder", options.out);
  }
  const [fixedSha, movingSha] = await shaRead;
  timing.read = seconds(t0);
  const fixed = fixedImage.volume;
  const moving = movingImage.volume;
  regOptions.threads = options.threads ?? threadsFor(Math.max(fixed.count, moving.count));
  // Start the resampling threads now; they are ready when registration ends.
  const pool = createResamplePool(regOptions.threads);
  try {
    // ---- Register ----
    t0 = performance.now();
    // The resampling of the moving image needs only the forward answer: it starts on the pool's
    // threads as soon as that is known and runs while the inverse-consistency check does.
    const movingDatatype = movingImage.header.scaled ? "float32" : movingImage.header.datatype;
    const outDatatype = DATATYPES[movingDatatype].integer ? movingDatatype : "float32";
    const resampleWith = (m: Mat4) =>
      resampleOnto(moving, fixed, m, {
        interp: "linear",
        fill: 0,
        datatype: outDatatype,
        pool,
        onProgress: progress,
      });
    let resampling: ReturnType<typeof resampleWith> | undefined;
    let forwardAtMs = Number.NaN;
    const reg = registerOrExplain(options, fixed, moving, {
      ...regOptions,
      landmarks: pairs,
      prepared,
      onForwardResult: (m) => {
        forwardAtMs = performance.timeOrigin + performance.now();
        resampling = resampleWith(m);
        resampling.catch(() => undefined);
      },
    });
    timing.register = seconds(t0);
    for (const [k, v] of Object.entries(reg.timings)) timing[`register_${k}`] = v;
    // From both images in memory (the later end of inflation) to the forward answer: the
    // registration's share of the wall time, including what of it ran while a read went on.
    timing.register_elapsed = (forwardAtMs - readyAtMs) / 1000;

    // ---- Measure ----
    t0 = performance.now();
    const landmarkEval = pairs ? evaluateLandmarks(reg.matrix, pairs) : undefined;
    let labelsBlock: AlignSummary["labels"];
    let diceRows:
      | { label: number; name?: string; dice: number; fixedVoxels: number; movingVoxels: number }[]
      | undefined;
    if (fixedLabels && movingLabels && options.fixedLabels) {
      const names = readLabelNames(options.fixedLabels);
      const { dice } = propagateAndDice(fixedLabels, movingLabels, fixed, reg.matrix, names);
      diceRows = dice.map((d) => ({
        label: d.label,
        name: d.name,
        dice: d.dice,
        fixedVoxels: d.fixedVoxels,
        movingVoxels: d.movingVoxels,
      }));
      const byName: Record<string, number> = {};
      for (const d of dice) byName[d.name ?? String(d.label)] = d.dice;
      labelsBlock = {
        dice: byName,
        mean_dice: dice.length ? dice.reduce((s, d) => s + d.dice, 0) / dice.length : 0,
        per_label: dice.map((d) => ({
          label: d.label,
          name: d.name ?? null,
          dice: d.dice,
          fixed_voxels: d.fixedVoxels,
          moving_voxels: d.movingVoxels,
        })),
      };
    }
    const finest = reg.levels[reg.levels.length - 1];
    const scaleBlock = describeParameters(reg.model, reg.parameters, reg.centerMm);
    const quality = judgeRegistration(
      {
        model: reg.model,
        matrix: reg.matrix,
        scale: scaleBlock.scale,
        overlapFraction: reg.overlapFraction,
        metricStart: reg.metricStart,
        metricFinal: reg.metricFinal,
        converged: finest.converged,
        convergenceReason: finest.reason,
        inverseConsistencyMm: reg.inverseConsistencyMm,
        treMeanMm: landmarkEval?.treMm.mean,
        treMaxMm: landmarkEval?.treMm.max,
        runnerUpGap: reg.search?.runnerUpGap,
        runnerUpDistanceMm: reg.search?.runnerUpDistanceMm,
        bestSearchCost: reg.search?.refinedCosts[0],
      },
      options.thresholds,
    );
    timing.measure = seconds(t0);

    // ---- Resample the moving image onto the fixed grid ----
    t0 = performance.now();
    progress?.({ stage: "resample", fraction: 0 });
    const { volume: movingOnFixed } = await (resampling ?? resampleWith(reg.matrix));
    // Only what was left of it after the registration (it started before the inverse check).
    timing.resample = seconds(t0);

    // ---- Write ----
    t0 = performance.now();
    mkdirSync(outDir, { recursive: true });
    progress?.({ stage: "write", fraction: 0 });
    const fixedRef = imageRef(options.fixed, fixed, fixedSha);
    const movingRef = imageRef(options.moving, moving, movingSha);
    // Compressed on the thread pool while the main thread goes on (transform, summary, report).
    const movingWritten = writeNiftiAsync(files.movingOnFixed, movingOnFixed, {
      datatype: outDatatype,
      gzipLevel: 1,
      description: "coxa moving-on-fixed",
    });
    writeTransform(
      files.transform,
      buildTransformRecord({
        model: reg.model,
        matrix: reg.matrix,
        centerMm: reg.centerMm,
        parameters: reg.parameters,
        fixed: fixedRef,
        moving: movingRef,
      }),
    );
    timing.write = seconds(t0);

    const fm = reg.fixedMasks;
    const mm = reg.movingMasks;
    const ctImage =
      fm.modality === "ct" && mm.modality === "ct"
        ? "both"
        : fm.modality === "ct"
          ? "fixed"
          : mm.modality === "ct"
            ? "moving"
            : "neither";
    const summary: AlignSummary = {
      format: "coxa.summary",
      version: 1,
      verdict: quality.verdict,
      reasons: quality.reasons,
      gates: quality.gates,
      fixed: imageSummary(options.fixed, fixedSha, fixedImage, fm.modality, fm.modalityReason),
      moving: imageSummary(options.moving, movingSha, movingImage, mm.modality, mm.modalityReason),
      ct_image: ctImage,
      model: reg.model,
      metric: { name: reg.metric, start: reg.metricStart, final: reg.metricFinal, higher_is_better: true },
      overlap_fraction: reg.overlapFraction,
      inverse_consistency_mm: reg.inverseConsistencyMm,
      init: { method: reg.init.method, note: reg.init.note },
      search: reg.search,
      levels: reg.levels.map((l) => ({
        step_mm: l.stepMm,
        model: l.model,
        sampled: l.sampled,
        samples: l.samples,
        evaluations: l.evaluations,
        converged: l.converged,
        start: l.startSimilarity,
        final: l.finalSimilarity,
        overlap: l.overlap,
        seconds: l.seconds,
      })),
      transform: { matrix: toRows(reg.matrix), parameters: scaleBlock },
      masks: {
        fixed: maskSummary(fm, options.fixedMask),
        moving: maskSummary(mm, options.movingMask),
      },
      thresholds: { ...DEFAULT_THRESHOLDS, ...options.thresholds },
      timing_s: timing,
      outputs: {
        transform: "transform.json",
        moving_on_fixed: "moving-on-fixed.nii.gz",
        summary: "summary.json",
        report: options.noReport ? null : "report.html",
      },
      seed,
      software: softwareInfo(),
      note: CARE_NOTE,
    };
    if (landmarkEval) summary.landmarks = landmarkEvaluationToJson(landmarkEval);
    if (labelsBlock) summary.labels = labelsBlock;

    if (!options.noReport) {
      t0 = performance.now();
      progress?.({ stage: "report", fraction: 0 });
      const inv = inverse(reg.matrix);
      const metal = metalOnFixedGrid(reg, fixed, options.metalHu ?? REGISTER_DEFAULTS.metalHu);
      writeAlignReport(files.report, {
        verdict: quality.verdict,
        reasons: quality.reasons,
        fixed: {
          volume: fixed,
          path: options.fixed,
          sha256: fixedSha,
          modality: fm.modality,
          modalityReason: fm.modalityReason,
          datatype: fixedImage.header.datatype,
        },
        movingInfo: {
          path: options.moving,
          sha256: movingSha,
          shape: [...moving.dims],
          spacingMm: moving.spacingMm,
          orientation: moving.orientation(),
          datatype: movingImage.header.datatype,
          modality: mm.modality,
          modalityReason: mm.modalityReason,
        },
        movingOnFixed,
        metalMask: metal?.mask,
        metalVoxels: metal?.voxels,
        pointsMm: metal ? { implant: metal.implantMm, otherHip: metal.otherHipMm } : undefined,
        metalHu: options.metalHu ?? REGISTER_DEFAULTS.metalHu,
        landmarks: pairs
          ? pairs.labels.map((label, i) => {
              const p = [0, 0, 0];
              transformPoint(
                p,
                inv,
                pairs.movingMm[3 * i],
                pairs.movingMm[3 * i + 1],
                pairs.movingMm[3 * i + 2],
              );
              return {
                label,
                fixedMm: [pairs.fixedMm[3 * i], pairs.fixedMm[3 * i + 1], pairs.fixedMm[3 * i + 2]] as [
                  number,
                  number,
                  number,
                ],
                mappedMovingMm: [p[0], p[1], p[2]] as [number, number, number],
                errorMm: landmarkEval!.errorsMm[i],
                predictedTreMm: landmarkEval!.predictedTreMm ? landmarkEval!.predictedTreMm[i] : undefined,
              };
            })
          : undefined,
        freMm: landmarkEval?.freMm ?? undefined,
        landmarkFlagMm: summary.thresholds.trePassMm,
        dice: diceRows,
        metric: {
          name: metricLabel(reg.metric),
          start: reg.metricStart,
          final: reg.metricFinal,
          lowerIsBetter: false,
        },
        metricTrace: reg.levels.map((l, i) => ({ level: i, stepMm: l.stepMm, values: l.trace })),
        transform: {
          model: reg.model,
          matrix: toRows(reg.matrix),
          inverse: toRows(inv),
          parameters: { ...scaleBlock },
        },
        timings: timing,
        overlapFraction: reg.overlapFraction,
        inverseConsistencyMm: reg.inverseConsistencyMm ?? undefined,
        software: softwareInfo(),
      });
      timing.report = seconds(t0);
    }
    t0 = performance.now();
    await movingWritten;
    timing.write += seconds(t0);
    timing.total = seconds(tStart);
    writeJsonAtomic(files.summary, summary);
    progress?.({ stage: "done", fraction: 1 });
    return { summary, exitCode: quality.verdict === "fail" ? 3 : 0, files, registration: reg };
  } finally {
    await pool.close();
  }
}

/**
 * Wait for the first of the two reads; if the other is still running, prepare the first image
 * for registration meanwhile (its pyramid and masks; prepareImage). Read errors are left to the
 * caller's own await.
 */
async function prepareWhileReading(
  fixedRead: Promise<NiftiImageRead>,
  movingRead: Promise<NiftiImageRead>,
  options: RegisterOptions,
): Promise<{ fixed?: PreparedImage; moving?: PreparedImage }> {
  const done = { fixed: false, moving: false };
  const tagged = (which: "fixed" | "moving", p: Promise<NiftiImageRead>) =>
    p.then((image) => {
      done[which] = true;
      return { which, image };
    });
  let first: { which: "fixed" | "moving"; image: NiftiImageRead };
  try {
    first = await Promise.race([tagged("fixed", fixedRead), tagged("moving", movingRead)]);
  } catch {
    return {};
  }
  const other = first.which === "fixed" ? "moving" : "fixed";
  if (done[other]) return {};
  return { [first.which]: prepareImage(first.image.volume, first.which, options) };
}

/** registerImages, naming both files when the images cannot overlap. */
function registerOrExplain(
  options: AlignOptions,
  fixed: Volume,
  moving: Volume,
  reg: Parameters<typeof registerImages>[2],
): RegistrationResult {
  try {
    return registerImages(fixed, moving, reg);
  } catch (err) {
    if (err instanceof CoxaError && err.code === "NO_OVERLAP" && !err.file) {
      throw new CoxaError("NO_OVERLAP", `${err.message} (moving image ${options.moving})`, options.fixed);
    }
    throw err;
  }
}

function seconds(t0: number): number {
  return (performance.now() - t0) / 1000;
}

function metricLabel(m: MetricKind): string {
  return m === "mi"
    ? "mutual information (nats)"
    : m === "nmi"
      ? "normalized mutual information"
      : "mean squared LNCC";
}

function readLabels(path: string): Volume {
  const img = readNifti(path);
  if (img.header.shape.length < 3 || img.header.frames > 1) {
    throw new CoxaError(
      "BAD_DIMS",
      `label map must be one 3-D volume (shape ${img.header.shape.join(" x ")})`,
      path,
    );
  }
  return img.volume;
}

function imageSummary(
  path: string,
  sha: string,
  img: NiftiImage,
  modality: Modality,
  reason: string,
): ImageSummary {
  return {
    path,
    sha256: sha,
    shape: [...img.volume.dims],
    spacing_mm: img.volume.spacingMm,
    orientation: img.volume.orientation(),
    datatype: img.header.datatype,
    modality,
    modality_reason: reason,
  };
}

function maskSummary(m: RegistrationResult["fixedMasks"], user: string | undefined): MaskSummary {
  return {
    metal_excluded: m.metalApplied,
    metal_voxels: m.metal ? m.metal.metalVoxels : null,
    metal_volume_mm3: m.metal ? m.metal.metalVolumeMm3 : null,
    user_mask: user ?? null,
  };
}

/** The metal of a CT fixed image for the report: mask, voxel count and the two hips' points. */
interface ReportMetal {
  mask: Uint8Array;
  voxels: number;
  implantMm: [number, number, number];
  otherHipMm: [number, number, number];
}

/**
 * The metal (>= the metal threshold, undilated) on the fixed grid when the fixed image is CT,
 * with the points the report slices through: the centroid of the metal on the side (of the body
 * centre's x) that holds more of it, and either the other side's metal centroid (both hips
 * implanted) or the implant point mirrored across the body's mid-sagittal plane x = centre.
 * Computed once here, so the report need not scan the volume again.
 */
function metalOnFixedGrid(reg: RegistrationResult, fixed: Volume, metalHu: number): ReportMetal | undefined {
  if (reg.fixedMasks.modality !== "ct" || !reg.fixedMasks.metalApplied) return undefined;
  const [nx, ny, nz] = fixed.dims;
  const m = fixed.indexToWorld;
  const cx = reg.centerMm[0];
  const mask = new Uint8Array(fixed.count);
  const d = fixed.data;
  // Per side (world x below / above the centre): count and sum of world positions.
  const n = [0, 0];
  const sum = [
    [0, 0, 0],
    [0, 0, 0],
  ];
  // Only the box where the registration's pyramid pass found such voxels (when it looked for
  // this threshold), else the whole grid.
  const tracked = reg.fixedPyramid.highValues?.threshold === metalHu;
  if (tracked && !reg.fixedMetalBox) return undefined;
  const box = tracked && reg.fixedMetalBox ? reg.fixedMetalBox : { min: [0, 0, 0], max: [nx, ny, nz] };
  for (let k = Math.max(0, box.min[2]); k < Math.min(nz, box.max[2]); k++) {
    for (let j = Math.max(0, box.min[1]); j < Math.min(ny, box.max[1]); j++) {
      for (
        let i = Math.max(0, box.min[0]), q = i + nx * (j + ny * k);
        i < Math.min(nx, box.max[0]);
        i++, q++
      ) {
        if (!(d[q] >= metalHu)) continue;
        mask[q] = 1;
        const x = m[0] * i + m[1] * j + m[2] * k + m[3];
        const side = x < cx ? 0 : 1;
        n[side]++;
        sum[side][0] += x;
        sum[side][1] += m[4] * i + m[5] * j + m[6] * k + m[7];
        sum[side][2] += m[8] * i + m[9] * j + m[10] * k + m[11];
      }
    }
  }
  const voxels = n[0] + n[1];
  if (voxels === 0) return undefined;
  const main = n[0] >= n[1] ? 0 : 1;
  const other = 1 - main;
  const centroid = (s: number) => sum[s].map((v) => v / n[s]) as [number, number, number];
  const implantMm = centroid(main);
  const otherHipMm: [number, number, number] =
    n[other] >= 0.1 * n[main] ? centroid(other) : [2 * cx - implantMm[0], implantMm[1], implantMm[2]];
  return { mask, voxels, implantMm, otherHipMm };
}
