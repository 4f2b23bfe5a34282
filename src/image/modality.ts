/**
 * Does an image look like CT in Hounsfield units? MR magnitudes are non-negative and have an
 * arbitrary scale (often above 2500), so the HU metal threshold must only be applied to an
 * image that has a CT-like value distribution:
 *  - some voxels at air/lung (-1100..-900 HU) or fat (-200..-30 HU): values MR does not produce,
 *  - a soft-tissue population (-200..300 HU),
 *  - almost nothing far outside the 12-bit scanner range (<= 3100 HU after clipping).
 * Thresholds are common practice for CT (no source) and were set on coxa's synthetic data.
 */
import type { VoxelArray } from "./datatypes.js";

export type Modality = "ct" | "mr" | "other";

export interface ModalityEvidence {
  modality: Modality;
  /** Share of voxels at air (-1100..-900) */
  airFraction: number;
  /** Share at fat (-200..-30) */
  fatFraction: number;
  /** Share at soft tissue (-200..300) */
  softTissueFraction: number;
  /** Share above 3100 */
  aboveRangeFraction: number;
  /** Share below -1100 (padding outside the field of view, e.g. -2048 or -3024) */
  paddingFraction: number;
  /** One sentence that says why. */
  reason: string;
}

/**
 * Guess whether intensities are CT in HU. Looks at up to ~1e6 voxels on a regular stride.
 * @param data - voxel values (after scl_slope/scl_inter)
 */
export function detectModality(data: VoxelArray): ModalityEvidence {
  const stride = Math.max(1, Math.floor(data.length / 1_000_000));
  let n = 0;
  let air = 0;
  let fat = 0;
  let soft = 0;
  let above = 0;
  let padding = 0;
  let negative = 0;
  for (let i = 0; i < data.length; i += stride) {
    const v = data[i];
    if (v !== v) continue;
    n++;
    if (v < -1100) padding++;
    else if (v <= -900) air++;
    if (v >= -200 && v <= -30) fat++;
    if (v >= -200 && v <= 300) soft++;
    if (v > 3100) above++;
    if (v < 0) negative++;
  }
  const inside = Math.max(1, n - padding);
  const e = {
    airFraction: air / inside,
    fatFraction: fat / inside,
    softTissueFraction: soft / inside,
    aboveRangeFraction: above / inside,
    paddingFraction: padding / Math.max(1, n),
  };
  const negativeShare = negative / Math.max(1, n);
  const isCt =
    e.airFraction + e.fatFraction >= 0.03 && e.softTissueFraction >= 0.05 && e.aboveRangeFraction < 0.005;
  if (isCt) {
    return {
      modality: "ct",
      ...e,
      reason: `looks like CT: ${pct(e.airFraction)} of voxels at air, ${pct(e.softTissueFraction)} at soft-tissue HU`,
    };
  }
  if (negativeShare < 0.01) {
    return {
      modality: "mr",
      ...e,
      reason: "looks like MR: no negative (air/fat HU) values, so intensities are not Hounsfield units",
    };
  }
  return { modality: "other", ...e, reason: "intensities match neither CT (HU) nor MR magnitude" };
}

function pct(x: number): string {
  return `${(100 * x).toFixed(1)}%`;
}

/** Count voxels at or above `thresholdHu`. */
export function countAtOrAbove(data: VoxelArray, thresholdHu: number): number {
  let count = 0;
  for (let i = 0; i < data.length; i++) if (data[i] >= thresholdHu) count++;
  return count;
}
