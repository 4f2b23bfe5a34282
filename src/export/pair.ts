/**
 * `coxa pair`: the two-channel training export of an aligned CT + MR case.
 *
 * Conventions (design.md): the stored transform maps FIXED (CT) world to MOVING (MR) world,
 * x_mr = T · x_ct; the MR is resampled onto the CT grid by evaluating it at T(x) for every CT
 * voxel centre x (trilinear, src/resample). Everything is on the CT grid, voxels i fastest
 * (flat index i + nx * (j + ny * k)), the CT's index-to-world affine unchanged.
 *
 * Outputs in OUT (each written atomically, pair.json last):
 *  - pair.nii.gz: 4-D NIfTI-1 float32, volume 0 = CT (HU, or 0..1 with `normalize: "window"`),
 *    volume 1 = MR resampled (0 outside the MR field of view);
 *  - metal.nii.gz: uint8 0/1 metal mask of the CT: voxels >= metalHu (default 2500 HU) in
 *    26-connected components of at least 1 mm^3, NOT dilated (margin 0 mm; the registration's
 *    safety margin is a matter of the metric, not of the training target);
 *  - pair.json: channels, grids, transform hash (transformHash of ../geometry/transform-file.ts),
 *    input hashes, normalisation parameters, intensity statistics, mask sizes;
 *  - with `slices`: slices/slice-NNNN.npy (NumPy format 1.0, float32, shape [3, rows, cols],
 *    channels CT, MR, metal) for every slice that holds body, and slices.csv.
 *
 * Slices are taken across the CT voxel axis closest to world z (src/masks/body.ts axialAxis;
 * axis k for an axial-first grid). In a slice, rows run along the higher-numbered of the two
 * other voxel axes and columns along the lower one, without flips: for an axial-first grid
 * element [c, r, q] of slice s is voxel (i = q, j = r, k = s) — the in-memory order of the
 * NIfTI, so nibabel's `img.dataobj[q, r, s]` is the same voxel. The body is the CT body mask
 * (HU > -500, largest 6-connected component, holes filled; src/masks/body.ts). A slice is
 * written when its body fraction exceeds `minBodyFraction` (default 0: any body voxel).
 */
import { existsSync, mkdirSync, readdirSync, realpathSync, rmSync, statSync } from "node:fs";
import { basename, join, resolve } from "node:path";
import { writeFileAtomic, writeJsonAtomic } from "../common/atomic.js";
import { csvField } from "../common/csv.js";
import { CoxaError } from "../common/errors.js";
import { sha256File } from "../common/hash.js";
import type { ProgressFn } from "../common/progress.js";
import { softwareInfo } from "../common/version.js";
import { toRows } from "../geometry/mat4.js";
import { checkTransformImages, readTransform, transformHash } from "../geometry/transform-file.js";
import { detectModality } from "../image/modality.js";
import { readNifti } from "../image/nifti-read.js";
import { writeNifti } from "../image/nifti-write.js";
import { Volume } from "../image/volume.js";
import { axialAxis, bodyMaskCt, DEFAULT_BODY_HU } from "../masks/body.js";
import { DEFAULT_METAL_HU, expandMetalMask, metalMask } from "../masks/metal.js";
import { resampleOnto } from "../resample/resample.js";
import {
  applyUnitWindow,
  type ChannelStats,
  channelStats,
  ctUnitWindow,
  DEFAULT_CT_LEVEL_HU,
  DEFAULT_CT_WIDTH_HU,
  DEFAULT_MR_PERCENTILES,
  mrUnitWindow,
} from "./normalize.js";
import { writeNpy } from "./npy.js";

/** Normalisation of the exported channels. */
export type PairNormalize = "none" | "window";

