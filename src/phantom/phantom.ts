/**
 * `coxa phantom`: a synthetic hip CT + MR pair with known truth.
 *
 * Frames and conventions (design.md):
 *  - the anatomy lives in the PATIENT frame (anatomy.ts). CT world = patientToCt(patient): a table
 *    offset and a small seeded tilt. The CT grid is axis-aligned in CT world, stored LPS (i -> -x,
 *    j -> -y, k -> +z), as a scanner's DICOM series converts to NIfTI.
 *  - the truth `fixed_to_moving` T maps CT world (fixed) to MR world (moving): x_mr = T x_ct, a
 *    seeded rigid transform built by rigidMatrix(center_mm, rotation_deg, translation_mm)
 *    (T(x) = R (x - c) + c + t, R = Rz Ry Rx). landmarks-mr = T landmarks-ct exactly.
 *  - the MR grid is oblique in MR world (every seed: 6-14 degrees about x, 2-7 about z, up to 4
 *    about y), stored LAS-like (i -> about -x), with thicker slices, another voxel size, field of
 *    view and origin. The readout (frequency-encoding) axis is MR voxel axis i, B0 is MR world z.
 *  - labels-ct / labels-mr hold the true anatomy at the voxel centres of each grid (MR labels are
 *    undistorted: they are truth, not an image).
 * Random choices come from one seeded Rng in a fixed order, so a seed reproduces every file
 * byte for byte (worker threads only split deterministic work).
 */
import { existsSync, mkdirSync, statSync } from "node:fs";
import { join } from "node:path";
import { writeFileAtomic, writeJsonAtomic } from "../common/atomic.js";
import { CoxaError } from "../common/errors.js";
import type { ProgressFn } from "../common/progress.js";
import { Rng } from "../common/random.js";
import { softwareInfo } from "../common/version.js";
import { defaultThreads, WorkerPool, workerScript } from "../common/workers.js";
import { compose, identity, inverse, type Mat4, toRows, transformPoint } from "../geometry/mat4.js";
import { rigidMatrix, rotationFromDeg } from "../geometry/rotation.js";
import { writeNifti } from "../image/nifti-write.js";
import { Volume } from "../image/volume.js";
import { type Anatomy, buildAnatomy, LABELS, type Landmark } from "./anatomy.js";
import { addCtMetalArtifacts } from "./ct-artifacts.js";
import {
  type ImplantModel,
  implantStructures,
  metalMaskFromLabels,
  rasterizeImplantMetal,
  transformImplant,
} from "./implant.js";
import { addMrMetalArtifacts, addRicianNoise, applyBiasField } from "./mr-artifacts.js";
import { type CompiledStructure, compileStructures, type RenderJob, renderStructures } from "./render.js";
import type { V3 } from "./sdf.js";
import { makeLattice } from "./texture.js";
import { CT_MAX_HU, CT_MIN_HU, METALS, TISSUES } from "./tissues.js";

/** Grid size preset (PHANTOM_SIZES). */
export type PhantomSize = "demo" | "clinical";
/** Which hip(s) carry an implant. */
export type ImplantChoice = "left" | "right" | "both" | "none";
/** MR field of view: whole pelvis, or the implanted hip only. */
export type MrFov = "full" | "implant";

/** Options of the phantom (the CLI's flags, camelCase). */
export interface PhantomOptions {
  /** Seed of every random choice; default 1. */
  seed?: number;
  /** Grid sizes; default "demo". */
  size?: PhantomSize;
  /** Implanted side(s); default "right". */
  implant?: ImplantChoice;
  /** Artifact strength 0..1 (0: metal present, no artifacts); default 1. */
  severity?: number;
  /** Largest pose rotation per axis, degrees (0..20); default 4. */
  poseDeg?: number;
  /** MR field of view: whole pelvis or the implanted hip only; default "full". */
  mrFov?: MrFov;
  /** Worker threads; default the machine's parallelism; 1 = this thread only. */
  threads?: number;
  onProgress?: ProgressFn;
}

