/**
 * `coxa stress` as a library call: how much implant shadowing, and how far a start, the
 * registration survives on the user's own pair.
 *
 * For each severity (./images.ts) the artifacts are added once, seeded, to both images; for
 * each trial a seeded starting pose S = T_ref · P (./poses.ts) is registered twice, with the
 * metal mask on and off (the same start, the same registration seed), and the result is
 * compared with the reference (./error.ts): success = error_mm <= successMm. Trials run on
 * worker threads (./trial-worker.ts), the images shared, not copied.
 *
 * Outputs in the output folder: stress.json, stress.csv (./summary.ts), stress.html
 * (./report.ts), trials/<severity>-<trial>-<on|off>.json (coxa transform files: fixed -> moving,
 * their image blocks naming the INPUT files, since artifacts change intensities, not geometry),
 * and with `saveImages` images/ct-<severity>.nii.gz and images/mr-<severity>.nii.gz.
 * Every input is read and checked before anything is written; each file is written to a
 * temporary name and renamed. Determinism: the same inputs and seed give the same rows (csv and
 * json) and trial files except the wall times (`seconds`, `timing_s`), whatever the thread count.
 *
 * Exit code: 3 when the metal-masked mode succeeds in fewer than 95% of the trials at the lowest
 * tested severity (the pipeline does not survive even the least shadowing tested; outputs are
 * still written), else 0.
 */
import { existsSync, mkdirSync, statSync } from "node:fs";
import { join, resolve } from "node:path";
import { refuseOverwritingInputs, writeFileAtomic, writeJsonAtomic } from "../common/atomic.js";
import { CoxaError } from "../common/errors.js";
import { sha256File } from "../common/hash.js";
import type { ProgressFn } from "../common/progress.js";
import { toShared } from "../common/shared-arrays.js";
import { softwareInfo } from "../common/version.js";
import { defaultThreads, WorkerPool, workerScript } from "../common/workers.js";
import { evaluateLandmarks } from "../geometry/landmark-evaluation.js";
import { type LandmarkPairs, pairLandmarks, readLandmarks } from "../geometry/landmarks.js";
import { type Mat4, toRows } from "../geometry/mat4.js";
import { buildTransformRecord, imageRef, writeTransform } from "../geometry/transform-file.js";
import type { TransformModel } from "../geometry/transform-model.js";
import { detectModality } from "../image/modality.js";
import { writeNifti } from "../image/nifti-write.js";
import { readVolume3d } from "../image/read-volume.js";
import type { MetricKind } from "../metrics/metric.js";
import type { Side } from "../phantom/implant.js";
import { REGISTER_DEFAULTS } from "../register/driver.js";
import { judgeRegistration, type QualityThresholds } from "../register/quality.js";
import {
  describeErrorRegion,
  type ErrorRegion,
  landmarkRegion,
  sphereRegion,
  transformErrorMm,
} from "./error.js";
import { makeSeverityImages, prepareStressBase, type SeverityImageStats } from "./images.js";
import { type Perturbation, startTransform, trialPerturbations } from "./poses.js";
import { readReferenceTransform, readReferenceTruth, type StressReference } from "./reference.js";
import { renderStressReport } from "./report.js";
import {
  concludeStress,
  formatSeverity,
  MASK_MODES,
  type MaskMode,
  type ModeStats,
  modeStats,
  type StressConclusion,
  type StressRow,
  SURVIVAL_RATE,
  stressCsv,
  trialFileName,
} from "./summary.js";
import {
  runTrial,
  type TrialOutcome,
  type TrialRegisterSettings,
  type TrialTask,
  volumeData,
} from "./trial.js";

