/**
 * A virtual total hip replacement: tapered titanium-like stem in the femoral canal, a
 * cobalt-chrome-like head (about 32 mm) on a titanium neck, a polyethylene liner and a titanium
 * hemispherical cup (about 52 mm).
 *
 * Conventions: the model lives in one world frame (RAS+ mm of the image it was placed in: the
 * CT world for the phantom). `cupAxis` is the unit opening direction of the cup (from its pole
 * through the centre of its rim plane), `neckAxis` the unit direction from the head centre along
 * the prosthetic neck to the stem shoulder, `stemAxis` the unit direction from the shoulder down
 * the canal. `transformImplant(model, m)` carries the model into another world by a rigid matrix
 * m (x' = m x), e.g. into MR world with the phantom's fixed_to_moving.
 *
 * Default cup orientation uses the radiographic definitions of inclination and anteversion
 * (Murray 1993, J Bone Joint Surg Br 75:228): axis = (side sin(RI) cos(RA), sin(RA), -cos(RI) cos(RA)).
 * Sizes are typical of the trade, from memory (no source).
 */
import { CoxaError } from "../common/errors.js";
import type { Mat4 } from "../geometry/mat4.js";
import { Volume } from "../image/volume.js";
import { compileStructures, renderStructures, type Structure } from "./render.js";
import { type Shape, shapeBounds, type V3 } from "./sdf.js";
import { METALS, TISSUES } from "./tissues.js";

/** A hip side (patient's left or right). */
export type Side = "left" | "right";

/** Geometry of one implanted hip, world mm. */
export interface ImplantModel {
  side: Side;
  /** Centre of the prosthetic head and of the cup sphere. */
  headCenterMm: V3;
  /** Unit cup opening direction. */
  cupAxis: V3;
  /** Unit direction from the head centre to the stem shoulder. */
  neckAxis: V3;
  /** Unit direction from the shoulder down the canal. */
  stemAxis: V3;
  headRadiusMm: number;
  cupOuterRadiusMm: number;
  /** Metal shell thickness of the cup. */
  cupShellMm: number;
  /** Head centre to stem shoulder. */
  neckLengthMm: number;
  neckRadiusMm: number;
  /** Shoulder to tip. */
  stemLengthMm: number;
  /** Stem radius at the shoulder and at the tip. */
  stemProximalRadiusMm: number;
  stemDistalRadiusMm: number;
}

/** Label values of the implant parts in label volumes (labels.json names them). */
export const IMPLANT_LABELS = { stem: 40, head: 41, cup: 42, liner: 43 } as const;

/** Metal material of each implant label (mask code as in tissues.ts METALS). */
export const IMPLANT_METAL_CODE: Readonly<Record<number, number>> = {
  [IMPLANT_LABELS.stem]: METALS.titanium.code,
  [IMPLANT_LABELS.head]: METALS.cocr.code,
  [IMPLANT_LABELS.cup]: METALS.titanium.code,
};

/** Options of placeImplant; lengths in mm, angles in degrees, points in world mm. */
export interface PlaceImplantOptions {
  side: Side;
  /** Where the femoral head centre is, world mm. */
  headCenterMm: V3;
  /** Radiographic cup inclination, degrees; default 42. */
  inclinationDeg?: number;
  /** Radiographic cup anteversion, degrees; default 15. */
  anteversionDeg?: number;
  /** Overrides of the default axes (world unit vectors; RAS world assumed for the defaults). */
  cupAxis?: V3;
  neckAxis?: V3;
  stemAxis?: V3;
  /** Head diameter in mm; default 32. */
  headDiameterMm?: number;
  /** Cup outer diameter in mm; default 52. */
  cupDiameterMm?: number;
  /** Stem length in mm; default 140. */
  stemLengthMm?: number;
}

/**
 * An implant placed at a femoral head centre with default (or given) orientation.
 * @param options - side, head centre (world mm), optional angles and sizes
 * @throws CoxaError BAD_ARGUMENT for non-finite points, zero axes or sizes that do not nest
 */