/** Defaults in one place (CLI help shows them). */
export const PHANTOM_DEFAULTS = {
  seed: 1,
  size: "demo" as PhantomSize,
  implant: "right" as ImplantChoice,
  severity: 1,
  poseDeg: 4,
  mrFov: "full" as MrFov,
};

interface GridSpec {
  dims: [number, number, number];
  spacingMm: [number, number, number];
}

/** Grid sizes per phantom size. */
export const PHANTOM_SIZES: Readonly<
  Record<PhantomSize, { ct: GridSpec; mrFull: GridSpec; mrImplant: GridSpec; mrSubslices: number }>
> = {
  demo: {
    ct: { dims: [160, 160, 96], spacingMm: [2.56, 2.56, 3.0] },
    mrFull: { dims: [128, 128, 36], spacingMm: [3.0, 3.0, 7.0] },
    mrImplant: { dims: [96, 96, 32], spacingMm: [2.2, 2.2, 6.5] },
    mrSubslices: 3,
  },
  clinical: {
    ct: { dims: [512, 512, 200], spacingMm: [0.8, 0.8, 1.5] },
    mrFull: { dims: [384, 384, 60], spacingMm: [1.0, 1.0, 4.0] },
    mrImplant: { dims: [384, 384, 60], spacingMm: [0.55, 0.55, 3.5] },
    mrSubslices: 3,
  },
};

/** Image noise: CT Gaussian sigma in HU, MR Rician sigma on the 0..1000 scale (choices, no source). */
const CT_NOISE_HU = 10;
const MR_NOISE = 9;

/** The phantom's truth document (truth.json). */
export interface PhantomTruth {
  format: "coxa.phantom-truth";
  version: 1;
  fixed: "ct.nii.gz";
  moving: "mr.nii.gz";
  maps: "fixed-to-moving";
  frame: "RAS";
  units: "mm";
  fixed_to_moving: number[][];
  moving_to_fixed: number[][];
  parameters: { center_mm: number[]; rotation_deg: number[]; translation_mm: number[] };
  seed: number;
  size: PhantomSize;
  implant: ImplantChoice;
  severity: number;
  pose_deg: number;
  mr_fov: MrFov;
  implant_center_mm: number[] | null;
  other_hip_center_mm: number[] | null;
  implant_centers_mm: number[][];
  hip_centers_mm: { right: number[]; left: number[] };
  ct: { shape: number[]; spacing_mm: number[]; index_to_world: number[][] };
  mr: {
    shape: number[];
    spacing_mm: number[];
    index_to_world: number[][];
    readout_axis: 0;
    b0_direction_mr_world: number[];
  };
  patient_to_ct: number[][];
  ct_metal_slices: number;
  mr_max_displacement_mm: number;
  /** Volume of MR signal moved by more than 1 mm along the readout, ml (sub-slice grid). */
  mr_displaced_volume_ml: number;
  noise: { ct_hu: number; mr_sigma: number };
  software: { name: "coxa"; version: string };
}

/** A generated phantom case in memory. */
export interface PhantomCase {
  ct: Volume<Int16Array>;
  mr: Volume<Int16Array>;
  labelsCt: Volume<Uint8Array>;
  labelsMr: Volume<Uint8Array>;
  /** World mm of each image. */
  landmarksCt: Landmark[];
  landmarksMr: Landmark[];
  truth: PhantomTruth;
  /** Metal mask on the CT grid (METALS codes). */
  metalMaskCt: Uint8Array;
  /** Implants in CT world. */
  implantsCt: ImplantModel[];
  /** Seconds per stage. */
  timingS: Record<string, number>;
}

/**
 * Check and complete phantom options.
 * @throws CoxaError BAD_ARGUMENT naming the bad value
 */
