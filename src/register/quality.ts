/**
 * Quality gates: turn what registration measured into a verdict `pass | review | fail` with one
 * plain sentence per finding. Every threshold is an option with its default here, in one place.
 *
 * Defaults are common practice for rigid CT-MR alignment where no source fixes them (said so
 * beside each); they are starting points for a site's own acceptance criteria.
 */

import type { Mat4 } from "../geometry/mat4.js";
import { rotationAngleDeg } from "../geometry/rotation.js";
import type { TransformModel } from "../geometry/transform-model.js";

export type Verdict = "pass" | "review" | "fail";

/** Thresholds of the gates. */
export interface QualityThresholds {
  /** Mean landmark TRE at or below this passes (mm; common practice, no source). */
  trePassMm: number;
  /** Mean landmark TRE at or below this needs review, above it fails (mm; common practice, no source). */
  treReviewMm: number;
  /** Overlap fraction below this needs review (no source; set on the synthetic phantoms). */
  overlapReview: number;
  /** Overlap fraction below this fails. */
  overlapFail: number;
  /** Inverse-consistency mismatch above this needs review (mm; common practice, no source). */
  inverseConsistencyReviewMm: number;
  /** Rigid rotation above this fails as implausible (degrees). */
  maxRotationDeg: number;
  /** Scale factors outside [minScale, maxScale] fail as implausible. */
  minScale: number;
  maxScale: number;
  /** A search runner-up within this relative cost gap and farther than ambiguityMm needs review. */
  ambiguityGap: number;
  ambiguityMm: number;
}

export const DEFAULT_THRESHOLDS: Readonly<QualityThresholds> = {
  trePassMm: 2,
  treReviewMm: 4,
  overlapReview: 0.5,
  overlapFail: 0.25,
  inverseConsistencyReviewMm: 1,
  maxRotationDeg: 45,
  minScale: 0.8,
  maxScale: 1.25,
  ambiguityGap: 0.05,
  ambiguityMm: 20,
};

/** What the gates look at. */
export interface QualityInput {
  model: TransformModel;
  matrix: Mat4;
  /** Scale factors of the result (1 for rigid). */
  scale: readonly number[];
  overlapFraction: number;
  metricStart: number;
  metricFinal: number;
  /** Whether the finest level's optimiser met its tolerances. */
  converged: boolean;
  convergenceReason: string;
  inverseConsistencyMm: number | null;
  /** Landmark TRE (mm) when landmarks were given. */
  treMeanMm?: number;
  treMaxMm?: number;
  /** Coarse search: runner-up's relative cost gap and distance (mm). */
  runnerUpGap?: number | null;
  runnerUpDistanceMm?: number | null;
  bestSearchCost?: number | null;
}

export interface QualityResult {
  verdict: Verdict;
  reasons: string[];
  /** Each gate's own outcome. */
  gates: { name: string; verdict: Verdict; reason: string }[];
}

const RANK: Record<Verdict, number> = { pass: 0, review: 1, fail: 2 };

/**
 * Judge a registration.
 * @param input - measurements
 * @param thresholds - gates (defaults: DEFAULT_THRESHOLDS)
 */