export function placeImplant(options: PlaceImplantOptions): ImplantModel {
  const s = options.side === "right" ? 1 : options.side === "left" ? -1 : 0;
  if (s === 0) throw new CoxaError("BAD_ARGUMENT", `implant side "${options.side}" is not left or right`);
  const ri = ((options.inclinationDeg ?? 42) * Math.PI) / 180;
  const ra = ((options.anteversionDeg ?? 15) * Math.PI) / 180;
  const cupAxis = unit(
    options.cupAxis ?? [s * Math.sin(ri) * Math.cos(ra), Math.sin(ra), -Math.cos(ri) * Math.cos(ra)],
  );
  const neckAxis = unit(options.neckAxis ?? [s * 0.69, -0.2, -0.69]);
  const stemAxis = unit(options.stemAxis ?? [-s * 0.05, 0.02, -1]);
  const headRadiusMm = (options.headDiameterMm ?? 32) / 2;
  const cupOuterRadiusMm = (options.cupDiameterMm ?? 52) / 2;
  const model: ImplantModel = {
    side: options.side,
    headCenterMm: finite3(options.headCenterMm, "head centre"),
    cupAxis,
    neckAxis,
    stemAxis,
    headRadiusMm,
    cupOuterRadiusMm,
    cupShellMm: 4,
    neckLengthMm: 34,
    neckRadiusMm: 6.5,
    stemLengthMm: options.stemLengthMm ?? 140,
    stemProximalRadiusMm: 9,
    stemDistalRadiusMm: 4.5,
  };
  checkImplant(model);
  return model;
}

function checkImplant(m: ImplantModel): void {
  const sizes = [
    m.headRadiusMm,
    m.cupOuterRadiusMm,
    m.cupShellMm,
    m.neckLengthMm,
    m.neckRadiusMm,
    m.stemLengthMm,
  ];
  if (!sizes.every((v) => Number.isFinite(v) && v > 0)) {
    throw new CoxaError("BAD_ARGUMENT", "implant sizes must be positive");
  }
  if (m.cupOuterRadiusMm - m.cupShellMm <= m.headRadiusMm + 1) {
    throw new CoxaError(
      "BAD_ARGUMENT",
      `cup of ${2 * m.cupOuterRadiusMm} mm leaves no room for a liner around a ${2 * m.headRadiusMm} mm head`,
    );
  }
}

function finite3(v: V3, what: string): V3 {
  if (v.length !== 3 || !v.every((x) => Number.isFinite(x))) {
    throw new CoxaError("BAD_ARGUMENT", `implant ${what} must be three finite numbers`);
  }
  return [v[0], v[1], v[2]];
}

function unit(v: V3): V3 {
  const len = Math.hypot(v[0], v[1], v[2]);
  if (!(len > 1e-9) || !Number.isFinite(len))
    throw new CoxaError("BAD_ARGUMENT", "implant axis has zero length");
  return [v[0] / len, v[1] / len, v[2] / len];
}

function add(a: V3, b: V3, t = 1): V3 {
  return [a[0] + t * b[0], a[1] + t * b[1], a[2] + t * b[2]];
}

function cross(a: V3, b: V3): V3 {
  return [a[1] * b[2] - a[2] * b[1], a[2] * b[0] - a[0] * b[2], a[0] * b[1] - a[1] * b[0]];
}

/** The stem shoulder (top of the stem, end of the neck), world mm. */
export function stemShoulder(m: ImplantModel): V3 {
  return add(m.headCenterMm, m.neckAxis, m.neckLengthMm);
}

/** The stem tip, world mm. */
export function stemTip(m: ImplantModel): V3 {
  return add(stemShoulder(m), m.stemAxis, m.stemLengthMm);
}