export function resolvePhantomOptions(options: PhantomOptions): Required<Omit<PhantomOptions, "onProgress">> {
  const seed = options.seed ?? PHANTOM_DEFAULTS.seed;
  if (!Number.isSafeInteger(seed) || seed < 0)
    throw new CoxaError("BAD_ARGUMENT", `seed ${seed} is not a whole number >= 0`);
  const size = options.size ?? PHANTOM_DEFAULTS.size;
  if (!(size in PHANTOM_SIZES)) throw new CoxaError("BAD_ARGUMENT", `size "${size}" is not demo or clinical`);
  const implant = options.implant ?? PHANTOM_DEFAULTS.implant;
  if (!["left", "right", "both", "none"].includes(implant)) {
    throw new CoxaError("BAD_ARGUMENT", `implant "${implant}" is not left, right, both or none`);
  }
  const severity = options.severity ?? PHANTOM_DEFAULTS.severity;
  if (!(severity >= 0 && severity <= 1))
    throw new CoxaError("BAD_ARGUMENT", `severity ${severity} is outside 0..1`);
  const poseDeg = options.poseDeg ?? PHANTOM_DEFAULTS.poseDeg;
  if (!(poseDeg >= 0 && poseDeg <= 20))
    throw new CoxaError("BAD_ARGUMENT", `pose-deg ${poseDeg} is outside 0..20`);
  const mrFov = options.mrFov ?? PHANTOM_DEFAULTS.mrFov;
  if (mrFov !== "full" && mrFov !== "implant")
    throw new CoxaError("BAD_ARGUMENT", `mr-fov "${mrFov}" is not full or implant`);
  if (mrFov === "implant" && implant === "none") {
    throw new CoxaError("BAD_ARGUMENT", "mr-fov implant needs an implant (implant is none)");
  }
  const threads = options.threads ?? defaultThreads();
  if (!Number.isInteger(threads) || threads < 1)
    throw new CoxaError("BAD_ARGUMENT", `threads ${threads} is not a whole number >= 1`);
  return { seed, size, implant, severity, poseDeg, mrFov, threads };
}

function round(x: number, digits = 6): number {
  const f = 10 ** digits;
  return Math.round(x * f) / f;
}

function mapPoint(m: Mat4, p: V3): V3 {
  const q = transformPoint([0, 0, 0], m, p[0], p[1], p[2]);
  return [q[0], q[1], q[2]];
}

/** Index -> world of a grid centred at `centre` with columns R * diag(flip * spacing). */
function gridAffine(spec: GridSpec, centre: V3, rotation: Mat4, flips: V3): Mat4 {
  const m = identity();
  for (let c = 0; c < 3; c++) {
    for (let r = 0; r < 3; r++) m[r * 4 + c] = rotation[r * 4 + c] * flips[c] * spec.spacingMm[c];
  }
  const half = [(spec.dims[0] - 1) / 2, (spec.dims[1] - 1) / 2, (spec.dims[2] - 1) / 2];
  for (let r = 0; r < 3; r++) {
    m[r * 4 + 3] = round(
      centre[r] - (m[r * 4] * half[0] + m[r * 4 + 1] * half[1] + m[r * 4 + 2] * half[2]),
      3,
    );
  }
  return m;
}

/** Paint compiled structures over a whole grid, split into slabs over a worker pool when given. */
async function renderGrid(
  job: Omit<RenderJob, "kStart" | "kEnd">,
  pool: WorkerPool | null,
  onProgress: ProgressFn | undefined,
  stage: string,
): Promise<void> {
  const nz = job.dims[2];
  if (!pool) {
    const slab = 8;
    for (let k = 0; k < nz; k += slab) {
      renderStructures({ ...job, kStart: k, kEnd: Math.min(nz, k + slab) });
      onProgress?.({ stage, fraction: Math.min(1, (k + slab) / nz) });
    }
    return;
  }
  const slab = Math.max(4, Math.ceil(nz / (pool.size * 6) / 4) * 4);
  const tasks: Promise<unknown>[] = [];
  let done = 0;
  for (let k = 0; k < nz; k += slab) {
    tasks.push(
      pool.run({ kind: "render", job: { ...job, kStart: k, kEnd: Math.min(nz, k + slab) } }).then(() => {
        done += slab;
        onProgress?.({ stage, fraction: Math.min(1, done / nz) });
      }),
    );
  }
  await Promise.all(tasks);
}