export function judgeRegistration(
  input: QualityInput,
  thresholds: Partial<QualityThresholds> = {},
): QualityResult {
  const t = { ...DEFAULT_THRESHOLDS, ...thresholds };
  const gates: QualityResult["gates"] = [];
  const gate = (name: string, verdict: Verdict, reason: string) => gates.push({ name, verdict, reason });

  if (input.treMeanMm !== undefined) {
    const m = input.treMeanMm.toFixed(2);
    const mx = input.treMaxMm !== undefined ? `, max ${input.treMaxMm.toFixed(2)} mm` : "";
    if (input.treMeanMm <= t.trePassMm)
      gate("landmarks", "pass", `Mean landmark error ${m} mm${mx}, within ${t.trePassMm} mm.`);
    else if (input.treMeanMm <= t.treReviewMm)
      gate(
        "landmarks",
        "review",
        `Mean landmark error ${m} mm${mx}, above ${t.trePassMm} mm: check the alignment by eye.`,
      );
    else gate("landmarks", "fail", `Mean landmark error ${m} mm${mx}, above ${t.treReviewMm} mm.`);
  }

  const ov = `${(100 * input.overlapFraction).toFixed(1)}%`;
  if (input.overlapFraction < t.overlapFail)
    gate("overlap", "fail", `Only ${ov} of the samples overlap the other image's body.`);
  else if (input.overlapFraction < t.overlapReview)
    gate("overlap", "review", `Only ${ov} of the samples overlap the other image's body.`);
  else gate("overlap", "pass", `${ov} of the samples overlap the other image's body.`);

  const gain = input.metricFinal - input.metricStart;
  if (!(gain > 1e-9))
    gate("metric", "review", "The similarity metric did not improve on the starting position.");
  else
    gate(
      "metric",
      "pass",
      `The similarity metric rose from ${input.metricStart.toFixed(4)} to ${input.metricFinal.toFixed(4)}.`,
    );

  if (!input.converged)
    gate(
      "convergence",
      "review",
      `The optimiser stopped before converging on the finest level (${input.convergenceReason}).`,
    );
  else gate("convergence", "pass", "The optimiser converged on every level.");

  const rot = rotationAngleDeg(normalizedRotation(input.matrix));
  const scaleBad = input.scale.some((s) => !(s >= t.minScale && s <= t.maxScale));
  if (rot > t.maxRotationDeg)
    gate(
      "plausibility",
      "fail",
      `The rotation of ${rot.toFixed(1)} degrees is implausible (above ${t.maxRotationDeg}).`,
    );
  else if (scaleBad)
    gate(
      "plausibility",
      "fail",
      `Scale factors ${input.scale.map((s) => s.toFixed(3)).join(", ")} lie outside ${t.minScale}-${t.maxScale}.`,
    );
  else gate("plausibility", "pass", `Rotation ${rot.toFixed(1)} degrees; scale factors plausible.`);

  if (input.inverseConsistencyMm !== null) {
    const ic = input.inverseConsistencyMm.toFixed(2);
    if (input.inverseConsistencyMm > t.inverseConsistencyReviewMm)
      gate(
        "inverse consistency",
        "review",
        `Registering the other way round disagrees by up to ${ic} mm in the implant region (above ${t.inverseConsistencyReviewMm} mm).`,
      );
    else
      gate(
        "inverse consistency",
        "pass",
        `Registering the other way round agrees within ${ic} mm in the implant region.`,
      );
  }

  if (
    input.runnerUpGap !== undefined &&
    input.runnerUpGap !== null &&
    input.runnerUpDistanceMm !== undefined &&
    input.runnerUpDistanceMm !== null &&
    input.bestSearchCost
  ) {
    const rel = input.runnerUpGap / Math.abs(input.bestSearchCost);
    if (rel < t.ambiguityGap && input.runnerUpDistanceMm > t.ambiguityMm) {
      gate(
        "ambiguity",
        "review",
        `A second position ${input.runnerUpDistanceMm.toFixed(0)} mm away fits almost as well (within ${(100 * rel).toFixed(1)}%).`,
      );
    }
  }

  let verdict: Verdict = "pass";
  for (const g of gates) if (RANK[g.verdict] > RANK[verdict]) verdict = g.verdict;
  const reasons = gates.filter((g) => g.verdict !== "pass").map((g) => g.reason);
  if (verdict === "pass") reasons.push(...gates.map((g) => g.reason));
  return { verdict, reasons, gates };
}

/** The rotation part of an affine (columns normalised), for the angle check. */
function normalizedRotation(m: Mat4): Mat4 {
  const out = new Float64Array(m);
  for (let c = 0; c < 3; c++) {
    const n = Math.hypot(m[c], m[4 + c], m[8 + c]) || 1;
    out[c] /= n;
    out[4 + c] /= n;
    out[8 + c] /= n;
  }
  return out;
}