/** Options of runStress (the CLI's flags, camelCase). */
export interface StressOptions {
  /** Fixed image: the CT (HU). */
  fixed: string;
  /** Moving image: the MR. */
  moving: string;
  /** Output folder (created if absent). */
  out: string;
  /** Reference transform file (coxa transform.json); exactly one of reference and truth. */
  reference?: string;
  /** Phantom truth.json (its fixed_to_moving is the reference). */
  truth?: string;
  /** Fixed landmarks (label,x,y,z): the error becomes the mean over them of |T_trial p - T_ref p|. */
  fixedLandmarks?: string;
  /** Moving landmarks: add the landmark gate to each trial's verdict (needs fixedLandmarks). */
  movingLandmarks?: string;
  /** Landmark files hold LPS coordinates. */
  lps?: boolean;
  /** Trials per severity (>= 1). */
  trials?: number;
  /** Severities 0..1, each once. */
  severities?: readonly number[];
  /** Largest starting translation, mm (>= 0). */
  offsetMm?: number;
  /** Largest starting rotation, degrees (0..90). */
  offsetDeg?: number;
  /** A trial succeeds when its error is at most this, mm (> 0). */
  successMm?: number;
  /** Place a virtual implant (head centre) at this CT world point, mm. */
  virtualImplant?: readonly [number, number, number];
  /** Side of the virtual implant (default: from the point against the body centroid). */
  virtualSide?: Side;
  /** MR readout (frequency-encoding) voxel axis: 0 = i, 1 = j, 2 = k. */
  readoutAxis?: 0 | 1 | 2;
  /** Coarse global search in each trial (default true, as coxa align runs it). */
  globalSearch?: boolean;
  model?: TransformModel;
  metric?: MetricKind;
  levelsMm?: readonly number[];
  metalHu?: number;
  metalMarginMm?: number;
  /** Quality-gate thresholds for the verdict column. */
  thresholds?: Partial<QualityThresholds>;
  seed?: number;
  /** Worker threads for trials and CT artifacts (default all cores; 1 = this thread). */
  threads?: number;
  /** Also write each severity's CT and MR into images/. */
  saveImages?: boolean;
  onProgress?: ProgressFn;
}

/** Defaults in one place (the CLI shows them). */
export const STRESS_DEFAULTS = {
  trials: 10,
  severities: [0, 0.25, 0.5, 0.75, 1] as readonly number[],
  offsetMm: 20,
  offsetDeg: 10,
  successMm: 2,
  readoutAxis: 0 as 0 | 1 | 2,
  globalSearch: true,
  seed: 1,
  maxTrials: 1000,
  maxOffsetDeg: 90,
};

/** One severity in stress.json. */
export interface SeverityRecord {
  severity: number;
  ct: { slices_with_metal: number; max_abs_artifact_hu: number };
  mr: { max_displacement_mm: number; displaced_volume_ml: number };
  artifact_seconds: number;
  modes: Record<MaskMode, ModeStats>;
  images: { ct: string; mr: string } | null;
}

/** stress.json. */
export interface StressDocument {
  format: "coxa.stress";
  version: 1;
  fixed: { path: string; sha256: string; shape: number[] };
  moving: { path: string; sha256: string; shape: number[] };
  reference: { kind: "transform" | "truth"; path: string; fixed_to_moving: number[][] };
  settings: {
    severities: number[];
    trials: number;
    offset_mm: number;
    offset_deg: number;
    success_mm: number;
    seed: number;
    global_search: boolean;
    model: TransformModel;
    metric: MetricKind;
    levels_mm: number[];
    metal_hu: number;
    metal_margin_mm: number;
    readout_axis: 0 | 1 | 2;
    threads: number;
  };
  implant: {
    center_mm: number[];
    source: "ct-metal" | "virtual";
    ct_metal_voxels: number;
    virtual: { point_mm: number[]; side: Side } | null;
  };
  error: {
    kind: "landmarks" | "sphere";
    definition: string;
    center_mm: number[];
    radius_mm: number | null;
    step_mm: number | null;
    points: number;
  };
  perturbation: string;
  severity_results: SeverityRecord[];
  rows: StressRow[];
  conclusion: StressConclusion;
  exit_code: 0 | 3;
  exit_reason: string;
  determinism: string;
  timing_s: Record<string, number>;
  software: { name: string; version: string };
  note: string;
}

