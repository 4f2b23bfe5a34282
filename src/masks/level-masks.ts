/**
 * The masks of one image on every pyramid level, ready for the metrics: the convenient
 * constructor the registration driver calls once per image.
 *
 * Per level, `include` = body AND user mask AND NOT metal, where
 *  - metal (CT only: the image looks like CT, or the caller says so) is the HU metal mask
 *    dilated by its margin at FULL resolution (src/masks/metal.ts), carried to each level
 *    conservatively: a level voxel is metal when any full-resolution voxel of its block is
 *    (the level grids are exact block reductions of the full-resolution grid);
 *  - body is computed once on the level whose step is closest to `bodyGridMm` (default 8 mm,
 *    the coarse level: components and hole filling are cheap there), then carried to the other
 *    levels by nearest neighbour in world space and refined there: level voxels that map to
 *    the coarse body's interior (the body eroded by one coarse voxel) are body; those that map
 *    to the band between that and the body dilated by one coarse voxel are body when their own
 *    value passes the body threshold (so the skin boundary is as sharp as the level); the rest
 *    is outside. Holes closer than one coarse voxel to the skin may stay open;
 *  - the user mask (any nonzero voxel = inside) is resampled by nearest neighbour onto each
 *    level grid;
 *  - for an MR image, `mrVoid: true` adds the signal-void estimate (src/masks/mr-void.ts,
 *    without a metal hint) to the excluded region.
 * Conventions: 0/1 Uint8Array masks on each level's grid, storage i fastest.
 */
import { CoxaError } from "../common/errors.js";
import type { ProgressFn } from "../common/progress.js";
import { identity } from "../geometry/mat4.js";
import { detectModality, type Modality } from "../image/modality.js";
import type { Dims, Volume } from "../image/volume.js";
import { blockDims } from "../pyramid/blocks.js";
import type { Pyramid, PyramidLevel } from "../pyramid/pyramid.js";
import { resampleOntoSync } from "../resample/resample.js";
import { bodyMaskCt, bodyMaskMr, DEFAULT_BODY_HU } from "./body.js";
import type { VoxelBox } from "./components.js";
import { DEFAULT_METAL_HU, DEFAULT_METAL_MARGIN_MM, type MetalMask, metalMask } from "./metal.js";
import { countNonzero, step6 } from "./morphology.js";
import { mrSignalVoid } from "./mr-void.js";

/** Options of prepareLevelMasks. */
export interface LevelMaskOptions {
  /** Modality of the image; detected from the intensities when absent (src/image/modality.ts). */
  modality?: Modality;
  /** Why `modality` holds (e.g. a detection made by the caller); default "as given". */
  modalityReason?: string;
  /** Build and exclude the metal mask (CT only); default true (`--no-metal-mask` sets false). */
  metalMask?: boolean;
  /** Metal threshold (HU); default 2500. */
  metalHu?: number;
  /** Metal margin (mm); default 5. */
  metalMarginMm?: number;
  /** Smallest metal component kept (mm^3); default 1. */
  minMetalComponentMm3?: number;
  /** Restrict to the body mask; default true. */
  body?: boolean;
  /** CT body threshold (HU); default -500. */
  bodyHu?: number;
  /** Step (mm) of the level on which the body mask is computed; default 8. */
  bodyGridMm?: number;
  /** User mask volume (0/1 or any nonzero), in the image's world; see readUserMask. */
  userMask?: Volume;
  /** Name of the user mask file, for messages. */
  userMaskName?: string;
  /** MR only: exclude the estimated signal void too; default false. */
  mrVoid?: boolean;
  /** Progress of the "masks" stage. */
  onProgress?: ProgressFn;
}

/** Masks of one pyramid level. */
export interface LevelMasks {
  /** Samples may be taken here (body AND user AND NOT excluded). */
  include: Uint8Array;
  body: Uint8Array | undefined;
  /** Excluded region: metal and margin (CT) or signal void (MR), when built. */
  excluded: Uint8Array | undefined;
  user: Uint8Array | undefined;
  /** Voxels of `include`. */
  includeVoxels: number;
}

