/**
 * Where to slice: the points of interest of a hip report (the implant and the other hip).
 *
 * - Implant: centroid of the metal mask on the fixed grid. When metal sits on both sides of the
 *   body's mid-sagittal plane (two implants), the side with more metal voxels is "the implant"
 *   and the other side's centroid is "the other hip".
 * - Other hip: otherwise the implant point mirrored across the mid-sagittal plane x = x_mid,
 *   i.e. (2 x_mid - x, y, z). This assumes the patient lies roughly square to the world x axis.
 * - Mid-sagittal plane: x of the body's centroid. Body = voxels above -300 HU for CT (common
 *   practice, no source) or above the Otsu (1979) threshold for other images ("A threshold
 *   selection method from gray-level histograms", IEEE SMC 9(1)).
 *
 * World = RAS+ mm; masks are on the fixed grid, i fastest (design.md).
 */
import { CoxaError } from "../common/errors.js";
import type { VoxelArray } from "../image/datatypes.js";
import type { Volume } from "../image/volume.js";

/** A world point in RAS mm. */
export type Vec3Mm = readonly [number, number, number];

/** A point the report slices through. */
export interface PointOfInterest {
  key: "implant" | "otherHip" | "centre";
  /** Section heading, e.g. "Through the implant". */
  title: string;
  /** World point, RAS mm. */
  mm: [number, number, number];
  /** How the point was chosen (one sentence). */
  how: string;
}

/** CT body threshold in HU (common practice, no source). */
export const CT_BODY_HU = -300;

/**
 * Otsu's threshold (between-class variance maximum) on a 256-bin histogram of the finite values.
 * @param data - intensities
 * @returns the threshold, or NaN for an image without finite values
 */
export function otsuThreshold(data: VoxelArray | ArrayLike<number>): number {
  let lo = Infinity;
  let hi = -Infinity;
  const stride = Math.max(1, Math.floor(data.length / 2_000_000));
  for (let p = 0; p < data.length; p += stride) {
    const v = data[p];
    if (v !== v || v === Infinity || v === -Infinity) continue;
    if (v < lo) lo = v;
    if (v > hi) hi = v;
  }
  if (!(lo <= hi)) return Number.NaN;
  if (lo === hi) return lo;
  const bins = 256;
  const hist = new Float64Array(bins);
  const scale = bins / (hi - lo);
  let total = 0;
  for (let p = 0; p < data.length; p += stride) {
    const v = data[p];
    if (v !== v || v === Infinity || v === -Infinity) continue;
    let b = Math.floor((v - lo) * scale);
    if (b >= bins) b = bins - 1;
    hist[b]++;
    total++;
  }
  let sumAll = 0;
  for (let b = 0; b < bins; b++) sumAll += b * hist[b];
  let weightBelow = 0;
  let sumBelow = 0;
  let best = -1;
  let bestBin = 0;
  for (let b = 0; b < bins - 1; b++) {
    weightBelow += hist[b];
    sumBelow += b * hist[b];
    const weightAbove = total - weightBelow;
    if (weightBelow === 0 || weightAbove === 0) continue;
    const meanBelow = sumBelow / weightBelow;
    const meanAbove = (sumAll - sumBelow) / weightAbove;
    const between = weightBelow * weightAbove * (meanBelow - meanAbove) ** 2;
    if (between > best) {
      best = between;
      bestBin = b;
    }
  }
  // Threshold at the upper edge of the last bin of the lower class.
  return lo + (bestBin + 1) / scale;
}

/**
 * Centroid (world mm) of the voxels of `volume` above `threshold`, or undefined when none is.
 * @param volume - image
 * @param threshold - strict lower bound (image unit)
 */
export function centroidAbove(volume: Volume, threshold: number): [number, number, number] | undefined {
  const [nx, ny, nz] = volume.dims;
  const data = volume.data;
  let si = 0;
  let sj = 0;
  let sk = 0;
  let count = 0;
  for (let k = 0, p = 0; k < nz; k++) {
    for (let j = 0; j < ny; j++) {
      let rowCount = 0;
      let rowI = 0;
      for (let i = 0; i < nx; i++, p++) {
        if (data[p] > threshold) {
          rowCount++;
          rowI += i;
        }
      }
      si += rowI;
      sj += rowCount * j;
      sk += rowCount * k;
      count += rowCount;
    }
  }
  if (count === 0) return undefined;
  const out = [0, 0, 0];
  volume.indexToWorldPoint(out, si / count, sj / count, sk / count);
  return [out[0], out[1], out[2]];
}

/**
 * World x (mm) of the body's mid-sagittal plane: x of the centroid of the body voxels, or of the
 * grid centre when no voxel passes the body threshold.
 * @param volume - the fixed image
 * @param isCt - true when intensities are HU
 */
export function midSagittalXmm(volume: Volume, isCt: boolean): number {
  const threshold = isCt ? CT_BODY_HU : otsuThreshold(volume.data);
  const c = Number.isFinite(threshold) ? centroidAbove(volume, threshold) : undefined;
  return (c ?? volume.centerWorld())[0];
}

/** Metal centroid on each side of the mid-sagittal plane. */
export interface MetalSides {
  /** Patient right: world x > x_mid. */
  right?: { mm: [number, number, number]; voxels: number };
  /** Patient left: world x <= x_mid. */
  left?: { mm: [number, number, number]; voxels: number };
}