/** What runStress returns. */
export interface StressResult {
  document: StressDocument;
  exitCode: 0 | 3;
  files: { json: string; csv: string; html: string; trials: string };
}

const CARE_NOTE =
  "Research software, not a medical device: results must be reviewed by a qualified person; clinical use follows local regulations and licensed practice.";

const PERTURBATION_TEXT =
  "start = T_ref · P, P(x) = R(x - c) + c + t in fixed world: |t| uniform in [0, offset_mm] along a direction uniform on the sphere, R a rotation by an angle uniform in [0, offset_deg] about an axis uniform on the sphere, c the implant centre; trial n draws from its own seed, the same for both mask modes and every severity.";

const DETERMINISM_TEXT =
  "With the same inputs and seed, every row of stress.csv and stress.json and every trial transform file is reproduced exactly, except the wall times (the seconds column, timing_s), whatever the thread count.";

const seconds = (t0: number) => (performance.now() - t0) / 1000;

/**
 * Validate and complete the numeric options.
 * @throws CoxaError BAD_ARGUMENT naming the value
 */
export function resolveStressSettings(options: StressOptions): {
  trials: number;
  severities: number[];
  offsetMm: number;
  offsetDeg: number;
  successMm: number;
  seed: number;
} {
  const d = STRESS_DEFAULTS;
  const trials = options.trials ?? d.trials;
  if (!Number.isInteger(trials) || trials < 1 || trials > d.maxTrials) {
    throw new CoxaError("BAD_ARGUMENT", `--trials ${trials} must be a whole number from 1 to ${d.maxTrials}`);
  }
  const severities = [...(options.severities ?? d.severities)];
  if (severities.length === 0) throw new CoxaError("BAD_ARGUMENT", "--severities needs at least one value");
  for (const s of severities) {
    if (!(s >= 0 && s <= 1)) throw new CoxaError("BAD_ARGUMENT", `severity ${s} is outside 0..1`);
  }
  severities.sort((a, b) => a - b);
  for (let i = 1; i < severities.length; i++) {
    if (severities[i] === severities[i - 1]) {
      throw new CoxaError("BAD_ARGUMENT", `severity ${severities[i]} is listed twice`);
    }
  }
  const offsetMm = options.offsetMm ?? d.offsetMm;
  if (!(offsetMm >= 0) || !Number.isFinite(offsetMm)) {
    throw new CoxaError("BAD_ARGUMENT", `--offset-mm ${offsetMm} must be a finite number >= 0`);
  }
  const offsetDeg = options.offsetDeg ?? d.offsetDeg;
  if (!(offsetDeg >= 0 && offsetDeg <= d.maxOffsetDeg)) {
    throw new CoxaError("BAD_ARGUMENT", `--offset-deg ${offsetDeg} must lie in 0..${d.maxOffsetDeg}`);
  }
  const successMm = options.successMm ?? d.successMm;
  if (!(successMm > 0) || !Number.isFinite(successMm)) {
    throw new CoxaError("BAD_ARGUMENT", `--success-mm ${successMm} must be a finite number > 0`);
  }
  const seed = options.seed ?? d.seed;
  if (!Number.isFinite(seed)) throw new CoxaError("BAD_ARGUMENT", `--seed ${seed} is not a number`);
  return { trials, severities, offsetMm, offsetDeg, successMm, seed };
}

/**
 * Run the stress test and write its outputs.
 * @param options - see StressOptions
 * @returns stress.json's content, the exit code (0, or 3 when the masked mode fails the lowest
 *   severity) and the output paths
 * @throws CoxaError for bad input (exit 2) before anything is written: unreadable or non-3-D
 *   images, a fixed image that is not CT, neither or both of reference and truth, a reference
 *   made for other images (HASH_MISMATCH naming the image) or a truth for other grids, bad
 *   landmarks, bad numbers, no metal and no virtual implant, an output that would replace an input
 */
