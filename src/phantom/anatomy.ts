/**
 * The synthetic hip: an invented adult pelvis and proximal thighs built from analytic signed-distance
 * shapes (no meshes), with labels and anatomical landmarks.
 *
 * Frame: the PATIENT frame, RAS+ millimetres (+x the patient's right, +y anterior, +z superior),
 * origin near the midpoint of the two native femoral head centres. Shapes, landmarks and the
 * implant placement are all in this frame; the phantom maps it into CT and MR world.
 *
 * The anatomy is deliberately asymmetric (head sizes and positions, muscle bulk, bladder, bowel gas
 * on the left, fat distribution), so that a rigid transform between two images of it is unique.
 * The implanted side has its native femoral head and neck removed, and its gluteal muscles are
 * thinner with fatty infiltration (common after hip replacement; common practice, no source).
 * Sizes are plausible adult figures from memory (no source); `seed` jitters them by a few percent.
 */
import { Rng } from "../common/random.js";
import { identity } from "../geometry/mat4.js";
import { rotationFromDeg } from "../geometry/rotation.js";
import {
  IMPLANT_LABELS,
  type ImplantModel,
  implantStructures,
  placeImplant,
  type Side,
  stemTip,
} from "./implant.js";
import type { Structure } from "./render.js";
import type { Shape, V3 } from "./sdf.js";

/** Label values and names (labels.json). Right-side structures have even values where paired. */
export const LABELS: Readonly<Record<number, string>> = {
  0: "background",
  1: "skin",
  2: "subcutaneous_fat",
  3: "soft_tissue",
  4: "pelvic_fat",
  5: "bladder",
  6: "bowel",
  7: "bowel_gas",
  8: "femoral_vessels",
  9: "intervertebral_disc",
  10: "hip_bone_right",
  11: "hip_bone_left",
  12: "sacrum_coccyx",
  13: "femur_right",
  14: "femur_left",
  15: "lumbar_vertebra_l5",
  16: "hip_cartilage_right",
  17: "hip_cartilage_left",
  18: "spinal_canal",
  20: "gluteus_maximus_right",
  21: "gluteus_maximus_left",
  22: "gluteus_medius_minimus_right",
  23: "gluteus_medius_minimus_left",
  24: "iliopsoas_right",
  25: "iliopsoas_left",
  26: "obturator_internus_right",
  27: "obturator_internus_left",
  28: "adductors_right",
  29: "adductors_left",
  30: "quadriceps_right",
  31: "quadriceps_left",
  32: "hamstrings_right",
  33: "hamstrings_left",
  34: "tensor_fasciae_latae_right",
  35: "tensor_fasciae_latae_left",
  36: "rectus_abdominis",
  37: "erector_spinae",
  [IMPLANT_LABELS.stem]: "implant_stem",
  [IMPLANT_LABELS.head]: "implant_head",
  [IMPLANT_LABELS.cup]: "implant_cup",
  [IMPLANT_LABELS.liner]: "implant_liner",
};

/** A named point, patient frame mm. */
export interface Landmark {
  label: string;
  point: V3;
}

/** Options of buildAnatomy. */
export interface AnatomyOptions {
  /** Seed of the size/position jitter and bowel gas. */
  seed: number;
  /** Side(s) with a hip replacement. */
  implant: "left" | "right" | "both" | "none";
}

/** The built anatomy. */
export interface Anatomy {
  /** Painting order: later structures override earlier ones (implants last). */
  structures: Structure[];
  landmarks: Landmark[];
  /** Implants in the patient frame. */
  implants: ImplantModel[];
  /** Native femoral head centres (the prosthetic head centre on an implanted side). */
  hipCentersMm: { right: V3; left: V3 };
  /** Body extent (patient frame), for field-of-view planning. */
  bodyBoundsMm: { min: V3; max: V3 };
}

function v(x: number, y: number, z: number): V3 {
  return [x, y, z];
}

function add(a: V3, b: V3, t = 1): V3 {
  return [a[0] + t * b[0], a[1] + t * b[1], a[2] + t * b[2]];
}

function norm(a: V3): V3 {
  const l = Math.hypot(a[0], a[1], a[2]);
  return [a[0] / l, a[1] / l, a[2] / l];
}