function sharedFloat32(n: number): Float32Array {
  return new Float32Array(new SharedArrayBuffer(4 * n));
}

function sharedUint8(n: number): Uint8Array {
  return new Uint8Array(new SharedArrayBuffer(n));
}

/**
 * Generate a phantom case in memory.
 * @param options - see PhantomOptions
 * @throws CoxaError BAD_ARGUMENT for invalid options
 */
export async function generatePhantom(options: PhantomOptions = {}): Promise<PhantomCase> {
  const o = resolvePhantomOptions(options);
  const onProgress = options.onProgress;
  const timing: Record<string, number> = {};
  let t0 = performance.now();
  const lap = (name: string) => {
    const t = performance.now();
    timing[name] = round((t - t0) / 1000, 3);
    t0 = t;
  };
  const sizes = PHANTOM_SIZES[o.size];
  const rng = new Rng(o.seed);
  const anatomy: Anatomy = buildAnatomy({ seed: o.seed, implant: o.implant });

  // ---- frames -----------------------------------------------------------------------------
  const tilt = rotationFromDeg(identity(), rng.range(-1.5, 1.5), rng.range(-1, 1), rng.range(-2.5, 2.5));
  const patientToCt = compose(
    translationOf([
      round(rng.range(-8, 8), 2),
      round(12 + rng.range(-8, 8), 2),
      round(-160 + rng.range(-15, 15), 2),
    ]),
    tilt,
  );
  const ctToPatient = inverse(patientToCt);
  const rotationDeg = [0, 1, 2].map(() => round(rng.range(-o.poseDeg, o.poseDeg), 4));
  const translationMm = [0, 1, 2].map(() => round((rng.uniform() < 0.5 ? -1 : 1) * rng.range(5, 25), 4));
  const centerMm = mapPoint(patientToCt, [0, 0, 0]).map((x) => round(x, 4));
  const fixedToMoving = rigidMatrix(centerMm, rotationDeg, translationMm);
  const movingToFixed = inverse(fixedToMoving);

  const ctAffine = gridAffine(sizes.ct, mapPoint(patientToCt, [0, -8, -25]), identity(), [-1, -1, 1]);
  const ctGrid = Volume.zeros(sizes.ct.dims, ctAffine, "uint8");
  const obliqueSign = rng.uniform() < 0.5 ? -1 : 1;
  const mrRotation = rotationFromDeg(
    identity(),
    obliqueSign * rng.range(6, 14),
    rng.range(-4, 4),
    -obliqueSign * rng.range(2, 7),
  );
  const implantsPatient = anatomy.implants;
  const firstImplant = implantsPatient[0];
  const mrSpec = o.mrFov === "implant" ? sizes.mrImplant : sizes.mrFull;
  const mrCentrePatient: V3 =
    o.mrFov === "implant" && firstImplant
      ? [
          firstImplant.headCenterMm[0] + (firstImplant.side === "right" ? 8 : -8),
          firstImplant.headCenterMm[1],
          -55,
        ]
      : [0, -10, -5];
  const jitter = [0, 1, 2].map(() => rng.range(-8, 8));
  const mrCentreWorld = mapPoint(fixedToMoving, mapPoint(patientToCt, mrCentrePatient)).map(
    (x, a) => x + jitter[a],
  ) as unknown as V3;
  const mrAffine = gridAffine(mrSpec, mrCentreWorld, mrRotation, [-1, 1, 1]);
  const mrGrid = Volume.zeros(mrSpec.dims, mrAffine, "uint8");
  const lattice = makeLattice(rng);
  const noiseSeeds = {
    ct: rng.nextUint32(),
    mr: rng.nextUint32(),
    ctArtifacts: rng.nextUint32(),
    bias: rng.nextUint32(),
  };

  const implantsCt = implantsPatient.map((m) => transformImplant(m, patientToCt));
  const implantsMr = implantsCt.map((m) => transformImplant(m, fixedToMoving));
  const anatomyOnly = anatomy.structures.filter((s) => !s.name.startsWith("implant_"));
  const compiledAnatomy: CompiledStructure[] = compileStructures(anatomyOnly);
  const pool =
    o.threads > 1 ? new WorkerPool(workerScript(import.meta.url, "phantom-worker"), o.threads) : null;
  try {
    // ---- CT -----------------------------------------------------------------------------------
    const nCt = ctGrid.count;
    const ctValues = sharedFloat32(nCt).fill(TISSUES.air.hu);
    const ctLabels = sharedUint8(nCt);
    const ctTissue = sharedUint8(nCt);
    const ctSpacing = ctGrid.spacingMm;
    const ctPartial = (ctSpacing[0] + ctSpacing[1]) / 2;
    await renderGrid(
      {
        structures: compiledAnatomy,
        dims: ctGrid.dims,
        indexToFrame: compose(ctToPatient, ctAffine),
        modality: "ct",
        partialMm: ctPartial,
        values: ctValues,
        labels: ctLabels,
        tissueMap: ctTissue,
      },
      pool,
      onProgress,
      "CT anatomy",
    );
    await renderGrid(
      {
        structures: compileStructures(implantsCt.flatMap((m) => implantStructures(m))),
        dims: ctGrid.dims,
        indexToFrame: ctAffine,
        modality: "ct",
        partialMm: ctPartial,
        values: ctValues,
        labels: ctLabels,
        tissueMap: ctTissue,
      },
      pool,
      onProgress,
      "CT implant",
    );
    await renderGrid(
      {
        structures: [],
        dims: ctGrid.dims,
        indexToFrame: compose(ctToPatient, ctAffine),
        modality: "ct",
        partialMm: ctPartial,
        values: ctValues,
        tissueMap: ctTissue,
        lattice,
        texture: true,
      },
      pool,
      onProgress,
      "CT texture",
    );
    lap("ct_anatomy");
    const metalMaskCt = metalMaskFromLabels(ctLabels);
    const artifacts = await addCtMetalArtifacts(ctGrid.withData(ctValues), new Rng(noiseSeeds.ctArtifacts), {
      severity: o.severity,
      metalMask: metalMaskCt,
      metalMuPerMm: {
        [METALS.titanium.code]: METALS.titanium.muPerMm,
        [METALS.cocr.code]: METALS.cocr.muPerMm,
      },
      threads: o.threads,
      onProgress,
    });
    lap("ct_artifacts");
    const ctNoise = new Rng(noiseSeeds.ct);
    const ctOut = new Int16Array(nCt);
    const withArtifacts = artifacts.volume.data;
    for (let i = 0; i < nCt; i++) {
      let v = withArtifacts[i];
      if (metalMaskCt[i] === 0) v += CT_NOISE_HU * ctNoise.normal();
      v = Math.round(v);
      ctOut[i] = v < CT_MIN_HU ? CT_MIN_HU : v > CT_MAX_HU ? CT_MAX_HU : v;
    }
    lap("ct_noise");

    // ---- MR -----------------------------------------------------------------------------------
    const nSub = sizes.mrSubslices;
    const subDims: [number, number, number] = [mrSpec.dims[0], mrSpec.dims[1], mrSpec.dims[2] * nSub];
    const toSub = identity();
    toSub[10] = 1 / nSub;
    toSub[11] = -(nSub - 1) / (2 * nSub);
    const subAffine = compose(mrAffine, toSub);
    const nSubVox = subDims[0] * subDims[1] * subDims[2];
    const mrValues = sharedFloat32(nSubVox);
    const mrLabelsSub = sharedUint8(nSubVox);
    const mrTissue = sharedUint8(nSubVox);
    const mrSpacing = mrGrid.spacingMm;
    const mrPartial = (mrSpacing[0] + mrSpacing[1]) / 2;
    const mrToPatient = compose(ctToPatient, movingToFixed);
    await renderGrid(
      {
        structures: compiledAnatomy,
        dims: subDims,
        indexToFrame: compose(mrToPatient, subAffine),
        modality: "mr",
        partialMm: mrPartial,
        values: mrValues,
        labels: mrLabelsSub,
        tissueMap: mrTissue,
      },
      pool,
      onProgress,
      "MR anatomy",
    );
    await renderGrid(
      {
        structures: compileStructures(implantsMr.flatMap((m) => implantStructures(m))),
        dims: subDims,
        indexToFrame: subAffine,
        modality: "mr",
        partialMm: mrPartial,
        values: mrValues,
        labels: mrLabelsSub,
        tissueMap: mrTissue,
      },
      pool,
      onProgress,
      "MR implant",
    );
    await renderGrid(
      {
        structures: [],
        dims: subDims,
        indexToFrame: compose(mrToPatient, subAffine),
        modality: "mr",
        partialMm: mrPartial,
        values: mrValues,
        tissueMap: mrTissue,
        lattice,
        texture: true,
      },
      pool,
      onProgress,
      "MR texture",
    );
    lap("mr_anatomy");
    const subVolume = new Volume(subDims, mrValues, subAffine);
    let distorted: Float32Array = mrValues;
    let maxDisplacement = 0;
    let displacedMm3 = 0;
    if (implantsCt.length > 0) {
      onProgress?.({ stage: "MR metal artifacts", fraction: 0 });
      // Metal of all implants on 1 mm box grids in CT world, carried into MR world by the truth.
      let current: Volume = subVolume;
      for (const model of implantsCt) {
        const res = addMrMetalArtifacts(
          current,
          {
            mask: rasterizeImplantMetal(model, 1),
            maskToMrWorld: fixedToMoving,
            deltaChiPpm: {
              [METALS.titanium.code]: METALS.titanium.deltaChiPpm,
              [METALS.cocr.code]: METALS.cocr.deltaChiPpm,
            },
          },
          { severity: o.severity, readoutAxis: 0, sliceAxis: 2, sliceThicknessMm: mrSpacing[2] },
        );
        current = res.volume;
        maxDisplacement = Math.max(maxDisplacement, res.maxDisplacementMm);
        displacedMm3 += res.displacedVolumeMm3;
      }
      distorted = current.data as Float32Array;
      onProgress?.({ stage: "MR metal artifacts", fraction: 1 });
    }
    lap("mr_artifacts");
    // Average the sub-slices into the MR slices; labels from the middle sub-slice.
    const nMr = mrGrid.count;
    const plane = mrSpec.dims[0] * mrSpec.dims[1];
    const averaged = new Float32Array(nMr);
    const labelsMr = new Uint8Array(nMr);
    const mid = (nSub - 1) >> 1;
    for (let k = 0; k < mrSpec.dims[2]; k++) {
      for (let s = 0; s < nSub; s++) {
        const src = (k * nSub + s) * plane;
        const dst = k * plane;
        for (let p = 0; p < plane; p++) averaged[dst + p] += distorted[src + p] / nSub;
        if (s === mid) labelsMr.set(mrLabelsSub.subarray(src, src + plane), dst);
      }
    }
    const biased = applyBiasField(mrGrid.withData(averaged), new Rng(noiseSeeds.bias)).volume;
    const noisy = addRicianNoise(biased, MR_NOISE, new Rng(noiseSeeds.mr));
    const mrOut = new Int16Array(nMr);
    for (let i = 0; i < nMr; i++) {
      const v = Math.round(noisy.data[i]);
      mrOut[i] = v > 32767 ? 32767 : v;
    }
    lap("mr_noise");

    // ---- truth ------------------------------------------------------------------------------
    const landmarksCt = anatomy.landmarks.map((l) => ({
      label: l.label,
      point: mapPoint(patientToCt, l.point),
    }));
    const landmarksMr = landmarksCt.map((l) => ({ label: l.label, point: mapPoint(fixedToMoving, l.point) }));
    const hipCt = {
      right: mapPoint(patientToCt, anatomy.hipCentersMm.right).map((x) => round(x, 4)),
      left: mapPoint(patientToCt, anatomy.hipCentersMm.left).map((x) => round(x, 4)),
    };
    const implantCenters = implantsCt.map((m) => m.headCenterMm.map((x) => round(x, 4)));
    const first = implantsCt[0];
    const truth: PhantomTruth = {
      format: "coxa.phantom-truth",
      version: 1,
      fixed: "ct.nii.gz",
      moving: "mr.nii.gz",
      maps: "fixed-to-moving",
      frame: "RAS",
      units: "mm",
      fixed_to_moving: toRows(fixedToMoving),
      moving_to_fixed: toRows(movingToFixed),
      parameters: { center_mm: centerMm, rotation_deg: rotationDeg, translation_mm: translationMm },
      seed: o.seed,
      size: o.size,
      implant: o.implant,
      severity: o.severity,
      pose_deg: o.poseDeg,
      mr_fov: o.mrFov,
      implant_center_mm: first ? implantCenters[0] : null,
      other_hip_center_mm: first ? (first.side === "right" ? hipCt.left : hipCt.right) : null,
      implant_centers_mm: implantCenters,
      hip_centers_mm: hipCt,
      ct: {
        shape: [...sizes.ct.dims],
        spacing_mm: [...sizes.ct.spacingMm],
        index_to_world: toRows(ctAffine),
      },
      mr: {
        shape: [...mrSpec.dims],
        spacing_mm: [...mrSpec.spacingMm],
        index_to_world: toRows(mrAffine),
        readout_axis: 0,
        b0_direction_mr_world: [0, 0, 1],
      },
      patient_to_ct: toRows(patientToCt),
      ct_metal_slices: artifacts.slicesWithMetal.length,
      mr_max_displacement_mm: round(maxDisplacement, 3),
      mr_displaced_volume_ml: round(displacedMm3 / 1000, 3),
      noise: { ct_hu: CT_NOISE_HU, mr_sigma: MR_NOISE },
      software: softwareInfo(),
    };
    return {
      ct: ctGrid.withData(ctOut),
      mr: mrGrid.withData(mrOut),
      labelsCt: ctGrid.withData(Uint8Array.from(ctLabels)),
      labelsMr: mrGrid.withData(labelsMr),
      landmarksCt,
      landmarksMr,
      truth,
      metalMaskCt,
      implantsCt,
      timingS: timing,
    };
  } finally {
    await pool?.close();
  }
}

