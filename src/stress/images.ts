/**
 * The images a stress trial registers: the user's CT and MR with implant shadowing added at a
 * given severity, by the phantom's physics (src/phantom/ct-artifacts.ts, mr-artifacts.ts).
 *
 * Conventions: the fixed image is the CT (HU), the moving image the MR; both keep their grids
 * and worlds (RAS+ mm), so any transform between them keeps its meaning. The metal lives on the
 * CT grid as a code volume (i fastest): METALS codes 1 (titanium-like) and 2 (cobalt-chrome-like)
 * for a virtual implant, FOUND_METAL_CODE for CT voxels >= the metal threshold. For the MR it is
 * cropped to its bounding box and carried into MR world by the reference transform
 * (maskToMrWorld = T_ref, which maps CT world to MR world).
 *
 * Per severity s:
 *  - s = 0: the inputs unchanged; with a virtual implant, the CT with the implant burned in and
 *    the MR with the implant's signal void only (no field, no displacement);
 *  - s > 0: CT beam hardening and photon starvation streaks (projection domain, per axial slice)
 *    from all metal, and MR signal void, readout displacement with pile-up and through-slice loss
 *    around all metal, both scaled by s.
 * Found metal's material is unknown; it gets the physics modules' default attenuation
 * (0.5 /mm) and susceptibility difference (900 ppm). Each severity's artifacts draw from a
 * generator seeded by (seed, severity), so the images of a severity do not depend on which other
 * severities run.
 */
import { CoxaError } from "../common/errors.js";
import type { ProgressFn } from "../common/progress.js";
import { Rng } from "../common/random.js";
import type { Mat4 } from "../geometry/mat4.js";
import type { Volume } from "../image/volume.js";
import { cropVolume } from "../masks/crop.js";
import { maskBounds } from "../masks/morphology.js";
import { addCtMetalArtifacts } from "../phantom/ct-artifacts.js";
import { burnImplant, type ImplantModel, placeImplant, type Side } from "../phantom/implant.js";
import { addMrMetalArtifacts } from "../phantom/mr-artifacts.js";
import { METALS } from "../phantom/tissues.js";
import { ARTIFACT_STREAM, deriveSeed } from "./poses.js";

/** Mask code of metal found in the CT by its threshold (material unknown). */
export const FOUND_METAL_CODE = 3;

/** Linear attenuation per metal code, 1/mm (METALS; found metal: the CT artifact default). */
export const METAL_MU_PER_MM: Readonly<Record<number, number>> = {
  [METALS.titanium.code]: METALS.titanium.muPerMm,
  [METALS.cocr.code]: METALS.cocr.muPerMm,
  [FOUND_METAL_CODE]: 0.5,
};

/** Susceptibility difference per metal code, ppm (METALS; found metal: the MR artifact default). */
export const METAL_DELTA_CHI_PPM: Readonly<Record<number, number>> = {
  [METALS.titanium.code]: METALS.titanium.deltaChiPpm,
  [METALS.cocr.code]: METALS.cocr.deltaChiPpm,
  [FOUND_METAL_CODE]: 900,
};

/** A virtual implant request: head centre in CT world and, optionally, the side. */
export interface VirtualImplantRequest {
  /** Femoral head centre, CT world mm. */
  pointMm: readonly [number, number, number];
  /** Patient side; default from the point's x against the CT body centroid (RAS: +x = right). */
  side?: Side;
}

/** What every severity starts from. */
export interface StressBase {
  /** The CT (HU) with the virtual implant burned in when one was asked for; else the input. */
  fixed: Volume;
  /** The MR as given. */
  moving: Volume;
  /** Metal codes on the CT grid (virtual implant and found metal). */
  metalCodes: Uint8Array;
  /** Virtual implant codes only (null without a virtual implant). */
  virtualCodes: Uint8Array | null;
  /** CT voxels >= metal threshold in the input CT. */
  foundMetalVoxels: number;
  /** Centroid of the found metal, CT world mm (null when none). */
  foundMetalCentroidMm: [number, number, number] | null;
  /** The virtual implant, CT world (null when none). */
  implant: ImplantModel | null;
  /** Centre of the error region: the virtual implant point, else the found metal's centroid. */
  implantCenterMm: [number, number, number];
  /** CT to MR world: the reference transform. */
  reference: Mat4;
  metalHu: number;
}

/** What one severity's artifacts did. */
export interface SeverityImageStats {
  severity: number;
  /** CT slices that held metal (streaks are made there). */
  ctSlicesWithMetal: number;
  /** Largest |CT change| at a non-metal voxel, HU. */
  ctMaxAbsArtifactHu: number;
  /** Largest MR readout displacement of signal kept, mm. */
  mrMaxDisplacementMm: number;
  /** MR signal moved by more than 1 mm, ml. */
  mrDisplacedVolumeMl: number;
  seconds: number;
}

