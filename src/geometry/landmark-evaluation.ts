/**
 * How well a transform agrees with paired landmarks: the residual at each landmark, its
 * summary, and how much of it landmark placement alone could explain.
 *
 * Conventions: the transform maps FIXED world mm to MOVING world mm (design.md), so the error
 * at landmark i is |T · p_fixed,i - p_moving,i| in mm.
 *
 * Besides the residuals this reports
 * - the FRE of the best rigid fit of the fixed to the moving landmarks (Umeyama 1991): what is
 *   left when the landmarks themselves choose the transform, i.e. their placement noise plus
 *   any non-rigid difference;
 * - an FLE estimate from that FRE, FLE ≈ FRE / sqrt(1 - 2/N) (Fitzpatrick, West & Maurer
 *   1998), unless the caller gives FLE;
 * - the predicted RMS TRE at each landmark of a landmark-based rigid registration with that
 *   FLE (same paper), a yardstick: residuals well above it point at the transform, residuals
 *   near it are within what the landmarks can resolve.
 */
import { CoxaError } from "../common/errors.js";
import type { LandmarkPairs } from "./landmarks.js";
import type { Mat4 } from "./mat4.js";
import {
  type ErrorStats,
  errorStats,
  estimateFle,
  fitPointSets,
  pointErrors,
  predictedTre,
} from "./pointset.js";

/** Options of `evaluateLandmarks`. */
export interface LandmarkEvaluationOptions {
  /** RMS fiducial localisation error to assume, mm; default: estimated from the rigid-fit FRE. */
  fleMm?: number;
}

/** Landmark agreement of a transform (library form, camelCase). */
export interface LandmarkEvaluation {
  count: number;
  labels: string[];
  /** |T · p_fixed - p_moving| per landmark, mm. */
  errorsMm: Float64Array;
  /** Summary of `errorsMm`. */
  treMm: ErrorStats;
  /** RMS residual of the best rigid landmark fit, mm (null below 3 usable landmarks). */
  freMm: number | null;
  /** FLE used for the prediction, mm (null when unknown). */
  fleMm: number | null;
  /** Whether `fleMm` was estimated from the FRE or given by the caller. */
  fleSource: "estimated" | "given" | null;
  /** Predicted RMS TRE per landmark, mm (null when FLE or the fit is unavailable). */
  predictedTreMm: Float64Array | null;
  /** RMS over landmarks of `predictedTreMm` (null when unavailable). */
  predictedTreRmsMm: number | null;
  /** Why the fit-based numbers are missing, when they are. */
  note: string | null;
}

/**
 * Residual landmark errors of a fixed-to-moving transform, with FRE, FLE and predicted TRE.
 * @param matrix - fixed-to-moving 4x4 row-major matrix
 * @param pairs - landmarks matched by label (`pairLandmarks`)
 * @param options - optional FLE (mm)
 * @throws CoxaError BAD_ARGUMENT for no pairs or a negative/non-finite FLE
 */
export function evaluateLandmarks(
  matrix: Mat4,
  pairs: LandmarkPairs,
  options: LandmarkEvaluationOptions = {},
): LandmarkEvaluation {
  const count = pairs.labels.length;
  if (count === 0) throw new CoxaError("BAD_ARGUMENT", "no landmark pairs to evaluate");
  if (options.fleMm !== undefined && (!(options.fleMm >= 0) || !Number.isFinite(options.fleMm))) {
    throw new CoxaError("BAD_ARGUMENT", `FLE is ${options.fleMm} mm; it must be finite and >= 0`);
  }
  const errorsMm = pointErrors(matrix, pairs.fixedMm, pairs.movingMm);
  const result: LandmarkEvaluation = {
    count,
    labels: pairs.labels.slice(),
    errorsMm,
    treMm: errorStats(errorsMm),
    freMm: null,
    fleMm: options.fleMm ?? null,
    fleSource: options.fleMm !== undefined ? "given" : null,
    predictedTreMm: null,
    predictedTreRmsMm: null,
    note: null,
  };
  if (count < 3) {
    result.note = `FRE and predicted TRE need at least 3 landmarks, there are ${count}`;
    return result;
  }
  try {
    result.freMm = fitPointSets(pairs.fixedMm, pairs.movingMm).freMm;
  } catch (err) {
    if (err instanceof CoxaError && err.code === "BAD_LANDMARKS") {
      result.note = "the landmarks lie on one line, so FRE and predicted TRE are undefined";
      return result;
    }
    throw err;
  }
  if (result.fleMm === null) {
    result.fleMm = estimateFle(result.freMm, count);
    result.fleSource = "estimated";
  }
  const predicted = predictedTre(pairs.fixedMm, pairs.fixedMm, result.fleMm);
  result.predictedTreMm = predicted;
  let sum2 = 0;
  for (let i = 0; i < count; i++) sum2 += predicted[i] * predicted[i];
  result.predictedTreRmsMm = Math.sqrt(sum2 / count);
  return result;
}

/** The `landmarks` block of summary.json (design.md), snake_case as in the file. */
export interface LandmarkSummaryJson {
  count: number;
  tre_mm: { mean: number; median: number; rms: number; max: number };
  per_point: { label: string; error_mm: number; predicted_tre_mm: number | null }[];
  fre_mm: number | null;
  fle_mm: number | null;
  fle_source: "estimated" | "given" | null;
  predicted_tre_mm: number | null;
  note?: string;
}

/**
 * The summary.json `landmarks` block for an evaluation.
 * @param evaluation - result of `evaluateLandmarks`
 */
export function landmarkEvaluationToJson(evaluation: LandmarkEvaluation): LandmarkSummaryJson {
  const { treMm } = evaluation;
  const json: LandmarkSummaryJson = {
    count: evaluation.count,
    tre_mm: { mean: treMm.mean, median: treMm.median, rms: treMm.rms, max: treMm.max },
    per_point: evaluation.labels.map((label, i) => ({
      label,
      error_mm: evaluation.errorsMm[i],
      predicted_tre_mm: evaluation.predictedTreMm ? evaluation.predictedTreMm[i] : null,
    })),
    fre_mm: evaluation.freMm,
    fle_mm: evaluation.fleMm,
    fle_source: evaluation.fleSource,
    predicted_tre_mm: evaluation.predictedTreRmsMm,
  };
  if (evaluation.note !== null) json.note = evaluation.note;
  return json;
}
