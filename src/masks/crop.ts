/**
 * Cropping a volume to the box that holds its content, keeping world geometry exact: the crop's
 * index-to-world matrix is the input's times a shift by the box's first voxel, so every kept
 * voxel stays where it was in world space.
 *
 * Used by the registration driver on a CT before the pyramid: the air around the patient
 * (often 40 % of a CT) is outside every mask the metrics use, and cropping it away makes every
 * later pass over the image that much shorter.
 */
import { sharedArray } from "../common/shared-arrays.js";
import { multiply, translation } from "../geometry/mat4.js";
import { allocate } from "../image/datatypes.js";
import { Volume } from "../image/volume.js";
import type { VoxelBox } from "./components.js";
import { thresholdBounds } from "./morphology.js";

/**
 * Box of the voxels above `threshold`, found on every `step`-th voxel along each axis and then
 * grown by `marginMm` (clamped to the grid).
 * @param volume - image
 * @param threshold - content is strictly above this value
 * @param marginMm - margin added on every side (mm; covers what the stride may miss)
 * @param step - stride of the scan (voxels, >= 1)
 * @returns the box, or undefined when no visited voxel is above the threshold
 */
export function contentBox(
  volume: Volume,
  threshold: number,
  marginMm: number,
  step = 2,
): VoxelBox | undefined {
  // Strictly above: the next representable value up is the ">=" threshold.
  const found = thresholdBounds(volume.data, volume.dims, nextUp(threshold), step);
  if (!found) return undefined;
  const sp = volume.spacingMm;
  const dims = volume.dims;
  const box: VoxelBox = { min: [0, 0, 0], max: [0, 0, 0] };
  for (let a = 0; a < 3; a++) {
    const m = Math.ceil(marginMm / sp[a]) + step;
    box.min[a] = Math.max(0, found.min[a] - m);
    box.max[a] = Math.min(dims[a], found.max[a] + m);
  }
  return box;
}

/** The smallest float64 above x (finite x). */
function nextUp(x: number): number {
  if (x === 0) return Number.MIN_VALUE;
  const b = new Float64Array([x]);
  const u = new BigInt64Array(b.buffer);
  u[0] += x > 0 ? 1n : -1n;
  return b[0];
}

/**
 * The voxels of `box` as a new volume with the same datatype and exact world geometry.
 * @param volume - image
 * @param box - voxel box inside the grid
 * @param shared - put the data on a SharedArrayBuffer (for worker threads)
 */
export function cropVolume(volume: Volume, box: VoxelBox, shared = false): Volume {
  const [nx, ny] = volume.dims;
  const cx = box.max[0] - box.min[0];
  const cy = box.max[1] - box.min[1];
  const cz = box.max[2] - box.min[2];
  const n = cx * cy * cz;
  const out = shared ? sharedArray(volume.datatype, n) : allocate(volume.datatype, n);
  const src = volume.data;
  for (let k = 0; k < cz; k++) {
    for (let j = 0; j < cy; j++) {
      const from = box.min[0] + nx * (box.min[1] + j + ny * (box.min[2] + k));
      out.set(src.subarray(from, from + cx) as never, cx * (j + cy * k));
    }
  }
  const affine = multiply(
    new Float64Array(16),
    volume.indexToWorld,
    translation(box.min[0], box.min[1], box.min[2]),
  );
  return new Volume([cx, cy, cz], out, affine);
}
