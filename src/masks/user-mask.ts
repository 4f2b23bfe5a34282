/**
 * User masks (`--fixed-mask IMG`, `--moving-mask IMG`): any nonzero voxel of the mask image
 * is inside. The mask image has its own grid; it is brought onto the grid needed (an image's
 * pyramid level) by nearest-neighbour resampling in world space (the mask and its image share
 * the world: no transform between them). Points of the target grid outside the mask image are
 * outside the mask.
 */
import { CoxaError } from "../common/errors.js";
import { identity } from "../geometry/mat4.js";
import { readNifti } from "../image/nifti-read.js";
import { Volume } from "../image/volume.js";
import { resampleOntoSync, type TargetGrid } from "../resample/resample.js";
import { countNonzero } from "./morphology.js";

/**
 * A 0/1 mask volume from any image: nonzero (and not NaN) = inside.
 * @param image - mask image in its own world geometry
 * @param name - file name for messages
 * @throws CoxaError BAD_MASK naming the file when no voxel is nonzero
 */
export function binaryMaskVolume(image: Volume, name = "mask"): Volume<Uint8Array> {
  const data = image.data;
  const out = new Uint8Array(image.count);
  let count = 0;
  for (let q = 0; q < out.length; q++) {
    const v = data[q];
    if (v !== 0 && v === v) {
      out[q] = 1;
      count++;
    }
  }
  if (count === 0) throw new CoxaError("BAD_MASK", "mask is empty (no nonzero voxel)", name);
  return new Volume(image.dims, out, image.indexToWorld);
}

/**
 * Read a user mask image.
 * @param path - NIfTI file
 * @throws CoxaError from readNifti (naming the file), BAD_MASK when the mask is empty
 */
export function readUserMask(path: string): Volume<Uint8Array> {
  return binaryMaskVolume(readNifti(path).volume, path);
}

/**
 * A 0/1 mask on `grid`, nearest-neighbour from a mask volume in the same world.
 * @param mask - 0/1 mask volume
 * @param grid - target grid (dims, index -> world)
 * @param name - file name for messages
 * @throws CoxaError BAD_MASK when the mask does not cover any voxel of the grid
 */
export function maskOntoGrid(mask: Volume<Uint8Array>, grid: TargetGrid, name = "mask"): Uint8Array {
  const { volume } = resampleOntoSync(mask, grid, identity(), {
    interp: "nearest",
    fill: 0,
    datatype: "uint8",
  });
  const data = volume.data as Uint8Array;
  if (countNonzero(data) === 0) {
    throw new CoxaError("BAD_MASK", "mask covers no voxel of the image it belongs to", name);
  }
  return data;
}