/** Images of one severity (Float32 data, same grids as the inputs). */
export interface SeverityImages {
  fixed: Volume<Float32Array>;
  moving: Volume<Float32Array>;
  stats: SeverityImageStats;
}

/** Options of prepareStressBase. */
export interface StressBaseOptions {
  /** Metal threshold, HU; default 2500. */
  metalHu?: number;
  virtualImplant?: VirtualImplantRequest;
}

/**
 * Find the CT metal, burn a virtual implant in when asked, and fix the error region's centre.
 * @param ct - fixed CT, HU
 * @param mr - moving MR
 * @param reference - CT world -> MR world reference transform
 * @param options - metal threshold, virtual implant
 * @throws CoxaError BAD_ARGUMENT for a virtual implant point outside the CT field of view;
 *   BAD_INPUT when the CT holds no metal and no virtual implant is asked for
 */
export function prepareStressBase(
  ct: Volume,
  mr: Volume,
  reference: Mat4,
  options: StressBaseOptions = {},
): StressBase {
  const metalHu = options.metalHu ?? 2500;
  const found = findCtMetal(ct, metalHu);
  const codes = new Uint8Array(ct.count);
  for (let i = 0; i < ct.count; i++) if (found.mask[i]) codes[i] = FOUND_METAL_CODE;
  let fixed: Volume = ct;
  let virtualCodes: Uint8Array | null = null;
  let implant: ImplantModel | null = null;
  const request = options.virtualImplant;
  if (request) {
    const p = request.pointMm;
    if (!p.every((v) => Number.isFinite(v))) {
      throw new CoxaError("BAD_ARGUMENT", "virtual implant point must be three finite numbers (mm)");
    }
    const idx = [0, 0, 0];
    ct.worldToIndexPoint(idx, p[0], p[1], p[2]);
    for (let a = 0; a < 3; a++) {
      if (!(idx[a] >= -0.5 && idx[a] <= ct.dims[a] - 0.5)) {
        throw new CoxaError(
          "BAD_ARGUMENT",
          `virtual implant point ${p.map((v) => v.toFixed(1)).join(", ")} mm lies outside the CT field of view`,
        );
      }
    }
    const side = request.side ?? sideOfPoint(ct, p);
    implant = placeImplant({ side, headCenterMm: [p[0], p[1], p[2]] });
    const burned = burnImplant(ct, implant);
    fixed = burned.ct;
    virtualCodes = burned.metalMask;
    for (let i = 0; i < ct.count; i++) if (virtualCodes[i]) codes[i] = virtualCodes[i];
  } else if (found.voxels === 0) {
    throw new CoxaError(
      "BAD_INPUT",
      `the CT holds no metal (no voxel >= ${metalHu} HU); give --virtual-implant X,Y,Z to place one`,
    );
  }
  const implantCenterMm: [number, number, number] = request
    ? [request.pointMm[0], request.pointMm[1], request.pointMm[2]]
    : (found.centroidMm as [number, number, number]);
  return {
    fixed,
    moving: mr,
    metalCodes: codes,
    virtualCodes,
    foundMetalVoxels: found.voxels,
    foundMetalCentroidMm: found.centroidMm,
    implant,
    implantCenterMm,
    reference: new Float64Array(reference),
    metalHu,
  };
}

/**
 * CT voxels at or above a threshold, their count and world centroid.
 * @param ct - CT, HU
 * @param metalHu - threshold, HU
 */
export function findCtMetal(
  ct: Volume,
  metalHu: number,
): { mask: Uint8Array; voxels: number; centroidMm: [number, number, number] | null } {
  const [nx, ny, nz] = ct.dims;
  const mask = new Uint8Array(ct.count);
  const d = ct.data;
  let n = 0;
  let si = 0;
  let sj = 0;
  let sk = 0;
  let idx = 0;
  for (let k = 0; k < nz; k++) {
    for (let j = 0; j < ny; j++) {
      for (let i = 0; i < nx; i++, idx++) {
        if (d[idx] >= metalHu) {
          mask[idx] = 1;
          n++;
          si += i;
          sj += j;
          sk += k;
        }
      }
    }
  }
  if (n === 0) return { mask, voxels: 0, centroidMm: null };
  const p = [0, 0, 0];
  ct.indexToWorldPoint(p, si / n, sj / n, sk / n);
  return { mask, voxels: n, centroidMm: [p[0], p[1], p[2]] };
}

/**
 * The patient side of a CT world point: right when its x is at or above the x of the centroid
 * of the CT voxels above -500 HU (RAS+: +x points to the patient's right), else left.
 */