/** Options of exportPair (the CLI's flags, camelCase). */
export interface PairOptions {
  /** CT image (HU), the fixed image of the transform. */
  fixed: string;
  /** MR image, the moving image of the transform. */
  moving: string;
  /** transform.json mapping fixed (CT) world to moving (MR) world. */
  transform: string;
  /** Output directory (created if absent). */
  out: string;
  /** Also write axial .npy slices and slices.csv. Default false. */
  slices?: boolean;
  /** "none" (default): CT in HU, MR in its own unit; "window": both mapped to 0..1. */
  normalize?: PairNormalize;
  /** CT window centre for `window`, HU; default 500. */
  ctLevelHu?: number;
  /** CT window width for `window`, HU; default 3000. */
  ctWidthHu?: number;
  /** MR percentiles mapped to 0 and 1 for `window`; default [1, 99]. */
  mrPercentiles?: readonly [number, number];
  /** Metal threshold, HU; default 2500. */
  metalHu?: number;
  /** Body threshold, HU; default -500. */
  bodyHu?: number;
  /** Slices with a body fraction at or below this are skipped (0..1); default 0. */
  minBodyFraction?: number;
  /** Case name written into slices.csv; default the output folder's name. */
  caseName?: string;
  /** Worker threads for the resampling; default the machine's parallelism. */
  threads?: number;
  onProgress?: ProgressFn;
}

/** Statistics of one exported channel. */
export interface PairChannelStats {
  /** All voxels of the grid. */
  all: ChannelStats;
  /** Voxels inside the CT body mask. */
  body: ChannelStats;
}

/** The pair.json sidecar. */
export interface PairSidecar {
  format: "coxa.pair";
  version: 1;
  case: string;
  files: { pair: "pair.nii.gz"; metal: "metal.nii.gz"; slices_csv: "slices.csv" | null };
  channels: {
    index: number;
    name: "ct" | "mr" | "metal";
    file: "pair.nii.gz" | "metal.nii.gz";
    volume: number;
    unit: string;
    description: string;
  }[];
  grid: {
    source: "fixed";
    shape: number[];
    spacing_mm: number[];
    orientation: string;
    index_to_world: number[][];
  };
  inputs: {
    fixed: { path: string; sha256: string; shape: number[]; index_to_world: number[][] };
    moving: { path: string; sha256: string; shape: number[]; index_to_world: number[][] };
    transform: {
      path: string;
      sha256: string;
      matrix_sha256: string;
      maps: "fixed-to-moving";
      matrix: number[][];
    };
  };
  resampling: { interpolation: "linear"; fill_outside_mr: 0; mr_coverage_fraction: number };
  normalize:
    | { mode: "none" }
    | {
        mode: "window";
        ct: { level_hu: number; width_hu: number; low_hu: number; high_hu: number; clip: true };
        mr: {
          low_percentile: number;
          high_percentile: number;
          low_value: number;
          high_value: number;
          region: "body and MR field of view";
          samples: number;
          clip: true;
        };
      };
  statistics: { ct: PairChannelStats; mr: PairChannelStats & { covered: ChannelStats } };
  raw_statistics: { ct: PairChannelStats; mr: PairChannelStats & { covered: ChannelStats } };
  metal: {
    threshold_hu: number;
    margin_mm: 0;
    min_component_mm3: number;
    voxels: number;
    volume_mm3: number;
  };
  body: { threshold_hu: number; voxels: number; fraction: number };
  slices: null | {
    axis: 0 | 1 | 2;
    rows_axis: number;
    cols_axis: number;
    shape: [3, number, number];
    dtype: "float32";
    channels: ["ct", "mr", "metal"];
    min_body_fraction: number;
    written: number;
    skipped: number;
    folder: "slices";
  };
  warnings: string[];
  software: { name: string; version: string };
}

/** What exportPair returns. */
export interface PairResult {
  sidecar: PairSidecar;
  /** Absolute paths of the files written. */
  files: { pair: string; metal: string; sidecar: string; slicesCsv?: string; slices: string[] };
}

/** Files exportPair writes directly in OUT. */
export const PAIR_FILES = ["pair.nii.gz", "metal.nii.gz", "pair.json", "slices.csv"] as const;
/** Folder of the slice files inside OUT. */
export const SLICES_FOLDER = "slices";
const SLICE_FILE = /^slice-\d+\.npy$/;