function translationOf(t: readonly number[]): Mat4 {
  const m = identity();
  m[3] = t[0];
  m[7] = t[1];
  m[11] = t[2];
  return m;
}

/** Files a phantom case writes, in order. */
export const PHANTOM_FILES = [
  "ct.nii.gz",
  "mr.nii.gz",
  "labels-ct.nii.gz",
  "labels-mr.nii.gz",
  "labels.json",
  "landmarks-ct.csv",
  "landmarks-mr.csv",
  "truth.json",
] as const;

/** Landmarks as design.md CSV: header `label,x,y,z`, world RAS mm, 6 decimals. */
export function landmarksCsv(landmarks: readonly Landmark[]): string {
  const lines = ["label,x,y,z"];
  for (const l of landmarks) lines.push(`${l.label},${l.point.map((x) => x.toFixed(6)).join(",")}`);
  return `${lines.join("\n")}\n`;
}

/** labels.json: label value -> name. */
export function labelsDocument(): Record<string, string> {
  const out: Record<string, string> = {};
  for (const [value, name] of Object.entries(LABELS)) out[value] = name;
  return out;
}

/** Options of writePhantomCase. */
export interface WritePhantomOptions extends PhantomOptions {
  /** Output directory (created if absent). */
  outDir: string;
  /** Replace existing phantom files in outDir. */
  force?: boolean;
  /** gzip level of the .nii.gz files; default 6. */
  gzipLevel?: number;
}