/** Masks of one image on every level, plus what was decided and measured. */
export interface ImageMasks {
  modality: Modality;
  /** One sentence: why this modality (detected or given). */
  modalityReason: string;
  /** Whether a metal (or MR void) exclusion was applied. */
  metalApplied: boolean;
  /** The dilated metal mask, a crop of the full-resolution grid (CT with metal masking). */
  metal?: MetalMask;
  levels: LevelMasks[];
}

/**
 * Build the masks of `volume` on every level of `pyramid` (built from the same volume).
 * @param volume - full-resolution image
 * @param pyramid - its pyramid (src/pyramid/pyramid.ts)
 * @param options - see LevelMaskOptions
 * @throws CoxaError BAD_MASK (naming the file) when the user mask leaves no voxel on the finest level
 */
export function prepareLevelMasks(
  volume: Volume,
  pyramid: Pyramid,
  options: LevelMaskOptions = {},
): ImageMasks {
  let modality = options.modality;
  let modalityReason: string;
  if (modality) modalityReason = options.modalityReason ?? `modality ${modality} as given`;
  else {
    const evidence = detectModality(volume.data);
    modality = evidence.modality;
    modalityReason = evidence.reason;
  }
  const levels = pyramid.levels;
  const wantMetal = options.metalMask ?? true;
  let metal: MetalMask | undefined;
  if (wantMetal && modality === "ct") {
    metal = metalMask(volume, {
      metalHu: options.metalHu ?? DEFAULT_METAL_HU,
      marginMm: options.metalMarginMm ?? DEFAULT_METAL_MARGIN_MM,
      minComponentMm3: options.minMetalComponentMm3,
      search: pyramid.highValues,
    });
    options.onProgress?.({ stage: "masks", fraction: 0.4 });
  }
  // Body on one level, carried to the others.
  let bodies: (Uint8Array | undefined)[] = levels.map(() => undefined);
  let mrThreshold: number | undefined;
  if (options.body ?? true) {
    const bi = nearestLevel(levels, options.bodyGridMm ?? 8);
    const src = levels[bi].volume;
    let body: Uint8Array;
    let threshold: number;
    if (modality === "ct") {
      threshold = options.bodyHu ?? DEFAULT_BODY_HU;
      body = bodyMaskCt(src, threshold);
    } else {
      const b = bodyMaskMr(src);
      body = b.mask;
      threshold = b.threshold;
      mrThreshold = b.threshold;
    }
    // 0 outside, 1 boundary band (decided by each level's own threshold), 2 interior.
    const interior = step6(body, src.dims, false);
    const grown = step6(body, src.dims, true);
    const bands = new Uint8Array(body.length);
    for (let q = 0; q < bands.length; q++) bands[q] = grown[q] + interior[q];
    bodies = levels.map((lv, l) => (l === bi ? body : refineBody(bands, levels[bi], lv, threshold)));
  }
  options.onProgress?.({ stage: "masks", fraction: 0.7 });
  // The MR void, like the body, is found once (on the level nearest bodyGridMm: it is a thick
  // region, so that resolution suffices) and carried to the other levels by nearest neighbour.
  let voids: Uint8Array[] | undefined;
  if (wantMetal && modality === "mr" && options.mrVoid) {
    const vi = nearestLevel(levels, VOID_GRID_MM);
    const src = levels[vi].volume;
    const mask = mrSignalVoid(src, { body: bodies[vi], threshold: mrThreshold }).mask;
    voids = levels.map((lv, l) => (l === vi ? mask : transfer(mask, levels[vi], lv)));
  }
  const out: LevelMasks[] = [];
  for (let l = 0; l < levels.length; l++) {
    const lv = levels[l].volume;
    let excluded: Uint8Array | undefined;
    if (metal?.box) excluded = metalOnLevel(metal.mask, metal.box, volume.dims, levels[l].factors);
    else if (metal) excluded = new Uint8Array(lv.count);
    if (voids) excluded = voids[l];
    let user: Uint8Array | undefined;
    if (options.userMask) {
      user = resampleOntoSync(options.userMask, lv, identity(), {
        interp: "nearest",
        datatype: "uint8",
        fill: 0,
      }).volume.data as Uint8Array;
      for (let q = 0; q < user.length; q++) user[q] = user[q] !== 0 ? 1 : 0;
    }
    const body = bodies[l];
    const { include, count } = combineInclude(lv.data, body, user, excluded);
    out.push({ include, body, excluded, user, includeVoxels: count });
  }
  if (options.userMask) {
    const finest = levels.reduce((best, lv, l) => (lv.stepMm < levels[best].stepMm ? l : best), 0);
    if (out[finest].user && countNonzero(out[finest].user!) === 0) {
      throw new CoxaError(
        "BAD_MASK",
        "mask covers no voxel of the image it belongs to",
        options.userMaskName,
      );
    }
  }
  options.onProgress?.({ stage: "masks", fraction: 1 });
  const result: ImageMasks = {
    modality,
    modalityReason,
    metalApplied: !!metal || (wantMetal && modality === "mr" && !!options.mrVoid),
    levels: out,
  };
  if (metal) result.metal = metal;
  return result;
}