/** Shapes of the implant parts in painting order (cup, liner, head, neck + stem). */
export function implantParts(
  m: ImplantModel,
): { part: keyof typeof IMPLANT_LABELS; tissue: "titanium" | "cocr" | "polyethylene"; shape: Shape }[] {
  const c = m.headCenterMm;
  const rOut = m.cupOuterRadiusMm;
  const rIn = rOut - m.cupShellMm;
  // Hemisphere behind the rim plane through the centre (inside where dot(x - c, cupAxis) <= 0).
  const hemi: Shape = { op: "plane", p: c, n: m.cupAxis };
  const cup: Shape = {
    op: "subtract",
    from: { op: "intersect", of: [{ op: "sphere", c, r: rOut }, hemi] },
    cut: { op: "sphere", c, r: rIn },
  };
  const liner: Shape = {
    op: "subtract",
    from: {
      op: "intersect",
      of: [
        { op: "sphere", c, r: rIn },
        { op: "plane", p: add(c, m.cupAxis, 2), n: m.cupAxis },
      ],
    },
    cut: { op: "sphere", c, r: m.headRadiusMm + 0.3 },
  };
  const head: Shape = { op: "sphere", c, r: m.headRadiusMm };
  const shoulder = stemShoulder(m);
  const tip = stemTip(m);
  // Medial-lateral axis of the stem body: the neck direction with its stem-axis part removed.
  const along = m.neckAxis[0] * m.stemAxis[0] + m.neckAxis[1] * m.stemAxis[1] + m.neckAxis[2] * m.stemAxis[2];
  const ml = unit(add(m.neckAxis, m.stemAxis, -along));
  const ap = unit(cross(m.stemAxis, ml));
  const stem: Shape = {
    op: "union",
    k: 6,
    of: [
      {
        op: "capsule",
        a: add(c, m.neckAxis, m.headRadiusMm * 0.3),
        b: shoulder,
        ra: m.neckRadiusMm * 0.8,
        rb: m.neckRadiusMm,
      },
      { op: "capsule", a: shoulder, b: tip, ra: m.stemProximalRadiusMm, rb: m.stemDistalRadiusMm },
      {
        op: "ellipsoid",
        c: add(add(shoulder, m.stemAxis, 22), ml, -2),
        r: [m.stemProximalRadiusMm * 1.45, m.stemProximalRadiusMm * 0.85, 32],
        axes: [ml, ap, m.stemAxis],
      },
    ],
  };
  return [
    { part: "cup", tissue: "titanium", shape: cup },
    { part: "liner", tissue: "polyethylene", shape: liner },
    { part: "head", tissue: "cocr", shape: head },
    { part: "stem", tissue: "titanium", shape: stem },
  ];
}

/** Implant parts as render structures (labels IMPLANT_LABELS). */
export function implantStructures(m: ImplantModel): Structure[] {
  return implantParts(m).map((p) => ({
    name: `implant_${p.part}`,
    shape: p.shape,
    layers: [{ inset: 0, tissue: p.tissue, label: IMPLANT_LABELS[p.part] }],
  }));
}

/**
 * The model carried into another world by a rigid (or similarity) matrix m: x' = m x.
 * Directions are mapped by the 3x3 block and renormalised; lengths scale by the mean column norm.
 */
export function transformImplant(model: ImplantModel, m: Mat4): ImplantModel {
  const point = (p: V3): V3 => [
    m[0] * p[0] + m[1] * p[1] + m[2] * p[2] + m[3],
    m[4] * p[0] + m[5] * p[1] + m[6] * p[2] + m[7],
    m[8] * p[0] + m[9] * p[1] + m[10] * p[2] + m[11],
  ];
  const dir = (d: V3): V3 =>
    unit([
      m[0] * d[0] + m[1] * d[1] + m[2] * d[2],
      m[4] * d[0] + m[5] * d[1] + m[6] * d[2],
      m[8] * d[0] + m[9] * d[1] + m[10] * d[2],
    ]);
  const scale =
    (Math.hypot(m[0], m[4], m[8]) + Math.hypot(m[1], m[5], m[9]) + Math.hypot(m[2], m[6], m[10])) / 3;
  return {
    ...model,
    headCenterMm: point(model.headCenterMm),
    cupAxis: dir(model.cupAxis),
    neckAxis: dir(model.neckAxis),
    stemAxis: dir(model.stemAxis),
    headRadiusMm: model.headRadiusMm * scale,
    cupOuterRadiusMm: model.cupOuterRadiusMm * scale,
    cupShellMm: model.cupShellMm * scale,
    neckLengthMm: model.neckLengthMm * scale,
    neckRadiusMm: model.neckRadiusMm * scale,
    stemLengthMm: model.stemLengthMm * scale,
    stemProximalRadiusMm: model.stemProximalRadiusMm * scale,
    stemDistalRadiusMm: model.stemDistalRadiusMm * scale,
  };
}

/** Options of burnImplant (HU). */
export interface BurnImplantOptions {
  /** HU written into metal; default 3071 (top of the 12-bit range). */
  metalHu?: number;
  /** HU of the polyethylene liner; default TISSUES.polyethylene.hu (-90). */
  linerHu?: number;
}

