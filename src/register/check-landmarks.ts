/** `coxa landmarks` as a library call: TRE of a stored transform at paired landmarks, judged. */
import {
  evaluateLandmarks,
  type LandmarkSummaryJson,
  landmarkEvaluationToJson,
} from "../geometry/landmark-evaluation.js";
import { pairLandmarks, readLandmarks } from "../geometry/landmarks.js";
import { readTransform } from "../geometry/transform-file.js";
import { DEFAULT_THRESHOLDS, type Verdict } from "./quality.js";

export interface CheckLandmarksOptions {
  transform: string;
  fixedLandmarks: string;
  movingLandmarks: string;
  lps?: boolean;
  fleMm?: number;
  trePassMm?: number;
  treReviewMm?: number;
}

export interface CheckLandmarksResult {
  transform: string;
  landmarks: LandmarkSummaryJson;
  verdict: Verdict;
  reason: string;
}

/**
 * Residual error of the transform at each landmark (|T · p_fixed - p_moving|, mm).
 * @throws CoxaError BAD_TRANSFORM, BAD_LANDMARKS naming the file
 */
export function checkLandmarks(options: CheckLandmarksOptions): CheckLandmarksResult {
  const t = readTransform(options.transform);
  const pairs = pairLandmarks(
    readLandmarks(options.fixedLandmarks, { lps: options.lps }),
    readLandmarks(options.movingLandmarks, { lps: options.lps }),
    options.fixedLandmarks,
    options.movingLandmarks,
  );
  const e = evaluateLandmarks(t.matrix, pairs, { fleMm: options.fleMm });
  const pass = options.trePassMm ?? DEFAULT_THRESHOLDS.trePassMm;
  const review = options.treReviewMm ?? DEFAULT_THRESHOLDS.treReviewMm;
  const mean = e.treMm.mean;
  const verdict: Verdict = mean <= pass ? "pass" : mean <= review ? "review" : "fail";
  const reason =
    verdict === "pass"
      ? `mean TRE ${mean.toFixed(2)} mm is within ${pass} mm`
      : verdict === "review"
        ? `mean TRE ${mean.toFixed(2)} mm is above ${pass} mm`
        : `mean TRE ${mean.toFixed(2)} mm is above ${review} mm`;
  return { transform: options.transform, landmarks: landmarkEvaluationToJson(e), verdict, reason };
}