function checkOptions(o: PairOptions): Required<Omit<PairOptions, "onProgress" | "caseName" | "threads">> {
  for (const key of ["fixed", "moving", "transform", "out"] as const) {
    if (typeof o[key] !== "string" || o[key].length === 0) {
      throw new CoxaError("BAD_ARGUMENT", `pair export needs a "${key}" path`);
    }
  }
  const normalize = o.normalize ?? "none";
  if (normalize !== "none" && normalize !== "window") {
    throw new CoxaError("BAD_ARGUMENT", `normalize "${normalize}" is not none or window`);
  }
  const mrPercentiles = o.mrPercentiles ?? DEFAULT_MR_PERCENTILES;
  const [pLow, pHigh] = mrPercentiles;
  if (!(pLow >= 0 && pHigh <= 100 && pLow < pHigh)) {
    throw new CoxaError("BAD_ARGUMENT", `MR percentiles ${pLow},${pHigh} are not 0 <= low < high <= 100`);
  }
  const ctLevelHu = o.ctLevelHu ?? DEFAULT_CT_LEVEL_HU;
  const ctWidthHu = o.ctWidthHu ?? DEFAULT_CT_WIDTH_HU;
  ctUnitWindow(ctLevelHu, ctWidthHu);
  const metalHu = o.metalHu ?? DEFAULT_METAL_HU;
  if (!Number.isFinite(metalHu))
    throw new CoxaError("BAD_ARGUMENT", `metal threshold ${metalHu} HU is not finite`);
  const bodyHu = o.bodyHu ?? DEFAULT_BODY_HU;
  if (!Number.isFinite(bodyHu))
    throw new CoxaError("BAD_ARGUMENT", `body threshold ${bodyHu} HU is not finite`);
  const minBodyFraction = o.minBodyFraction ?? 0;
  if (!(minBodyFraction >= 0 && minBodyFraction < 1)) {
    throw new CoxaError("BAD_ARGUMENT", `minimum body fraction ${minBodyFraction} is outside 0..1`);
  }
  return {
    fixed: o.fixed,
    moving: o.moving,
    transform: o.transform,
    out: o.out,
    slices: o.slices ?? false,
    normalize,
    ctLevelHu,
    ctWidthHu,
    mrPercentiles: [pLow, pHigh],
    metalHu,
    bodyHu,
    minBodyFraction,
  };
}

function realOrResolved(path: string): string {
  try {
    return realpathSync(path);
  } catch {
    return resolve(path);
  }
}

/** Refuse outputs that would land on an input file. */
function checkNoOverwrite(out: string, inputs: readonly string[]): void {
  const inputSet = new Set(inputs.map(realOrResolved));
  for (const name of PAIR_FILES) {
    const target = join(out, name);
    if (inputSet.has(realOrResolved(target))) {
      throw new CoxaError(
        "WOULD_OVERWRITE",
        "an input file has the name of a pair output; choose another --out",
        target,
      );
    }
  }
}

/**
 * Export an aligned CT + MR pair for training: 4-D CT+MR NIfTI on the CT grid, metal mask,
 * pair.json, and optionally axial .npy slices with slices.csv (see the module header).
 * All inputs are read and checked before anything is written.
 * @param options - input paths, output folder, normalisation and slice options
 * @returns the sidecar and the paths written
 * @throws CoxaError (exit 2) BAD_ARGUMENT for bad option values; BAD_TRANSFORM, FILE_MISSING,
 *   NOT_NIFTI and the other reader codes naming the bad file; HASH_MISMATCH when an image is not
 *   the one the transform was made from; BAD_INPUT when the fixed image looks like MR or the MR
 *   cannot be scaled; NO_OVERLAP when the MR misses the CT grid; WOULD_OVERWRITE when an output
 *   would replace an input. WORKER_FAILED (exit 1) when a resampling thread dies.
 */