/**
 * Burn the implant into a CT (HU): metal and liner are painted over the image with partial-volume
 * edges. The model must be in the CT's world.
 * @param ct - CT volume in HU (any datatype; not modified)
 * @param model - implant in the CT world
 * @returns the new CT (Float32Array HU), a metal mask (METALS codes: 1 titanium, 2 cobalt-chrome,
 *   0 elsewhere) and the implant label volume (IMPLANT_LABELS, 0 elsewhere)
 */
export function burnImplant(
  ct: Volume,
  model: ImplantModel,
  options: BurnImplantOptions = {},
): { ct: Volume<Float32Array>; metalMask: Uint8Array; labels: Uint8Array } {
  const values = Float32Array.from(ct.data);
  const labels = new Uint8Array(ct.count);
  paintImplant(values, labels, ct.dims, ct.indexToWorld, model, "ct");
  const metalHu = options.metalHu ?? TISSUES.titanium.hu;
  const linerHu = options.linerHu ?? TISSUES.polyethylene.hu;
  const metalMask = metalMaskFromLabels(labels);
  // The painter used the tissue table; apply requested HU for fully covered voxels.
  for (let i = 0; i < values.length; i++) {
    if (metalMask[i]) values[i] = metalHu;
    else if (labels[i] === IMPLANT_LABELS.liner) values[i] = linerHu;
  }
  return { ct: ct.withData(values), metalMask, labels };
}

/**
 * Paint the implant into intensity and label buffers of a grid (used for CT and MR rendering).
 * @param indexToWorld - voxel index -> the model's world
 */
export function paintImplant(
  values: Float32Array,
  labels: Uint8Array | undefined,
  dims: readonly [number, number, number],
  indexToWorld: Mat4,
  model: ImplantModel,
  modality: "ct" | "mr",
  kStart = 0,
  kEnd = dims[2],
): void {
  const spacing = [
    Math.hypot(indexToWorld[0], indexToWorld[4], indexToWorld[8]),
    Math.hypot(indexToWorld[1], indexToWorld[5], indexToWorld[9]),
  ];
  renderStructures({
    structures: compileStructures(implantStructures(model)),
    dims,
    indexToFrame: indexToWorld,
    modality,
    partialMm: (spacing[0] + spacing[1]) / 2,
    kStart,
    kEnd,
    values,
    labels,
  });
}

/** Metal mask (METALS codes) from an implant label volume. */
export function metalMaskFromLabels(labels: Uint8Array): Uint8Array {
  const out = new Uint8Array(labels.length);
  for (let i = 0; i < labels.length; i++) {
    const code = IMPLANT_METAL_CODE[labels[i]];
    if (code !== undefined) out[i] = code;
  }
  return out;
}

/**
 * Metal of the implant rasterised on a box grid around it (for MR susceptibility and voids).
 * @param model - implant, world mm
 * @param spacingMm - isotropic voxel size of the box grid (default 1 mm)
 * @returns a uint8 Volume of METALS codes whose indexToWorld maps into the model's world
 */
export function rasterizeImplantMetal(model: ImplantModel, spacingMm = 1): Volume<Uint8Array> {
  if (!(spacingMm > 0)) throw new CoxaError("BAD_ARGUMENT", `spacing ${spacingMm} mm is not positive`);
  const lo = [Infinity, Infinity, Infinity];
  const hi = [-Infinity, -Infinity, -Infinity];
  for (const part of implantParts(model)) {
    if (part.tissue === "polyethylene") continue;
    const b = shapeBounds(part.shape);
    for (let a = 0; a < 3; a++) {
      lo[a] = Math.min(lo[a], b.min[a]);
      hi[a] = Math.max(hi[a], b.max[a]);
    }
  }
  const pad = 2 * spacingMm;
  const dims: [number, number, number] = [0, 0, 0];
  for (let a = 0; a < 3; a++) {
    lo[a] -= pad;
    hi[a] += pad;
    dims[a] = Math.max(1, Math.ceil((hi[a] - lo[a]) / spacingMm) + 1);
  }
  const m = new Float64Array(16);
  m[0] = m[5] = m[10] = spacingMm;
  m[3] = lo[0];
  m[7] = lo[1];
  m[11] = lo[2];
  m[15] = 1;
  const values = new Float32Array(dims[0] * dims[1] * dims[2]);
  const labels = new Uint8Array(values.length);
  paintImplant(values, labels, dims, m, model, "ct");
  return new Volume(dims, metalMaskFromLabels(labels), m);
}