export async function runStress(options: StressOptions): Promise<StressResult> {
  const tStart = performance.now();
  const timing: Record<string, number> = {};
  const progress = options.onProgress;
  const s = resolveStressSettings(options);
  const settings: TrialRegisterSettings = {
    model: options.model ?? REGISTER_DEFAULTS.model,
    metric: options.metric ?? REGISTER_DEFAULTS.metric,
    levelsMm: [...(options.levelsMm ?? REGISTER_DEFAULTS.levelsMm)],
    metalHu: options.metalHu ?? REGISTER_DEFAULTS.metalHu,
    metalMarginMm: options.metalMarginMm ?? REGISTER_DEFAULTS.metalMarginMm,
    globalSearch: options.globalSearch ?? STRESS_DEFAULTS.globalSearch,
    seed: s.seed,
  };
  const readoutAxis = options.readoutAxis ?? STRESS_DEFAULTS.readoutAxis;
  const threads = Math.max(1, Math.floor(options.threads ?? defaultThreads()));

  // ---- Read and check everything before writing ----
  let t0 = performance.now();
  progress?.({ stage: "read", fraction: 0 });
  if ((options.reference === undefined) === (options.truth === undefined)) {
    throw new CoxaError(
      "BAD_ARGUMENT",
      options.reference === undefined
        ? "a reference is needed: give --reference T.json (a reviewed alignment) or --truth truth.json (a phantom's)"
        : "give either --reference or --truth, not both",
    );
  }
  if (options.movingLandmarks && !options.fixedLandmarks) {
    throw new CoxaError("BAD_ARGUMENT", "--moving-landmarks needs --fixed-landmarks");
  }
  const [fixedImage, movingImage] = await Promise.all([
    readVolume3d(options.fixed),
    readVolume3d(options.moving),
  ]);
  const fixed = fixedImage.volume;
  const moving = movingImage.volume;
  const modality = detectModality(fixed.data);
  if (modality.modality !== "ct") {
    throw new CoxaError(
      "BAD_INPUT",
      `does not look like a CT in Hounsfield units (${modality.reason}); stress needs the CT as --fixed`,
      options.fixed,
    );
  }
  const [fixedSha, movingSha] = await Promise.all([sha256File(options.fixed), sha256File(options.moving)]);
  const reference: StressReference = options.reference
    ? readReferenceTransform(
        options.reference,
        { path: options.fixed, sha256: fixedSha },
        { path: options.moving, sha256: movingSha },
      )
    : readReferenceTruth(options.truth as string, fixed, moving);
  let pairs: LandmarkPairs | undefined;
  let region: ErrorRegion | undefined;
  if (options.fixedLandmarks) {
    const fixedPoints = readLandmarks(options.fixedLandmarks, { lps: options.lps });
    if (fixedPoints.length === 0) {
      throw new CoxaError("BAD_LANDMARKS", "has no landmarks", options.fixedLandmarks);
    }
    if (options.movingLandmarks) {
      pairs = pairLandmarks(
        fixedPoints,
        readLandmarks(options.movingLandmarks, { lps: options.lps }),
        options.fixedLandmarks,
        options.movingLandmarks,
      );
    }
    const flat = new Float64Array(3 * fixedPoints.length);
    for (let i = 0; i < fixedPoints.length; i++) flat.set(fixedPoints[i].pointMm, 3 * i);
    region = landmarkRegion(
      fixedPoints.map((p) => p.label),
      flat,
    );
  }
  const outDir = resolve(options.out);
  if (existsSync(outDir) && !statSync(outDir).isDirectory()) {
    throw new CoxaError("BAD_ARGUMENT", "output path exists and is not a folder", options.out);
  }
  const files = {
    json: join(outDir, "stress.json"),
    csv: join(outDir, "stress.csv"),
    html: join(outDir, "stress.html"),
    trials: join(outDir, "trials"),
  };
  const trialPaths: string[] = [];
  for (const sev of s.severities) {
    for (let n = 1; n <= s.trials; n++) {
      for (const mode of MASK_MODES) trialPaths.push(join(outDir, trialFileName(sev, n, mode)));
    }
  }
  const imagePaths = options.saveImages
    ? s.severities.flatMap((sev) => [
        join(outDir, imageFileName("ct", sev)),
        join(outDir, imageFileName("mr", sev)),
      ])
    : [];
  refuseOverwritingInputs(
    [
      options.fixed,
      options.moving,
      options.reference,
      options.truth,
      options.fixedLandmarks,
      options.movingLandmarks,
    ],
    [files.json, files.csv, files.html, ...trialPaths, ...imagePaths],
  );
  const base = prepareStressBase(fixed, moving, reference.matrix, {
    metalHu: settings.metalHu,
    virtualImplant: options.virtualImplant
      ? { pointMm: options.virtualImplant, side: options.virtualSide }
      : undefined,
  });
  if (!region) region = sphereRegion(base.implantCenterMm);
  const perturbations = trialPerturbations(s.seed, s.trials, s.offsetMm, s.offsetDeg, base.implantCenterMm);
  timing.read = seconds(t0);

  // ---- Run ----
  mkdirSync(files.trials, { recursive: true });
  if (options.saveImages) mkdirSync(join(outDir, "images"), { recursive: true });
  const fixedRef = imageRef(options.fixed, fixed, fixedSha);
  const movingRef = imageRef(options.moving, moving, movingSha);
  const total = s.severities.length * s.trials * MASK_MODES.length;
  let done = 0;
  const rows: StressRow[] = [];
  const severityStats: SeverityImageStats[] = [];
  const poolSize = Math.min(threads, s.trials * MASK_MODES.length);
  const pool = poolSize > 1 ? new WorkerPool(workerScript(import.meta.url, "trial-worker"), poolSize) : null;
  t0 = performance.now();
  try {
    for (const severity of s.severities) {
      const label = `severity ${formatSeverity(severity)}`;
      progress?.({ stage: `${label}: artifacts`, fraction: 0, message: `${done}/${total} registrations` });
      const images = await makeSeverityImages(base, severity, {
        seed: s.seed,
        readoutAxis,
        threads,
        onProgress: (e) => progress?.({ ...e, stage: `${label}: ${e.stage}` }),
      });
      severityStats.push(images.stats);
      if (options.saveImages) {
        writeNifti(join(outDir, imageFileName("ct", severity)), images.fixed, {
          datatype: "int16",
          gzipLevel: 1,
          description: `coxa stress CT, severity ${formatSeverity(severity)}`,
        });
        writeNifti(join(outDir, imageFileName("mr", severity)), images.moving, {
          datatype: "float32",
          gzipLevel: 1,
          description: `coxa stress MR, severity ${formatSeverity(severity)}`,
        });
      }
      const fixedData = volumeData(images.fixed.withData(toShared(images.fixed.data, "float32")));
      const movingData = volumeData(images.moving.withData(toShared(images.moving.data, "float32")));
      const jobs: Promise<void>[] = [];
      for (const p of perturbations) {
        const start = startTransform(reference.matrix, p.matrix);
        for (const mode of MASK_MODES) {
          const task: TrialTask = {
            fixed: fixedData,
            moving: movingData,
            startMatrix: Array.from(start),
            metalMask: mode === "on",
            settings,
          };
          const finish = (outcome: TrialOutcome) => {
            rows.push(
              trialRow({
                severity,
                perturbation: p,
                mode,
                start,
                outcome,
                region: region as ErrorRegion,
                reference: reference.matrix,
                pairs,
                successMm: s.successMm,
                thresholds: options.thresholds,
                model: settings.model,
              }),
            );
            writeTrialTransform(
              join(outDir, trialFileName(severity, p.trial, mode)),
              settings.model,
              outcome,
              {
                fixed: fixedRef,
                moving: movingRef,
              },
            );
            done++;
            progress?.({
              stage: "trials",
              fraction: done / total,
              message: `${label}, trial ${p.trial}, mask ${mode}`,
            });
          };
          if (pool) jobs.push(pool.run<TrialOutcome>(task).then(finish));
          else finish(runTrial(task));
        }
      }
      await Promise.all(jobs);
    }
  } finally {
    await pool?.close();
  }
  timing.artifacts = severityStats.reduce((sum, st) => sum + st.seconds, 0);
  timing.trials = seconds(t0) - timing.artifacts;

  // ---- Summarise and write ----
  rows.sort(
    (a, b) =>
      a.severity - b.severity || a.trial - b.trial || MASK_MODES.indexOf(a.mask) - MASK_MODES.indexOf(b.mask),
  );
  const perSeverity = s.severities.map((sev) => ({
    on: modeStats(rows, sev, "on"),
    off: modeStats(rows, sev, "off"),
  }));
  const conclusion = concludeStress(s.severities, perSeverity, s.successMm);
  const lowest = perSeverity[0].on;
  const exitCode: 0 | 3 = lowest.success_rate >= SURVIVAL_RATE ? 0 : 3;
  const exitReason =
    exitCode === 0
      ? `With the metal mask, ${lowest.successes} of ${lowest.trials} trials succeeded at the lowest severity tested (${formatSeverity(s.severities[0])}).`
      : `With the metal mask, only ${lowest.successes} of ${lowest.trials} trials succeeded at the lowest severity tested (${formatSeverity(s.severities[0])}), below ${Math.round(100 * SURVIVAL_RATE)}%: registration of this pair is not reliable even before added shadowing, or the reference is wrong.`;
  timing.total = seconds(tStart);
  const document: StressDocument = {
    format: "coxa.stress",
    version: 1,
    fixed: { path: options.fixed, sha256: fixedSha, shape: [...fixed.dims] },
    moving: { path: options.moving, sha256: movingSha, shape: [...moving.dims] },
    reference: { kind: reference.kind, path: reference.path, fixed_to_moving: toRows(reference.matrix) },
    settings: {
      severities: s.severities,
      trials: s.trials,
      offset_mm: s.offsetMm,
      offset_deg: s.offsetDeg,
      success_mm: s.successMm,
      seed: s.seed,
      global_search: settings.globalSearch,
      model: settings.model,
      metric: settings.metric,
      levels_mm: settings.levelsMm,
      metal_hu: settings.metalHu,
      metal_margin_mm: settings.metalMarginMm,
      readout_axis: readoutAxis,
      threads,
    },
    implant: {
      center_mm: [...base.implantCenterMm],
      source: base.implant ? "virtual" : "ct-metal",
      ct_metal_voxels: base.foundMetalVoxels,
      virtual: base.implant ? { point_mm: [...base.implant.headCenterMm], side: base.implant.side } : null,
    },
    error: {
      kind: region.kind,
      definition: describeErrorRegion(region),
      center_mm: [...region.centerMm],
      radius_mm: region.radiusMm,
      step_mm: region.stepMm,
      points: region.pointsMm.length / 3,
    },
    perturbation: PERTURBATION_TEXT,
    severity_results: s.severities.map((sev, i) => ({
      severity: sev,
      ct: {
        slices_with_metal: severityStats[i].ctSlicesWithMetal,
        max_abs_artifact_hu: severityStats[i].ctMaxAbsArtifactHu,
      },
      mr: {
        max_displacement_mm: severityStats[i].mrMaxDisplacementMm,
        displaced_volume_ml: severityStats[i].mrDisplacedVolumeMl,
      },
      artifact_seconds: severityStats[i].seconds,
      modes: perSeverity[i],
      images: options.saveImages ? { ct: imageFileName("ct", sev), mr: imageFileName("mr", sev) } : null,
    })),
    rows,
    conclusion,
    exit_code: exitCode,
    exit_reason: exitReason,
    determinism: DETERMINISM_TEXT,
    timing_s: timing,
    software: softwareInfo(),
    note: CARE_NOTE,
  };
  progress?.({ stage: "write", fraction: 0 });
  writeFileAtomic(files.csv, stressCsv(rows));
  writeFileAtomic(files.html, renderStressReport(document));
  writeJsonAtomic(files.json, document);
  progress?.({ stage: "done", fraction: 1 });
  return { document, exitCode, files };
}