/** include = body AND user AND NOT excluded AND the voxel value is not NaN; one pass, with its count. */
function combineInclude(
  data: Float32Array,
  body: Uint8Array | undefined,
  user: Uint8Array | undefined,
  excluded: Uint8Array | undefined,
): { include: Uint8Array; count: number } {
  const n = data.length;
  const include = new Uint8Array(n);
  let count = 0;
  if (body && excluded && !user) {
    // The usual case (CT with metal), kept branch-free.
    for (let q = 0; q < n; q++) {
      const v = body[q] & (excluded[q] ^ 1) & (data[q] === data[q] ? 1 : 0);
      include[q] = v;
      count += v;
    }
    return { include, count };
  }
  const ones = new Uint8Array(0);
  const b = body ?? ones;
  const u = user ?? ones;
  const e = excluded ?? ones;
  const hasB = body !== undefined;
  const hasU = user !== undefined;
  const hasE = excluded !== undefined;
  for (let q = 0; q < n; q++) {
    const v = (hasB ? b[q] : 1) & (hasU ? u[q] : 1) & (hasE ? e[q] ^ 1 : 1) & (data[q] === data[q] ? 1 : 0);
    include[q] = v;
    count += v;
  }
  return { include, count };
}

/** Body on another level from the coarse band labels (0 out, 1 band, 2 interior) and the level's values. */
function refineBody(bands: Uint8Array, from: PyramidLevel, to: PyramidLevel, threshold: number): Uint8Array {
  const lab = transfer(bands, from, to);
  const data = to.volume.data;
  for (let q = 0; q < lab.length; q++) {
    const b = lab[q];
    lab[q] = b === 2 || (b === 1 && data[q] > threshold) ? 1 : 0;
  }
  return lab;
}

/** Nearest-neighbour transfer of a 0/1 mask between two grids of the same world. */
/** Step (mm) of the level the MR signal void is estimated on. */
const VOID_GRID_MM = 4;

/** Index of the level whose step is closest (in ratio) to `targetMm`. */
function nearestLevel(levels: readonly { stepMm: number }[], targetMm: number): number {
  let best = 0;
  for (let l = 1; l < levels.length; l++) {
    if (Math.abs(Math.log(levels[l].stepMm / targetMm)) < Math.abs(Math.log(levels[best].stepMm / targetMm)))
      best = l;
  }
  return best;
}

