/** What `coxa info` reports about an image: geometry, datatype, intensities, CT-likeness. */
import { sha256File } from "../common/hash.js";
import { toRows } from "../geometry/mat4.js";
import { countAtOrAbove, detectModality, type Modality } from "./modality.js";
import { type ReadNiftiOptions, readNifti } from "./nifti-read.js";
import { intensityStats } from "./volume.js";

export interface DescribeOptions extends ReadNiftiOptions {
  /** Metal threshold in HU for CT-like images; default 2500 (design.md). */
  metalHu?: number;
}

/** The `coxa info --json` document (snake_case keys, as in the contract). */
export interface ImageDescription {
  path: string;
  sha256: string;
  nifti_version: 1 | 2;
  shape: number[];
  frames: number;
  volume: number;
  spacing_mm: [number, number, number];
  index_to_world: number[][];
  affine_source: "sform" | "qform" | "pixdim";
  qform_code: number;
  sform_code: number;
  orientation: string;
  datatype: string;
  scl_slope: number;
  scl_inter: number;
  bounds_mm: { min: number[]; max: number[] };
  min: number;
  max: number;
  mean: number;
  modality: Modality;
  modality_reason: string;
  metal_hu?: number;
  metal_voxels?: number;
}

/**
 * Read an image and describe it.
 * @param path - NIfTI file
 * @throws CoxaError from readNifti
 */
export async function describeImage(path: string, options: DescribeOptions = {}): Promise<ImageDescription> {
  const { volume, header } = readNifti(path, options);
  const stats = intensityStats(volume.data);
  const modality = detectModality(volume.data);
  const metalHu = options.metalHu ?? 2500;
  const box = volume.boundsWorld();
  const out: ImageDescription = {
    path,
    sha256: await sha256File(path),
    nifti_version: header.version,
    shape: header.shape,
    frames: header.frames,
    volume: options.volume ?? 0,
    spacing_mm: volume.spacingMm,
    index_to_world: toRows(volume.indexToWorld),
    affine_source: header.affineSource,
    qform_code: header.qformCode,
    sform_code: header.sformCode,
    orientation: volume.orientation(),
    datatype: header.datatype,
    scl_slope: header.sclSlope,
    scl_inter: header.sclInter,
    bounds_mm: { min: box.min, max: box.max },
    min: stats.min,
    max: stats.max,
    mean: stats.mean,
    modality: modality.modality,
    modality_reason: modality.reason,
  };
  if (modality.modality === "ct") {
    out.metal_hu = metalHu;
    out.metal_voxels = countAtOrAbove(volume.data, metalHu);
  }
  return out;
}
