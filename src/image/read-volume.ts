/**
 * Reading an image that registration can use: one 3-D volume, more than one voxel along each
 * axis, at least two different finite intensities. Shared by every command that registers.
 */
import { CoxaError } from "../common/errors.js";
import { type NiftiImageRead, readNiftiAsync } from "./nifti-read.js";

/**
 * Read and check a registrable 3-D image.
 * @param path - NIfTI file
 * @throws CoxaError from readNifti, BAD_DIMS for 2-D or 4-D images, BAD_INPUT for an image with
 *   no finite or only one intensity (each naming the file)
 */
export async function readVolume3d(path: string): Promise<NiftiImageRead> {
  const img = await readNiftiAsync(path);
  const { shape, frames } = img.header;
  if (shape.length < 3 || shape.slice(0, 3).some((n) => n < 2)) {
    throw new CoxaError(
      "BAD_DIMS",
      `is not a 3-D image (shape ${shape.join(" x ")}); registration needs a volume`,
      path,
    );
  }
  if (frames > 1) {
    throw new CoxaError(
      "BAD_DIMS",
      `holds ${frames} volumes (shape ${shape.join(" x ")}); pass a single 3-D volume`,
      path,
    );
  }
  // Two different finite values are enough: stop at the first pair.
  const d = img.volume.data;
  let first = Number.NaN;
  let varied = false;
  for (let i = 0; i < d.length; i++) {
    const x = d[i];
    if (x !== x || x === Infinity || x === -Infinity) continue;
    if (first !== first) first = x;
    else if (x !== first) {
      varied = true;
      break;
    }
  }
  if (first !== first) throw new CoxaError("BAD_INPUT", "has no finite intensities", path);
  if (!varied)
    throw new CoxaError("BAD_INPUT", `has one intensity everywhere (${first}); nothing to register`, path);
  return img;
}
