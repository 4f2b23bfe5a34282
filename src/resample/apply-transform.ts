/**
 * `coxa resample` as a library call: carry an image onto another image's grid through a stored
 * transform (transform.json, fixed world -> moving world). Resampling the MOVING image onto the
 * FIXED grid uses the matrix as stored; `inverse` resamples a fixed-space image onto a moving
 * grid. The output keeps the input's datatype (labels stay integers) unless `float` is set.
 */
import { resolve } from "node:path";
import { CoxaError } from "../common/errors.js";
import type { ProgressFn } from "../common/progress.js";
import { readTransform } from "../geometry/transform-file.js";
import { DATATYPES, type Datatype } from "../image/datatypes.js";
import { readNifti } from "../image/nifti-read.js";
import { writeNifti } from "../image/nifti-write.js";
import type { Interp } from "./kernels.js";
import { resampleOnto } from "./resample.js";

export interface ApplyTransformOptions {
  /** Image to resample (NIfTI). */
  image: string;
  /** Image whose grid the output takes. */
  onto: string;
  /** transform.json. */
  transform: string;
  /** Output NIfTI (.nii or .nii.gz). */
  out: string;
  interp?: Interp;
  /** Use the inverse (moving world -> fixed world) of the stored transform. */
  inverse?: boolean;
  /** Write float32 whatever the input datatype. */
  float?: boolean;
  /** Value where the image has no data; default 0. */
  fill?: number;
  threads?: number;
  onProgress?: ProgressFn;
}

export interface ApplyTransformResult {
  out: string;
  datatype: Datatype;
  shape: [number, number, number];
  /** Share of output voxels that received data. */
  insideFraction: number;
}

/**
 * Resample `image` onto the grid of `onto` through the stored transform and write `out`.
 * @throws CoxaError for unreadable inputs, a bad transform file, or an output that would replace an input
 */
export async function applyTransformFile(options: ApplyTransformOptions): Promise<ApplyTransformResult> {
  const out = resolve(options.out);
  for (const p of [options.image, options.onto, options.transform]) {
    if (resolve(p) === out)
      throw new CoxaError("WOULD_OVERWRITE", "is an input and would be overwritten by --out", p);
  }
  if (!/\.nii(\.gz)?$/.test(out))
    throw new CoxaError("BAD_ARGUMENT", "output name must end in .nii or .nii.gz", options.out);
  const t = readTransform(options.transform);
  const src = readNifti(options.image);
  const grid = readNifti(options.onto).volume;
  const interp = options.interp ?? "linear";
  const stored: Datatype = src.header.scaled ? "float32" : src.header.datatype;
  const datatype: Datatype = options.float
    ? "float32"
    : DATATYPES[stored].integer || interp === "nearest"
      ? stored
      : "float32";
  const { volume, insideFraction } = await resampleOnto(
    src.volume,
    grid,
    options.inverse ? t.inverse : t.matrix,
    {
      interp,
      fill: options.fill ?? 0,
      datatype,
      threads: options.threads,
      onProgress: options.onProgress,
    },
  );
  writeNifti(out, volume, { datatype, description: "coxa resample" });
  return { out, datatype, shape: [volume.dims[0], volume.dims[1], volume.dims[2]], insideFraction };
}