export async function exportPair(options: PairOptions): Promise<PairResult> {
  const o = checkOptions(options);
  const progress = options.onProgress;
  const out = resolve(o.out);
  if (existsSync(out) && !statSync(out).isDirectory()) {
    throw new CoxaError("BAD_ARGUMENT", "output path exists and is not a directory", o.out);
  }
  progress?.({ stage: "read", fraction: 0 });
  const transform = readTransform(o.transform);
  const ctImage = readNifti(o.fixed).volume;
  progress?.({ stage: "read", fraction: 0.4 });
  const mrImage = readNifti(o.moving).volume;
  const [fixedSha, movingSha, transformSha] = await Promise.all([
    sha256File(o.fixed),
    sha256File(o.moving),
    sha256File(o.transform),
  ]);
  checkTransformImages(
    transform.record,
    { fixed: { path: o.fixed, sha256: fixedSha }, moving: { path: o.moving, sha256: movingSha } },
    o.transform,
  );
  const modality = detectModality(ctImage.data);
  if (modality.modality === "mr") {
    throw new CoxaError(
      "BAD_INPUT",
      `looks like MR, not CT in HU (${modality.reason}); --fixed must be the CT`,
      o.fixed,
    );
  }
  const warnings: string[] = [];
  if (modality.modality === "other") warnings.push(`the fixed image may not be CT in HU: ${modality.reason}`);
  checkNoOverwrite(out, [o.fixed, o.moving, o.transform]);
  progress?.({ stage: "read", fraction: 1 });

  // MR onto the CT grid; NaN marks "outside the MR", replaced by 0 after the coverage count.
  const resampled = await resampleOnto(mrImage, ctImage, transform.matrix, {
    interp: "linear",
    fill: Number.NaN,
    datatype: "float32",
    threads: options.threads,
    onProgress: progress,
  });
  if (resampled.insideFraction === 0) {
    throw new CoxaError(
      "NO_OVERLAP",
      `the MR ${o.moving} does not reach any CT voxel under this transform`,
      o.transform,
    );
  }
  const n = ctImage.count;
  const mr = resampled.volume.data as Float32Array; // float32 by request; modified in place below
  const covered = new Uint8Array(n);
  for (let q = 0; q < n; q++) {
    if (mr[q] === mr[q]) covered[q] = 1;
    else mr[q] = 0;
  }
  const ct = new Float32Array(n);
  ct.set(ctImage.data as never);

  progress?.({ stage: "masks", fraction: 0 });
  const metalResult = metalMask(ctImage, { metalHu: o.metalHu, marginMm: 0 });
  const metal = expandMetalMask(metalResult, ctImage.dims);
  progress?.({ stage: "masks", fraction: 0.5 });
  const body = bodyMaskCt(ctImage, o.bodyHu);
  let bodyVoxels = 0;
  for (let q = 0; q < n; q++) bodyVoxels += body[q];
  progress?.({ stage: "masks", fraction: 1 });

  const statsOf = () => ({
    ct: { all: channelStats(ct), body: channelStats(ct, body) },
    mr: { all: channelStats(mr), body: channelStats(mr, body, covered), covered: channelStats(mr, covered) },
  });
  const rawStatistics = statsOf();
  let normalize: PairSidecar["normalize"] = { mode: "none" };
  if (o.normalize === "window") {
    const ctWin = ctUnitWindow(o.ctLevelHu, o.ctWidthHu);
    // The percentiles need "outside the MR" marked; `covered` doubles as the body mask filter.
    const both = new Uint8Array(n);
    for (let q = 0; q < n; q++) both[q] = body[q] & covered[q];
    const mrWin = mrUnitWindow(mr, both, o.mrPercentiles[0], o.mrPercentiles[1], o.moving);
    applyUnitWindow(ct, ct, ctWin);
    applyUnitWindow(mr, mr, mrWin, covered);
    normalize = {
      mode: "window",
      ct: {
        level_hu: o.ctLevelHu,
        width_hu: o.ctWidthHu,
        low_hu: ctWin.low,
        high_hu: ctWin.high,
        clip: true,
      },
      mr: {
        low_percentile: o.mrPercentiles[0],
        high_percentile: o.mrPercentiles[1],
        low_value: mrWin.low,
        high_value: mrWin.high,
        region: "body and MR field of view",
        samples: mrWin.samples,
        clip: true,
      },
    };
  }
  const statistics = o.normalize === "window" ? statsOf() : rawStatistics;

  // Write: volumes, then slices, then the sidecar last.
  mkdirSync(out, { recursive: true });
  removeOldSlices(out);
  progress?.({ stage: "write", fraction: 0 });
  const files: PairResult["files"] = {
    pair: join(out, "pair.nii.gz"),
    metal: join(out, "metal.nii.gz"),
    sidecar: join(out, "pair.json"),
    slices: [],
  };
  const grid = ctImage.indexToWorld;
  writeNifti(files.pair, new Volume(ctImage.dims, ct, grid), {
    datatype: "float32",
    frames: [mr],
    description: "coxa pair: vol 0 CT, vol 1 MR on CT grid",
  });
  progress?.({ stage: "write", fraction: 0.5 });
  writeNifti(files.metal, new Volume(ctImage.dims, metal, grid), {
    datatype: "uint8",
    description: `coxa metal mask >= ${o.metalHu} HU, no margin`,
  });
  const caseName = options.caseName ?? basename(out);
  let slicesBlock: PairSidecar["slices"] = null;
  const slicesCsvPath = join(out, "slices.csv");
  if (o.slices) {
    const written = writeSlices(out, caseName, ctImage, ct, mr, metal, body, o.minBodyFraction, (f) =>
      progress?.({ stage: "write", fraction: 0.5 + 0.45 * f }),
    );
    files.slices = written.files;
    files.slicesCsv = slicesCsvPath;
    slicesBlock = {
      axis: written.axis,
      rows_axis: written.rowsAxis,
      cols_axis: written.colsAxis,
      shape: [3, written.rows, written.cols],
      dtype: "float32",
      channels: ["ct", "mr", "metal"],
      min_body_fraction: o.minBodyFraction,
      written: written.files.length,
      skipped: written.skipped,
      folder: "slices",
    };
  } else {
    rmSync(slicesCsvPath, { force: true });
  }
  const spacing = ctImage.spacingMm;
  const sidecar: PairSidecar = {
    format: "coxa.pair",
    version: 1,
    case: caseName,
    files: { pair: "pair.nii.gz", metal: "metal.nii.gz", slices_csv: o.slices ? "slices.csv" : null },
    channels: [
      {
        index: 0,
        name: "ct",
        file: "pair.nii.gz",
        volume: 0,
        unit: o.normalize === "window" ? "CT window 0..1" : "HU",
        description: "CT as stored (after scl_slope/scl_inter)",
      },
      {
        index: 1,
        name: "mr",
        file: "pair.nii.gz",
        volume: 1,
        unit: o.normalize === "window" ? "MR percentile scale 0..1" : "MR signal (scanner units)",
        description: "MR resampled onto the CT grid through the transform (trilinear, 0 outside the MR)",
      },
      {
        index: 2,
        name: "metal",
        file: "metal.nii.gz",
        volume: 0,
        unit: "0/1",
        description: `CT voxels >= ${o.metalHu} HU, components >= 1 mm^3, no margin`,
      },
    ],
    grid: {
      source: "fixed",
      shape: [ctImage.dims[0], ctImage.dims[1], ctImage.dims[2]],
      spacing_mm: [spacing[0], spacing[1], spacing[2]],
      orientation: ctImage.orientation(),
      index_to_world: toRows(grid),
    },
    inputs: {
      fixed: {
        path: o.fixed,
        sha256: fixedSha,
        shape: [...ctImage.dims],
        index_to_world: toRows(ctImage.indexToWorld),
      },
      moving: {
        path: o.moving,
        sha256: movingSha,
        shape: [...mrImage.dims],
        index_to_world: toRows(mrImage.indexToWorld),
      },
      transform: {
        path: o.transform,
        sha256: transformSha,
        matrix_sha256: transformHash(transform.matrix),
        maps: "fixed-to-moving",
        matrix: toRows(transform.matrix),
      },
    },
    resampling: {
      interpolation: "linear",
      fill_outside_mr: 0,
      mr_coverage_fraction: resampled.insideFraction,
    },
    normalize,
    statistics,
    raw_statistics: rawStatistics,
    metal: {
      threshold_hu: o.metalHu,
      margin_mm: 0,
      min_component_mm3: 1,
      voxels: metalResult.metalVoxels,
      volume_mm3: metalResult.metalVolumeMm3,
    },
    body: { threshold_hu: o.bodyHu, voxels: bodyVoxels, fraction: bodyVoxels / n },
    slices: slicesBlock,
    warnings,
    software: softwareInfo(),
  };
  writeJsonAtomic(files.sidecar, sidecar);
  progress?.({ stage: "write", fraction: 1 });
  return { sidecar, files };
}

