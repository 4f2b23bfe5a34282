/**
 * Body masks: the patient as one solid region, without the air around it.
 *  - CT: HU > -500 (between air, -1000, and fat, about -100; common practice, no source),
 *  - MR: intensity above the Otsu (1979) threshold of the image histogram (src/masks/otsu.ts),
 * then in both cases the largest 6-connected component (drops the table, cables, noise) and
 * holes filled, in 3-D and slice by slice in the slices across the voxel axis closest to the
 * world superior-inferior axis (gas in the bowel, dark cortical bone and signal voids inside).
 *
 * Conventions: masks are 0/1 Uint8Array on the volume's own grid (usually a pyramid level;
 * the body mask of the full-resolution clinical CT is not needed and would be slow).
 */
import type { Mat4 } from "../geometry/mat4.js";
import type { Dims, Volume } from "../image/volume.js";
import { largestComponent } from "./components.js";
import { fillHoles, fillHolesSlices, thresholdMask } from "./morphology.js";
import { otsuThreshold } from "./otsu.js";

/** Default CT body threshold in HU. */
export const DEFAULT_BODY_HU = -500;

/** The voxel axis (0, 1, 2) whose direction is closest to world z (superior-inferior). */
export function axialAxis(indexToWorld: Mat4): 0 | 1 | 2 {
  let best: 0 | 1 | 2 = 2;
  let bestCos = -1;
  for (let c = 0; c < 3; c++) {
    const norm = Math.hypot(indexToWorld[c], indexToWorld[4 + c], indexToWorld[8 + c]);
    const cos = Math.abs(indexToWorld[8 + c]) / (norm || 1);
    if (cos > bestCos) {
      bestCos = cos;
      best = c as 0 | 1 | 2;
    }
  }
  return best;
}

/**
 * Largest 6-connected component of `foreground`, holes filled in 3-D and per axial slice.
 * @param foreground - 0/1 candidate voxels
 * @param dims - grid
 * @param axis - slice normal for the 2-D fill (see axialAxis)
 */
export function solidLargestRegion(foreground: Uint8Array, dims: Dims, axis: 0 | 1 | 2): Uint8Array {
  const largest = largestComponent(foreground, dims, 6);
  return fillHolesSlices(fillHoles(largest, dims), dims, axis);
}

/**
 * CT body mask.
 * @param volume - CT in HU (any grid; a pyramid level is fast)
 * @param thresholdHu - voxels above it are tissue; default -500
 */
export function bodyMaskCt(volume: Volume, thresholdHu = DEFAULT_BODY_HU): Uint8Array {
  return solidLargestRegion(
    thresholdMask(volume.data, thresholdHu),
    volume.dims,
    axialAxis(volume.indexToWorld),
  );
}

/**
 * MR body mask by the Otsu threshold of the whole image.
 * @param volume - MR (any grid; a pyramid level is fast)
 * @param threshold - override of the Otsu threshold (image unit)
 * @returns the mask and the threshold used
 */
export function bodyMaskMr(volume: Volume, threshold?: number): { mask: Uint8Array; threshold: number } {
  const t = threshold ?? otsuThreshold(volume.data);
  return {
    mask: solidLargestRegion(thresholdMask(volume.data, t), volume.dims, axialAxis(volume.indexToWorld)),
    threshold: t,
  };
}
