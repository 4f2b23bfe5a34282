/**
 * Estimate of the MR signal void around an implant: metal gives no MR signal and distorts the
 * field around it, so the MR is dark (like air) in a region larger than the metal.
 *
 * Method: voxels inside the (hole-filled) MR body mask whose intensity is below
 * darkFraction x the tissue level (the mean intensity of body voxels above the body
 * threshold, Otsu) are candidates; a morphological opening by a ball
 * of openingMm removes thin dark structures (cortical bone, tendons, fascia), keeping thick
 * dark regions; 6-connected components smaller than minVolumeMm3 are dropped; when a hint is
 * given (where the CT metal maps on this grid, from the current transform estimate), only
 * components within nearMm of the hint are kept. The result is dilated by marginMm.
 * Thresholds are heuristics chosen on coxa's synthetic phantoms (no source).
 *
 * Conventions: masks are 0/1 Uint8Array on the MR volume's grid (usually a pyramid level).
 */
import type { Volume } from "../image/volume.js";
import { bodyMaskMr } from "./body.js";
import { labelComponents } from "./components.js";
import { dilateMm, erodeMm, squaredDistanceMm } from "./morphology.js";

/** Options of mrSignalVoid. */
export interface MrVoidOptions {
  /** MR body mask on the same grid (hole-filled); computed by Otsu when absent. */
  body?: Uint8Array;
  /** Body threshold in the MR unit; Otsu when absent. */
  threshold?: number;
  /** Candidates are below darkFraction x the tissue level (mean of body voxels above threshold); default 0.25. */
  darkFraction?: number;
  /** Opening radius in mm (removes dark structures thinner than about twice it); default 3. */
  openingMm?: number;
  /** Smallest void component kept, mm^3; default 500. */
  minVolumeMm3?: number;
  /** Where the metal is expected on this grid (0/1), e.g. the CT metal mapped by the current transform. */
  near?: Uint8Array;
  /** With `near`: keep components with a voxel within this distance (mm) of it; default 20. */
  nearMm?: number;
  /** Final dilation in mm; default 0. */
  marginMm?: number;
}

/** The void estimate. */
export interface MrVoid {
  mask: Uint8Array;
  voxels: number;
  /** Sizes (voxels) of the void components kept, before the margin. */
  componentSizes: number[];
  /** Body threshold used (MR unit). */
  threshold: number;
  /** Intensity below which a body voxel counted as dark (MR unit). */
  darkBelow: number;
}

/**
 * Estimate the MR signal void.
 * @param volume - MR on its grid (a pyramid level)
 * @param options - see MrVoidOptions
 */
export function mrSignalVoid(volume: Volume, options: MrVoidOptions = {}): MrVoid {
  const dims = volume.dims;
  const spacing = volume.spacingMm;
  let threshold = options.threshold;
  let body = options.body;
  if (!body || threshold === undefined) {
    const b = bodyMaskMr(volume, threshold);
    body ??= b.mask;
    threshold ??= b.threshold;
  }
  const data = volume.data;
  let sum = 0;
  let count = 0;
  for (let q = 0; q < data.length; q++) {
    if (body[q] !== 0 && data[q] > threshold) {
      sum += data[q];
      count++;
    }
  }
  const tissueLevel = count > 0 ? sum / count : threshold;
  const cut = (options.darkFraction ?? 0.25) * tissueLevel;
  const dark = new Uint8Array(volume.count);
  for (let q = 0; q < dark.length; q++) dark[q] = body[q] !== 0 && data[q] < cut ? 1 : 0;
  const openingMm = options.openingMm ?? 3;
  const opened =
    openingMm > 0 ? dilateMm(erodeMm(dark, dims, spacing, openingMm), dims, spacing, openingMm) : dark;
  for (let q = 0; q < opened.length; q++) opened[q] &= dark[q];
  const { labels, sizes } = labelComponents(opened, dims, 6);
  const voxelMm3 = spacing[0] * spacing[1] * spacing[2];
  const minVoxels = Math.ceil((options.minVolumeMm3 ?? 500) / voxelMm3);
  const keep = new Uint8Array(sizes.length + 1);
  for (let l = 1; l <= sizes.length; l++) keep[l] = sizes[l - 1] >= minVoxels ? 1 : 0;
  if (options.near) {
    const nearMm = options.nearMm ?? 20;
    const d2 = squaredDistanceMm(options.near, dims, spacing);
    const close = new Uint8Array(sizes.length + 1);
    for (let q = 0; q < labels.length; q++)
      if (labels[q] > 0 && d2[q] <= nearMm * nearMm) close[labels[q]] = 1;
    for (let l = 1; l <= sizes.length; l++) keep[l] &= close[l];
  }
  let mask: Uint8Array = new Uint8Array(volume.count);
  for (let q = 0; q < mask.length; q++) mask[q] = keep[labels[q]] && labels[q] > 0 ? 1 : 0;
  const componentSizes: number[] = [];
  for (let l = 1; l <= sizes.length; l++) if (keep[l]) componentSizes.push(sizes[l - 1]);
  const marginMm = options.marginMm ?? 0;
  if (marginMm > 0) mask = dilateMm(mask, dims, spacing, marginMm);
  let voxels = 0;
  for (let q = 0; q < mask.length; q++) voxels += mask[q];
  return { mask, voxels, componentSizes, threshold, darkBelow: cut };
}