/** File name of a saved severity image, relative to the output folder. */
export function imageFileName(kind: "ct" | "mr", severity: number): string {
  return `images/${kind}-${formatSeverity(severity)}.nii.gz`;
}

/** Everything trialRow needs. */
interface TrialRowInput {
  severity: number;
  perturbation: Perturbation;
  mode: MaskMode;
  start: Mat4;
  outcome: TrialOutcome;
  region: ErrorRegion;
  reference: Mat4;
  pairs: LandmarkPairs | undefined;
  successMm: number;
  thresholds: Partial<QualityThresholds> | undefined;
  model: TransformModel;
}

/** A row from a trial's outcome: error against the reference, success, verdict. */
function trialRow(input: TrialRowInput): StressRow {
  const { outcome, region, reference } = input;
  const matrix = Float64Array.from(outcome.matrix);
  const errorMm = transformErrorMm(region, matrix, reference);
  let verdict: StressRow["verdict"] = "fail";
  let reasons: string[];
  if (outcome.failure) {
    reasons = [`The registration could not run from this start: ${outcome.failure}`];
  } else {
    const landmarks = input.pairs ? evaluateLandmarks(matrix, input.pairs) : undefined;
    const q = judgeRegistration(
      {
        model: input.model,
        matrix,
        scale: outcome.scale,
        overlapFraction: outcome.overlapFraction,
        metricStart: outcome.metricStart,
        metricFinal: outcome.metricFinal,
        converged: outcome.converged,
        convergenceReason: outcome.convergenceReason,
        inverseConsistencyMm: null,
        treMeanMm: landmarks?.treMm.mean,
        treMaxMm: landmarks?.treMm.max,
        runnerUpGap: outcome.runnerUpGap,
        runnerUpDistanceMm: outcome.runnerUpDistanceMm,
        bestSearchCost: outcome.bestSearchCost,
      },
      input.thresholds,
    );
    verdict = q.verdict;
    reasons = q.reasons;
  }
  return {
    severity: input.severity,
    trial: input.perturbation.trial,
    offset_mm: input.perturbation.offsetMm,
    offset_deg: input.perturbation.offsetDeg,
    mask: input.mode,
    error_mm: errorMm,
    success: !outcome.failure && errorMm <= input.successMm ? 1 : 0,
    seconds: outcome.seconds,
    verdict,
    start_error_mm: transformErrorMm(region, input.start, reference),
    start_fixed_to_moving: toRows(input.start),
    reasons,
    transform: trialFileName(input.severity, input.perturbation.trial, input.mode),
    failure: outcome.failure,
  };
}

function writeTrialTransform(
  path: string,
  model: TransformModel,
  outcome: TrialOutcome,
  images: { fixed: ReturnType<typeof imageRef>; moving: ReturnType<typeof imageRef> },
): void {
  const failed = outcome.failure !== null;
  writeTransform(
    path,
    buildTransformRecord({
      model: failed ? "rigid" : model,
      matrix: Float64Array.from(outcome.matrix),
      centerMm: outcome.centerMm,
      parameters: failed ? undefined : outcome.parameters,
      fixed: images.fixed,
      moving: images.moving,
    }),
  );
}