/** What writePhantomCase reports (the CLI's --json output). */
export interface PhantomSummary {
  out_dir: string;
  files: string[];
  seed: number;
  size: PhantomSize;
  implant: ImplantChoice;
  severity: number;
  mr_fov: MrFov;
  ct_shape: number[];
  mr_shape: number[];
  landmarks: number;
  ct_metal_slices: number;
  mr_max_displacement_mm: number;
  rotation_deg: number[];
  translation_mm: number[];
  timing_s: Record<string, number>;
}

/**
 * Generate a phantom case and write its files into `outDir` (each file atomically).
 * @throws CoxaError BAD_ARGUMENT for invalid options or an outDir that is a file,
 *   WOULD_OVERWRITE when phantom files exist there and `force` is not set
 */
export async function writePhantomCase(options: WritePhantomOptions): Promise<PhantomSummary> {
  const dir = options.outDir;
  resolvePhantomOptions(options);
  if (existsSync(dir) && !statSync(dir).isDirectory()) {
    throw new CoxaError("BAD_ARGUMENT", "output path exists and is not a directory", dir);
  }
  if (!options.force) {
    const present = PHANTOM_FILES.filter((f) => existsSync(join(dir, f)));
    if (present.length > 0) {
      throw new CoxaError(
        "WOULD_OVERWRITE",
        `already holds phantom files (${present.join(", ")}); use --force to replace them`,
        dir,
      );
    }
  }
  const result = await generatePhantom(options);
  mkdirSync(dir, { recursive: true });
  const t0 = performance.now();
  options.onProgress?.({ stage: "write", fraction: 0 });
  const gzipLevel = options.gzipLevel ?? 6;
  writeNifti(join(dir, "ct.nii.gz"), result.ct, {
    datatype: "int16",
    gzipLevel,
    description: "coxa synthetic CT (HU)",
  });
  options.onProgress?.({ stage: "write", fraction: 0.5 });
  writeNifti(join(dir, "mr.nii.gz"), result.mr, {
    datatype: "int16",
    gzipLevel,
    description: "coxa synthetic T1-like MR",
  });
  writeNifti(join(dir, "labels-ct.nii.gz"), result.labelsCt, {
    datatype: "uint8",
    gzipLevel,
    description: "coxa labels (CT grid)",
  });
  writeNifti(join(dir, "labels-mr.nii.gz"), result.labelsMr, {
    datatype: "uint8",
    gzipLevel,
    description: "coxa labels (MR grid)",
  });
  writeJsonAtomic(join(dir, "labels.json"), labelsDocument());
  writeFileAtomic(join(dir, "landmarks-ct.csv"), landmarksCsv(result.landmarksCt));
  writeFileAtomic(join(dir, "landmarks-mr.csv"), landmarksCsv(result.landmarksMr));
  writeJsonAtomic(join(dir, "truth.json"), result.truth);
  options.onProgress?.({ stage: "write", fraction: 1 });
  const timing = { ...result.timingS, write: round((performance.now() - t0) / 1000, 3) };
  const t = result.truth;
  return {
    out_dir: dir,
    files: [...PHANTOM_FILES],
    seed: t.seed,
    size: t.size,
    implant: t.implant,
    severity: t.severity,
    mr_fov: t.mr_fov,
    ct_shape: t.ct.shape,
    mr_shape: t.mr.shape,
    landmarks: result.landmarksCt.length,
    ct_metal_slices: t.ct_metal_slices,
    mr_max_displacement_mm: t.mr_max_displacement_mm,
    rotation_deg: t.parameters.rotation_deg,
    translation_mm: t.parameters.translation_mm,
    timing_s: timing,
  };
}