/** Local axes (rows: local x, y, z as world unit vectors) of R = Rz Ry Rx, degrees. */
function axesDeg(rx: number, ry: number, rz: number): [V3, V3, V3] {
  const m = rotationFromDeg(identity(), rx, ry, rz);
  return [v(m[0], m[4], m[8]), v(m[1], m[5], m[9]), v(m[2], m[6], m[10])];
}

function ell(c: V3, r: V3, axes?: [V3, V3, V3]): Shape {
  return axes ? { op: "ellipsoid", c, r, axes } : { op: "ellipsoid", c, r };
}

function cap(a: V3, b: V3, ra: number, rb = ra): Shape {
  return { op: "capsule", a, b, ra, rb };
}

function union(k: number, ...of: Shape[]): Shape {
  return { op: "union", of, k };
}

function inter(...of: Shape[]): Shape {
  return { op: "intersect", of };
}

/** Project `d` onto the plane with unit normal `n` and normalise. */
function inPlane(d: V3, n: V3): V3 {
  const t = d[0] * n[0] + d[1] * n[1] + d[2] * n[2];
  return norm([d[0] - t * n[0], d[1] - t * n[1], d[2] - t * n[2]]);
}

/**
 * Build the synthetic hip anatomy.
 * @param options - seed and implant side(s)
 */