/**
 * Nearest-neighbour transfer of a 0/1 mask between two levels of one pyramid. Both grids are
 * block reductions of the same full-resolution grid, so the nearest `from` voxel of a `to`
 * voxel is found per axis, in full-resolution index units (a `to` centre F_t i + (F_t - 1)/2
 * lies at from-index (c - (F_f - 1)/2) / F_f, rounded; beyond half a voxel outside: 0).
 */
function transfer(mask: Uint8Array, from: PyramidLevel, to: PyramidLevel): Uint8Array {
  const fd = from.volume.dims;
  const td = to.volume.dims;
  const lut = [0, 1, 2].map((a) => {
    const out = new Int32Array(td[a]);
    const ft = to.factors[a];
    const ff = from.factors[a];
    for (let i = 0; i < td[a]; i++) {
      const x = (ft * i + (ft - 1) / 2 - (ff - 1) / 2) / ff;
      out[i] = x >= -0.5 && x <= fd[a] - 0.5 ? Math.min(fd[a] - 1, Math.floor(x + 0.5)) : -1;
    }
    return out;
  });
  const [lx, ly, lz] = lut;
  const [nx, ny, nz] = td;
  const out = new Uint8Array(nx * ny * nz);
  for (let k = 0, q = 0; k < nz; k++) {
    const K = lz[k];
    for (let j = 0; j < ny; j++, q += nx) {
      const J = ly[j];
      if (K < 0 || J < 0) continue;
      const row = fd[0] * (J + fd[1] * K);
      for (let i = 0; i < nx; i++) {
        const I = lx[i];
        if (I >= 0) out[q + i] = mask[row + I];
      }
    }
  }
  return out;
}

/**
 * A full-resolution 0/1 mask given as a crop (`mask` on voxel box `box`) on a block-reduced
 * grid: a level voxel is set when any full-resolution voxel of its block is; only the blocks
 * meeting the box are visited.
 * @param mask - 0/1 crop, dims box.max - box.min, i fastest
 * @param box - the crop's voxel box on the full-resolution grid
 * @param dims - full-resolution grid
 * @param factors - block factors of the level
 */
export function metalOnLevel(
  mask: Uint8Array,
  box: VoxelBox,
  dims: Dims,
  factors: readonly [number, number, number],
): Uint8Array {
  const [ox, oy, oz] = blockDims(dims, factors);
  const out = new Uint8Array(ox * oy * oz);
  const [fx, fy, fz] = factors;
  const cx = box.max[0] - box.min[0];
  const cy = box.max[1] - box.min[1];
  const lo = [0, 0, 0];
  const hi = [0, 0, 0];
  const o = [ox, oy, oz];
  for (let a = 0; a < 3; a++) {
    lo[a] = Math.floor(box.min[a] / factors[a]);
    hi[a] = Math.min(o[a], Math.ceil(box.max[a] / factors[a]));
  }
  for (let kk = lo[2]; kk < hi[2]; kk++)
    for (let jj = lo[1]; jj < hi[1]; jj++)
      for (let ii = lo[0]; ii < hi[0]; ii++) {
        const i0 = Math.max(ii * fx, box.min[0]) - box.min[0];
        const i1 = Math.min((ii + 1) * fx, box.max[0]) - box.min[0];
        const j0 = Math.max(jj * fy, box.min[1]) - box.min[1];
        const j1 = Math.min((jj + 1) * fy, box.max[1]) - box.min[1];
        const k0 = Math.max(kk * fz, box.min[2]) - box.min[2];
        const k1 = Math.min((kk + 1) * fz, box.max[2]) - box.min[2];
        let hit = 0;
        for (let k = k0; k < k1 && !hit; k++)
          for (let j = j0; j < j1 && !hit; j++) {
            const row = cx * (j + cy * k);
            for (let i = i0; i < i1; i++)
              if (mask[row + i] !== 0) {
                hit = 1;
                break;
              }
          }
        out[ii + ox * (jj + oy * kk)] = hit;
      }
  return out;
}