export function sideOfPoint(ct: Volume, pointMm: readonly number[]): Side {
  const [nx, ny, nz] = ct.dims;
  const d = ct.data;
  let n = 0;
  let si = 0;
  let sj = 0;
  let sk = 0;
  let idx = 0;
  for (let k = 0; k < nz; k++) {
    for (let j = 0; j < ny; j++) {
      for (let i = 0; i < nx; i++, idx++) {
        if (d[idx] > -500) {
          n++;
          si += i;
          sj += j;
          sk += k;
        }
      }
    }
  }
  const c = n > 0 ? ct.indexToWorldPoint([0, 0, 0], si / n, sj / n, sk / n) : ct.centerWorld();
  return pointMm[0] >= c[0] ? "right" : "left";
}

/**
 * A code volume cropped to the bounding box of its nonzero voxels (plus one voxel), keeping
 * world positions: the crop's indexToWorld = grid.indexToWorld · translation(i0, j0, k0).
 * @param codes - codes on `grid`
 * @param grid - the grid the codes live on
 * @returns the cropped volume, or null when every code is zero
 */
export function cropCodes(codes: Uint8Array, grid: Volume): Volume<Uint8Array> | null {
  const box = maskBounds(codes, grid.dims);
  if (!box) return null;
  for (let a = 0; a < 3; a++) {
    box.min[a] = Math.max(0, box.min[a] - 1);
    box.max[a] = Math.min(grid.dims[a], box.max[a] + 1);
  }
  return cropVolume(grid.withData(codes), box) as Volume<Uint8Array>;
}

/** Options of makeSeverityImages. */
export interface SeverityImageOptions {
  /** Run seed; the severity's generator is derived from it and the severity. */
  seed: number;
  /** MR voxel axis of frequency encoding (0 = i); default 0. */
  readoutAxis?: 0 | 1 | 2;
  /** Worker threads for the CT artifacts; default all cores. */
  threads?: number;
  onProgress?: ProgressFn;
}

/**
 * The CT and MR of one severity (see the module header).
 * @param base - from prepareStressBase
 * @param severity - 0..1
 * @param options - seed, MR readout axis, threads, progress
 * @throws CoxaError BAD_ARGUMENT for a severity outside 0..1
 */
export async function makeSeverityImages(
  base: StressBase,
  severity: number,
  options: SeverityImageOptions,
): Promise<SeverityImages> {
  if (!(severity >= 0 && severity <= 1)) {
    throw new CoxaError("BAD_ARGUMENT", `severity ${severity} is outside 0..1`);
  }
  const t0 = performance.now();
  const ct = base.fixed;
  const mr = base.moving;
  const stats: SeverityImageStats = {
    severity,
    ctSlicesWithMetal: 0,
    ctMaxAbsArtifactHu: 0,
    mrMaxDisplacementMm: 0,
    mrDisplacedVolumeMl: 0,
    seconds: 0,
  };
  const rng = new Rng(deriveSeed(options.seed, ARTIFACT_STREAM, Math.round(severity * 1e6)));
  let fixedData: Float32Array;
  if (severity > 0) {
    const res = await addCtMetalArtifacts(ct, rng, {
      severity,
      metalMask: base.metalCodes,
      metalMuPerMm: METAL_MU_PER_MM,
      threads: options.threads,
      onProgress: options.onProgress,
    });
    fixedData = res.volume.data;
    stats.ctSlicesWithMetal = res.slicesWithMetal.length;
    stats.ctMaxAbsArtifactHu = res.maxAbsArtifactHu;
  } else {
    fixedData = Float32Array.from(ct.data);
  }
  // MR: at severity 0 only a virtual implant's void; otherwise all metal with field effects.
  const mrCodes = severity > 0 ? base.metalCodes : base.virtualCodes;
  const mask = mrCodes ? cropCodes(mrCodes, ct) : null;
  const readoutAxis = options.readoutAxis ?? 0;
  let movingData: Float32Array;
  if (mask) {
    const res = addMrMetalArtifacts(
      mr,
      { mask, maskToMrWorld: base.reference, deltaChiPpm: METAL_DELTA_CHI_PPM },
      { severity, readoutAxis, sliceAxis: sliceAxisOf(mr, readoutAxis) },
    );
    movingData = res.volume.data;
    stats.mrMaxDisplacementMm = res.maxDisplacementMm;
    stats.mrDisplacedVolumeMl = res.displacedVolumeMm3 / 1000;
  } else {
    movingData = Float32Array.from(mr.data);
  }
  stats.seconds = (performance.now() - t0) / 1000;
  return { fixed: ct.withData(fixedData), moving: mr.withData(movingData), stats };
}

/**
 * The MR slice axis: of the two voxel axes other than the readout axis, the one with the larger
 * spacing (2-D acquisitions have thick slices); the later axis when they tie.
 */
export function sliceAxisOf(mr: Volume, readoutAxis: 0 | 1 | 2): 0 | 1 | 2 {
  const s = mr.spacingMm;
  const others = ([0, 1, 2] as const).filter((a) => a !== readoutAxis);
  const [a, b] = others;
  return s[a] > s[b] + 1e-6 ? a : b;
}