/**
 * Remove what an earlier export left: slice files in OUT/slices (only coxa's own
 * slice-NNNN.npy names and temporaries) and temporaries of the pair files in OUT.
 */
function removeOldSlices(out: string): void {
  for (const name of readdirSync(out)) {
    if (name.startsWith(".coxa-tmp-") && PAIR_FILES.some((f) => name.endsWith(`-${f}`))) {
      rmSync(join(out, name), { force: true });
    }
  }
  const folder = join(out, SLICES_FOLDER);
  if (!existsSync(folder)) return;
  for (const name of readdirSync(folder)) {
    if (SLICE_FILE.test(name) || name.startsWith(".coxa-tmp-")) rmSync(join(folder, name), { force: true });
  }
}

interface WrittenSlices {
  axis: 0 | 1 | 2;
  rowsAxis: number;
  colsAxis: number;
  rows: number;
  cols: number;
  files: string[];
  skipped: number;
}

/**
 * Write the slice files and slices.csv (columns case, slice_index, z_mm, metal_fraction,
 * body_fraction, file; file relative to OUT).
 */
function writeSlices(
  out: string,
  caseName: string,
  grid: Volume,
  ct: Float32Array,
  mr: Float32Array,
  metal: Uint8Array,
  body: Uint8Array,
  minBodyFraction: number,
  onFraction: (f: number) => void,
): WrittenSlices {
  const dims = grid.dims;
  const axis = axialAxis(grid.indexToWorld);
  const colsAxis = axis === 0 ? 1 : 0;
  const rowsAxis = axis === 2 ? 1 : 2;
  const cols = dims[colsAxis];
  const rows = dims[rowsAxis];
  const strides = [1, dims[0], dims[0] * dims[1]];
  const sCol = strides[colsAxis];
  const sRow = strides[rowsAxis];
  const sSlice = strides[axis];
  const plane = rows * cols;
  const nSlices = dims[axis];
  const buffer = new Float32Array(3 * plane);
  const folder = join(out, SLICES_FOLDER);
  mkdirSync(folder, { recursive: true });
  const digits = Math.max(4, String(nSlices - 1).length);
  const lines = ["case,slice_index,z_mm,metal_fraction,body_fraction,file"];
  const files: string[] = [];
  const centre = [0, 0, 0];
  const index = [0, 0, 0];
  let skipped = 0;
  for (let s = 0; s < nSlices; s++) {
    const base = s * sSlice;
    let bodyCount = 0;
    let metalCount = 0;
    let p = 0;
    for (let r = 0; r < rows; r++) {
      let q = base + r * sRow;
      for (let c = 0; c < cols; c++, q += sCol, p++) {
        bodyCount += body[q];
        metalCount += metal[q];
        buffer[p] = ct[q];
        buffer[plane + p] = mr[q];
        buffer[2 * plane + p] = metal[q];
      }
    }
    const bodyFraction = bodyCount / plane;
    if (bodyCount === 0 || bodyFraction <= minBodyFraction) {
      skipped++;
      continue;
    }
    index[colsAxis] = (cols - 1) / 2;
    index[rowsAxis] = (rows - 1) / 2;
    index[axis] = s;
    grid.indexToWorldPoint(centre, index[0], index[1], index[2]);
    const name = `slice-${String(s).padStart(digits, "0")}.npy`;
    const path = join(folder, name);
    writeNpy(path, buffer, [3, rows, cols]);
    files.push(path);
    lines.push(
      [
        csvField(caseName),
        s,
        centre[2].toFixed(3),
        (metalCount / plane).toFixed(6),
        bodyFraction.toFixed(6),
        `${SLICES_FOLDER}/${name}`,
      ].join(","),
    );
    onFraction((s + 1) / nSlices);
  }
  writeFileAtomic(join(out, "slices.csv"), `${lines.join("\n")}\n`);
  return { axis, rowsAxis, colsAxis, rows, cols, files, skipped };
}