export function buildAnatomy(options: AnatomyOptions): Anatomy {
  const rng = new Rng(options.seed * 7919 + 17);
  const jit = (f: number) => 1 + rng.range(-f, f);
  const mm = (a: number) => rng.range(-a, a);
  const implanted = (s: number) =>
    options.implant === "both" ||
    (options.implant === "right" ? s > 0 : options.implant === "left" ? s < 0 : false);

  // Native hip centres and head radii: deliberately unequal.
  const headR = { r: 24.5 * jit(0.03), l: 23.4 * jit(0.03) };
  const hip = {
    r: v(88 + mm(2), 4 + mm(2), 0 + mm(1.5)),
    l: v(-90 + mm(2), 1.5 + mm(2), 2 + mm(1.5)),
  };
  const bodyScale = jit(0.04);
  const fatScale = jit(0.2);

  // ---- body outline (skin), inner boundary of subcutaneous fat -------------------------------
  const bodyShape = (shrink: (base: number) => number): Shape =>
    union(
      34,
      inter(ell(v(2, -8, 300), v(168 * bodyScale - shrink(18), 116 * bodyScale - shrink(20), 900)), {
        op: "plane",
        p: v(0, 0, -45),
        n: v(0, 0, -1),
      }),
      ell(v(118, -8, -12), v(72 - shrink(13), 96 - shrink(14), 105)),
      ell(v(-121, -6, -10), v(70 - shrink(15), 95 - shrink(15), 105)),
      ell(v(62, -76, -38), v(82 - shrink(24), 62 - shrink(26), 86)),
      ell(v(-64, -74, -36), v(84 - shrink(27), 63 - shrink(28), 88)),
      cap(v(92, 4, -30), v(80, 14, -520), 94 - shrink(13), 78 - shrink(11)),
      cap(v(-94, 2, -30), v(-82, 12, -520), 96 - shrink(15), 79 - shrink(12)),
    );
  const outer = bodyShape(() => 0);
  const inner = bodyShape((b) => b * fatScale);
  const structures: Structure[] = [
    {
      name: "body",
      shape: outer,
      layers: [
        { inset: 0, tissue: "skin", label: 1 },
        { inset: 2.2, tissue: "fat", label: 2 },
      ],
    },
    { name: "inner_body", shape: inner, layers: [{ inset: 0, tissue: "soft_tissue", label: 3 }] },
  ];
  const inBody = (s: Shape): Shape => inter(s, inner);

  // ---- muscles (before bones, which override them) --------------------------------------------
  for (const s of [1, -1]) {
    const side = s > 0 ? 0 : 1;
    const H = s > 0 ? hip.r : hip.l;
    const atrophy = implanted(s) ? 0.85 : 1;
    const muscle = implanted(s) ? "muscle_fatty" : "muscle";
    const bulk = s > 0 ? jit(0.04) * 1.04 : jit(0.04);
    const wingAxes = axesDeg(0, s * 18, -s * 32);
    const m = (name: string, label: number, shape: Shape, tissue: "muscle" | "muscle_fatty" = "muscle") =>
      structures.push({ name, shape: inBody(shape), layers: [{ inset: 0, tissue, label: label + side }] });
    m(
      "gluteus_maximus",
      20,
      ell(v(s * 86, -90, -18), v(54 * bulk * atrophy, 30 * bulk * atrophy, 88), axesDeg(0, -s * 34, s * 12)),
      muscle,
    );
    m(
      "gluteus_medius_minimus",
      22,
      ell(add(v(s * 96, -26, 72), wingAxes[0], 17), v(15 * atrophy * bulk, 56, 50), wingAxes),
      muscle,
    );
    m(
      "iliopsoas",
      24,
      union(
        10,
        cap(v(s * 36, -38, 150), v(s * 66, -12, 62), 19 * bulk, 23 * bulk),
        cap(v(s * 66, -12, 62), add(H, v(-s * 6, 38, -8)), 23 * bulk, 15 * bulk),
        cap(add(H, v(-s * 6, 38, -8)), add(H, v(s * 20, -2, -60)), 15 * bulk, 9),
        ell(add(v(s * 92, -22, 78), wingAxes[0], -15), v(12, 50, 40), wingAxes),
      ),
    );
    m("obturator_internus", 26, ell(add(H, v(-s * 40, -10, -20)), v(8, 25, 21)));
    m("adductors", 28, cap(add(H, v(-s * 48, 16, -58)), add(H, v(-s * 12, 4, -330)), 36 * bulk, 30));
    m(
      "quadriceps",
      30,
      union(
        8,
        cap(add(H, v(s * 26, 26, -45)), add(H, v(s * 4, 32, -420)), 36 * bulk, 42),
        cap(add(H, v(s * 58, 2, -40)), add(H, v(s * 36, 8, -400)), 20 * bulk, 24),
      ),
    );
    m("hamstrings", 32, cap(add(H, v(-s * 16, -46, -78)), add(H, v(-s * 6, -40, -420)), 30 * bulk, 34));
    m("tensor_fasciae_latae", 34, cap(add(H, v(s * 60, 30, 48)), add(H, v(s * 72, 14, -45)), 11, 9));
  }
  structures.push({
    name: "rectus_abdominis",
    shape: inBody(union(4, ell(v(38, 84, 96), v(34, 9, 70)), ell(v(-37, 83, 98), v(33, 9, 70)))),
    layers: [{ inset: 0, tissue: "muscle", label: 36 }],
  });
  structures.push({
    name: "erector_spinae",
    shape: inBody(union(6, ell(v(31, -92, 150), v(27, 24, 74)), ell(v(-33, -93, 151), v(28, 24, 74)))),
    layers: [{ inset: 0, tissue: "muscle", label: 37 }],
  });

  // ---- pelvic contents ---------------------------------------------------------------------
  structures.push({
    name: "pelvic_fat",
    shape: ell(v(0, 2, 62), v(70, 70, 78)),
    layers: [{ inset: 0, tissue: "fat", label: 4 }],
  });
  const bowelShapes: Shape[] = [
    cap(v(3, -56, 42), v(0, -46, -44), 15, 13), // rectum
    union(8, cap(v(-48, 8, 96), v(-20, 32, 62), 17), cap(v(-20, 32, 62), v(-4, -30, 58), 16)), // sigmoid
    cap(v(26, 40, 116), v(-30, 46, 122), 16), // small bowel loops
    cap(v(44, 8, 108), v(10, -12, 126), 15),
    cap(v(-36, -8, 118), v(-62, 24, 104), 15),
  ];
  structures.push({
    name: "bowel",
    shape: inter(union(4, ...bowelShapes), inner),
    layers: [{ inset: 0, tissue: "bowel", label: 6 }],
  });
  const bladderR = v(44 * jit(0.08), 29 * jit(0.08), 31 * jit(0.08));
  structures.push({
    name: "bladder",
    shape: ell(v(7 + mm(3), 30, 8 + mm(3)), bladderR),
    layers: [{ inset: 0, tissue: "fluid", label: 5 }],
  });
  // Gas pockets: rectum, sigmoid (left) and a few small-bowel bubbles; positions seeded.
  const gasCentres: [V3, number][] = [
    [v(3 + mm(3), -50 + mm(3), 12 + mm(8)), 7 + mm(2)],
    [v(-36 + mm(5), 18 + mm(5), 82 + mm(6)), 9 + mm(3)],
    [v(-12 + mm(5), -10 + mm(5), 60 + mm(4)), 6 + mm(2)],
  ];
  for (let g = 0; g < 3; g++) gasCentres.push([v(mm(35), 30 + mm(12), 118 + mm(6)), 4 + rng.range(0, 5)]);
  structures.push({
    name: "bowel_gas",
    shape: inter(
      union(0, ...gasCentres.map(([c, r]) => ({ op: "sphere", c, r }) as Shape)),
      union(4, ...bowelShapes),
    ),
    layers: [{ inset: 0, tissue: "gas", label: 7 }],
  });

  // ---- joints: cartilage spheres, painted before the bones that bound them -------------------
  for (const s of [1, -1]) {
    if (implanted(s)) continue;
    const H = s > 0 ? hip.r : hip.l;
    const r = s > 0 ? headR.r : headR.l;
    structures.push({
      name: "hip_cartilage",
      shape: { op: "sphere", c: H, r: r + 2.4 },
      layers: [{ inset: 0, tissue: "cartilage", label: s > 0 ? 16 : 17 }],
    });
  }

  // ---- hip bones (os coxae) --------------------------------------------------------------------
  const landmarks: Landmark[] = [];
  const openings: Record<number, V3> = {};
  for (const s of [1, -1]) {
    const H = s > 0 ? hip.r : hip.l;
    const r = s > 0 ? headR.r : headR.l;
    const socketR = r + 2.8;
    // Acetabular opening: lateral, inferior, slightly anterior (inclination ~48, anteversion ~16).
    const nOpen = norm(v(s * 0.72, 0.28 + (s > 0 ? 0.02 : -0.03), -0.63));
    openings[s] = nOpen;
    const rimCentre = add(H, nOpen, 0.22 * r);
    const wingAxes = axesDeg(0, s * 18, -s * 32);
    const wingC = v(s * 96 + mm(1.5), -24, 74 + mm(2));
    const wingR = v(6.5, 72 * jit(0.03), 57 * jit(0.03));
    const acetabulum: Shape = inter(ell(add(H, v(-s * 12, -4, 8)), v(27, 33, 35), axesDeg(0, s * 20, 0)), {
      op: "plane",
      p: rimCentre,
      n: nOpen,
    });
    const tuberosity = add(H, v(-s * 25, -33, -72));
    const pubicBody = v(s * 14, 50, -38);
    const bone = {
      op: "subtract",
      from: union(
        7,
        ell(wingC, wingR, wingAxes),
        acetabulum,
        cap(v(s * 48, -58, 58), add(H, v(-s * 26, 12, 6)), 9), // pelvic brim (arcuate line)
        cap(add(H, v(-s * 24, 16, -5)), v(s * 16, 48, -27), 10, 8.5), // superior pubic ramus
        ell(pubicBody, v(9.5, 12, 19)),
        cap(v(s * 16, 44, -52), add(tuberosity, v(s * 4, 22, 6)), 7.5), // inferior ramus
        cap(add(H, v(-s * 6, -24, -16)), tuberosity, 14, 12.5), // ischium
        ell(tuberosity, v(13, 16, 13)),
      ),
      cut: { op: "sphere", c: H, r: socketR },
      k: 1.5,
    } as Shape;
    structures.push({
      name: s > 0 ? "hip_bone_right" : "hip_bone_left",
      shape: bone,
      layers: [
        { inset: 0, tissue: "cortical", label: s > 0 ? 10 : 11 },
        { inset: 2.0, tissue: "trabecular", label: s > 0 ? 10 : 11 },
      ],
    });
    const tag = s > 0 ? "right" : "left";
    const rho = Math.sqrt(socketR * socketR - (0.22 * r) ** 2);
    landmarks.push(
      { label: `acetabular_rim_superior_${tag}`, point: add(rimCentre, inPlane(v(0, 0, 1), nOpen), rho) },
      { label: `acetabular_rim_anterior_${tag}`, point: add(rimCentre, inPlane(v(0, 1, 0), nOpen), rho) },
      { label: `acetabular_rim_posterior_${tag}`, point: add(rimCentre, inPlane(v(0, -1, 0), nOpen), rho) },
      { label: `anterior_superior_iliac_spine_${tag}`, point: add(wingC, wingAxes[1], wingR[1]) },
      { label: `ischial_tuberosity_${tag}`, point: add(tuberosity, v(0, 0, -13)) },
    );
  }
  structures.push({
    name: "pubic_symphysis_disc",
    shape: { op: "box", c: v(0, 50, -38), half: v(5, 9, 16), round: 3 },
    layers: [{ inset: 0, tissue: "disc", label: 3 }],
  });

  // ---- sacrum, coccyx, L5 -------------------------------------------------------------------
  const s1Axes = axesDeg(34, 0, 0);
  const s1C = v(0, -52, 93);
  const s1R = v(25, 20, 15);
  const coccyxA = v(0, -97, -4);
  const coccyxB = v(1, -88, -29);
  const sacrum = union(
    6,
    ell(s1C, s1R, s1Axes),
    ell(v(40, -63, 86), v(27, 19, 28)),
    ell(v(-41, -62, 85), v(26, 19, 28)),
    ell(v(0, -70, 62), v(37, 17, 21), axesDeg(20, 0, 0)),
    ell(v(0, -84, 35), v(27, 14, 17), axesDeg(10, 0, 0)),
    ell(v(0, -93, 11), v(16, 11, 14)),
    cap(coccyxA, coccyxB, 6, 4),
  );
  structures.push({
    name: "sacrum_coccyx",
    shape: sacrum,
    layers: [
      { inset: 0, tissue: "cartilage", label: 3 },
      { inset: 1.4, tissue: "cortical", label: 12 },
      { inset: 3.0, tissue: "trabecular", label: 12 },
    ],
  });
  structures.push({
    name: "intervertebral_disc",
    shape: ell(v(0, -40, 110), v(25, 18, 6), axesDeg(24, 0, 0)),
    layers: [{ inset: 0, tissue: "disc", label: 9 }],
  });
  structures.push({
    name: "lumbar_vertebra_l5",
    shape: union(
      4,
      ell(v(0, -37, 128), v(27, 20, 14), axesDeg(16, 0, 0)),
      ell(v(0, -74, 130), v(13, 15, 13)),
      cap(v(30, -64, 132), v(-31, -64, 133), 7),
    ),
    layers: [
      { inset: 0, tissue: "cortical", label: 15 },
      { inset: 1.6, tissue: "trabecular", label: 15 },
    ],
  });
  structures.push({
    name: "spinal_canal",
    shape: union(4, cap(v(0, -60, 160), v(0, -66, 100), 8), cap(v(0, -66, 100), v(0, -86, 30), 6, 3.5)),
    layers: [{ inset: 0, tissue: "fluid", label: 18 }],
  });

  // ---- femora ---------------------------------------------------------------------------------
  const implants: ImplantModel[] = [];
  for (const s of [1, -1]) {
    const tag = s > 0 ? "right" : "left";
    const H = s > 0 ? hip.r : hip.l;
    const r = s > 0 ? headR.r : headR.l;
    const label = s > 0 ? 13 : 14;
    const neckBase = add(H, v(s * 37, -7, -25));
    const gt = add(H, v(s * 49, -12, -21));
    const gtR = v(14, 20, 24);
    const lt = add(H, v(s * 21, -15, -62));
    const shaftTop = add(H, v(s * 37, -4, -52));
    const shaftEnd = add(H, v(-s * 8, 10, -450));
    const parts: Shape[] = [
      ell(gt, gtR),
      ell(lt, v(9, 9, 11)),
      cap(add(H, v(s * 44, -9, -28)), add(H, v(s * 30, -7, -60)), 17, 15), // intertrochanteric
      cap(shaftTop, shaftEnd, 15.5, 13),
    ];
    let outerFemur: Shape;
    if (implanted(s)) {
      // Neck osteotomy: remove the head side of a cut plane near the neck base.
      const cutPoint = add(H, v(s * 27, -6, -33));
      const removed = inter(
        { op: "plane", p: cutPoint, n: norm(v(s * 0.8, 0, -0.6)) },
        { op: "sphere", c: H, r: 46 },
      );
      outerFemur = { op: "subtract", from: union(7, ...parts, cap(H, neckBase, 15, 17)), cut: removed };
    } else {
      outerFemur = union(7, { op: "sphere", c: H, r }, cap(H, neckBase, 15, 17), ...parts);
    }
    structures.push({
      name: `femur_${tag}`,
      shape: outerFemur,
      layers: [{ inset: 0, tissue: "cortical", label }],
    });
    // Cancellous bone in the proximal femur; thick cortex and a fatty marrow canal in the shaft.
    structures.push({
      name: `femur_${tag}_cancellous`,
      shape: inter(
        { op: "offset", of: outerFemur, by: -1.8 },
        { op: "plane", p: add(H, v(0, 0, -95)), n: v(0, 0, -1) },
      ),
      layers: [{ inset: 0, tissue: "trabecular", label }],
    });
    structures.push({
      name: `femur_${tag}_canal`,
      shape: cap(add(H, v(s * 33, -4, -78)), add(shaftEnd, v(0, 0, 20)), 7.5, 7),
      layers: [{ inset: 0, tissue: "marrow", label }],
    });
    landmarks.push(
      { label: `greater_trochanter_tip_${tag}`, point: add(gt, v(0, 0, gtR[2])) },
      { label: `lesser_trochanter_${tag}`, point: add(lt, norm(v(-s, -1, 0)), 9) },
    );
    if (implanted(s)) {
      const shaftDir = norm(add(shaftEnd, shaftTop, -1));
      const model = placeImplant({
        side: tag,
        headCenterMm: H,
        cupAxis: openings[s],
        neckAxis: norm(add(add(shaftTop, shaftDir, 12), H, -1)),
        stemAxis: shaftDir,
        stemLengthMm: 138,
      });
      implants.push(model);
      landmarks.push(
        { label: `femoral_head_centre_${tag}`, point: H },
        { label: `implant_stem_tip_${tag}`, point: stemTip(model) },
      );
    } else {
      landmarks.push({ label: `femoral_head_centre_${tag}`, point: H });
    }
  }

  // ---- vessels ------------------------------------------------------------------------------
  for (const s of [1, -1]) {
    const H = s > 0 ? hip.r : hip.l;
    structures.push({
      name: "femoral_vessels",
      shape: union(
        3,
        cap(v(s * 44, 6, 132), add(H, v(-s * 14, 48, 48)), 5),
        cap(add(H, v(-s * 14, 48, 48)), add(H, v(-s * 6, 38, -170)), 5, 4),
        cap(v(s * 34, 2, 130), add(H, v(-s * 27, 44, 48)), 6.5),
        cap(add(H, v(-s * 27, 44, 48)), add(H, v(-s * 18, 34, -170)), 6.5, 5.5),
      ),
      layers: [{ inset: 0, tissue: "blood", label: 8 }],
    });
  }

  // ---- implants last ------------------------------------------------------------------------
  for (const model of implants) structures.push(...implantStructures(model));

  landmarks.push(
    { label: "pubic_symphysis", point: v(0, 50, -19) },
    { label: "sacral_promontory", point: add(add(s1C, s1Axes[1], s1R[1] * 0.72), s1Axes[2], s1R[2] * 0.69) },
    { label: "coccyx_tip", point: add(coccyxB, norm(add(coccyxB, coccyxA, -1)), 4) },
  );
  return {
    structures,
    landmarks,
    implants,
    hipCentersMm: { right: hip.r, left: hip.l },
    bodyBoundsMm: { min: v(-215, -140, -520), max: v(215, 125, 300) },
  };
}

/** Hip centre of a side. */
export function hipCenter(anatomy: Anatomy, side: Side): V3 {
  return side === "right" ? anatomy.hipCentersMm.right : anatomy.hipCentersMm.left;
}