/**
 * Centroids of the mask voxels on either side of x = midXmm.
 * @param mask - non-zero = metal, on the grid of `grid`
 * @param grid - the fixed image
 * @param midXmm - world x of the mid-sagittal plane
 * @throws CoxaError BAD_ARGUMENT when the mask does not match the grid
 */
export function metalCentroidsBySide(mask: Uint8Array, grid: Volume, midXmm: number): MetalSides {
  const [nx, ny, nz] = grid.dims;
  if (mask.length !== nx * ny * nz) {
    throw new CoxaError(
      "BAD_ARGUMENT",
      `metal mask has ${mask.length} voxels but the fixed grid has ${nx * ny * nz}`,
    );
  }
  const m = grid.indexToWorld;
  const sums = [new Float64Array(4), new Float64Array(4)]; // [right, left]: count, sum i, sum j, sum k
  for (let k = 0, p = 0; k < nz; k++) {
    for (let j = 0; j < ny; j++) {
      const xRow = m[1] * j + m[2] * k + m[3];
      for (let i = 0; i < nx; i++, p++) {
        if (mask[p] === 0) continue;
        const s = sums[xRow + m[0] * i > midXmm ? 0 : 1];
        s[0]++;
        s[1] += i;
        s[2] += j;
        s[3] += k;
      }
    }
  }
  const out: MetalSides = {};
  const names = ["right", "left"] as const;
  for (let side = 0; side < 2; side++) {
    const s = sums[side];
    if (s[0] === 0) continue;
    const p = [0, 0, 0];
    grid.indexToWorldPoint(p, s[1] / s[0], s[2] / s[0], s[3] / s[0]);
    out[names[side]] = { mm: [p[0], p[1], p[2]], voxels: s[0] };
  }
  return out;
}

/** Share of the larger side's metal that the other side must have to count as a second implant. */
export const SECOND_IMPLANT_SHARE = 0.1;

/**
 * The points a hip report slices through (see the module header for the rules).
 * @param fixed - the fixed image
 * @param options - given points (RAS mm), the metal mask on the fixed grid, whether fixed is CT
 * @returns one or two points: the implant and the other hip, or the body centre when there is no metal
 * @throws CoxaError BAD_ARGUMENT for non-finite given points or a mask of the wrong size
 */
export function choosePoints(
  fixed: Volume,
  options: { implant?: Vec3Mm; otherHip?: Vec3Mm; metalMask?: Uint8Array; fixedIsCt: boolean },
): PointOfInterest[] {
  for (const [name, p] of [
    ["implant", options.implant],
    ["otherHip", options.otherHip],
  ] as const) {
    if (p && !(p.length === 3 && p.every((v) => Number.isFinite(v)))) {
      throw new CoxaError("BAD_ARGUMENT", `report point ${name} is not three finite numbers`);
    }
  }
  let implant: PointOfInterest | undefined;
  let other: PointOfInterest | undefined;
  let midX: number | undefined;
  const mid = () => {
    if (midX === undefined) midX = midSagittalXmm(fixed, options.fixedIsCt);
    return midX;
  };
  if (options.implant) {
    implant = {
      key: "implant",
      title: "Through the implant",
      mm: [...options.implant],
      how: "given by the caller",
    };
  } else if (options.metalMask) {
    const sides = metalCentroidsBySide(options.metalMask, fixed, mid());
    const r = sides.right;
    const l = sides.left;
    const main = r && (!l || r.voxels >= l.voxels) ? r : l;
    const second = main === r ? l : r;
    if (main) {
      implant = {
        key: "implant",
        title: "Through the implant",
        mm: main.mm,
        how: `centroid of ${main.voxels} metal-mask voxels on the patient's ${main === r ? "right" : "left"}`,
      };
      if (!options.otherHip && second && second.voxels >= SECOND_IMPLANT_SHARE * main.voxels) {
        other = {
          key: "otherHip",
          title: "Through the other hip (metal there too)",
          mm: second.mm,
          how: `centroid of ${second.voxels} metal-mask voxels on the patient's ${second === r ? "right" : "left"}`,
        };
      }
    }
  }
  if (options.otherHip) {
    other = {
      key: "otherHip",
      title: "Through the other hip",
      mm: [...options.otherHip],
      how: "given by the caller",
    };
  } else if (implant && !other) {
    const x = mid();
    other = {
      key: "otherHip",
      title: "Through the other hip",
      mm: [2 * x - implant.mm[0], implant.mm[1], implant.mm[2]],
      how: `the implant point mirrored across the body's mid-sagittal plane x = ${x.toFixed(1)} mm`,
    };
  }
  const points: PointOfInterest[] = [];
  if (implant) points.push(implant);
  if (other) points.push(other);
  if (points.length === 0) {
    const threshold = options.fixedIsCt ? CT_BODY_HU : otsuThreshold(fixed.data);
    const c =
      (Number.isFinite(threshold) ? centroidAbove(fixed, threshold) : undefined) ?? fixed.centerWorld();
    points.push({
      key: "centre",
      title: "Through the body centre (no implant point known)",
      mm: c,
      how: "centroid of the body voxels of the fixed image",
    });
  }
  return points;
}
