/**
 * A small invented hip pair for previewing and testing the reports before real registration
 * results exist. Not a phantom for registration work (that is src/phantom): the shapes are a
 * few analytic solids, the "CT" has HU-like values with crude streaks around a metal head, the
 * "MR" has a T1-like contrast with a signal void around the metal, and the MR is generated
 * directly on the CT grid with a known residual offset so the overlays show something.
 *
 * Geometry: world RAS+ mm; the grid is stored L-P-S (affine diag(-sx, -sy, sz)) like many
 * scanner exports, so the display code has to flip axes. The implant replaces the patient's
 * right femoral head (+x side).
 */
import { Rng } from "../common/random.js";
import { fromRows } from "../geometry/mat4.js";
import { Volume } from "../image/volume.js";
import type { AlignReportInput, ReportLandmark } from "./align-report.js";

/** Options of demoAlignInput. */
export interface DemoOptions {
  /** Voxels [nx, ny, nz]; default [112, 84, 60]. */
  dims?: readonly [number, number, number];
  /** Spacing in mm; default [3, 3, 4]. */
  spacingMm?: readonly [number, number, number];
  /** Residual offset of the MR against the CT in mm (moving = fixed shifted by this); default [1.5, -1, 2]. */
  residualMm?: readonly [number, number, number];
  /** Seed of the noise; default 7. */
  seed?: number;
  /** Verdict to show; default "review". */
  verdict?: AlignReportInput["verdict"];
}

const HEAD_X = 92;
const HEAD_RADIUS = 24;

type Tissue = "air" | "fat" | "muscle" | "cortex" | "marrow" | "metal";

/** Tissue at a world point (mm) of the invented pelvis. */
function tissueAt(x: number, y: number, z: number): Tissue {
  const bx = x / 175;
  const by = (y - 5) / 120;
  const body = bx * bx + by * by;
  if (body > 1) return "air";
  // Metal: right femoral head and a stem running down and outwards.
  const dxr = x - HEAD_X;
  const rHead = Math.hypot(dxr, y, z);
  if (rHead < HEAD_RADIUS - 2) return "metal";
  const stemT = -z / 110;
  if (stemT > 0 && stemT < 1 && Math.hypot(x - (HEAD_X + 18 * stemT), y) < 8) return "metal";
  // Left femoral head and both shafts (bone).
  const rLeft = Math.hypot(x + HEAD_X, y, z);
  if (rLeft < HEAD_RADIUS) return rLeft > HEAD_RADIUS - 4 ? "cortex" : "marrow";
  for (const side of [1, -1]) {
    if (stemT > 0) {
      const r = Math.hypot(x - side * (HEAD_X + 18 * stemT), y);
      if (r < 15) return r > 10 || (side === 1 && r < 9) ? "cortex" : "marrow";
    }
  }
  // Acetabular rims / iliac wings: two tilted slabs above the heads.
  for (const side of [1, -1]) {
    const u = side * x - 70;
    const v = z - 40;
    if (u > -30 && u < 45 && v > -10 && v < 60 && Math.abs(y - 10 - 0.3 * u) < 7) return "cortex";
  }
  // Sacrum: a block at the back, centre line.
  if (Math.abs(x) < 30 && y > -95 && y < -60 && z > 0) return "marrow";
  if (body > 0.8) return "fat";
  return "muscle";
}

const CT_HU: Record<Tissue, number> = {
  air: -1000,
  fat: -100,
  muscle: 45,
  cortex: 1150,
  marrow: 250,
  metal: 3000,
};
const MR_VALUE: Record<Tissue, number> = { air: 0, fat: 920, muscle: 330, cortex: 40, marrow: 650, metal: 0 };

/**
 * Invented inputs for renderAlignReport: CT-like fixed image, MR-like moving image already on the
 * fixed grid, metal mask, landmarks, Dice rows, optimiser trace, timings.
 * @param options - grid size, residual offset, seed and verdict
 */
export function demoAlignInput(options: DemoOptions = {}): AlignReportInput {
  const dims = options.dims ?? [112, 84, 60];
  const sp = options.spacingMm ?? [3, 3, 4];
  const res = options.residualMm ?? [1.5, -1, 2];
  const rng = new Rng(options.seed ?? 7);
  const [nx, ny, nz] = dims;
  // Grid centred on the world origin, stored L-P-S.
  const affine = fromRows([
    [-sp[0], 0, 0, ((nx - 1) / 2) * sp[0]],
    [0, -sp[1], 0, ((ny - 1) / 2) * sp[1]],
    [0, 0, sp[2], (-(nz - 1) / 2) * sp[2] - 10],
    [0, 0, 0, 1],
  ]);
  const n = nx * ny * nz;
  const ct = new Int16Array(n);
  const mr = new Float32Array(n);
  const mask = new Uint8Array(n);
  for (let k = 0, p = 0; k < nz; k++) {
    for (let j = 0; j < ny; j++) {
      for (let i = 0; i < nx; i++, p++) {
        const x = affine[0] * i + affine[3];
        const y = affine[5] * j + affine[7];
        const z = affine[10] * k + affine[11];
        const t = tissueAt(x, y, z);
        let hu = CT_HU[t];
        if (t !== "air" && t !== "metal") {
          // Streaks radiating from the metal head in the axial plane, fading with distance.
          const dx = x - HEAD_X;
          const r = Math.hypot(dx, y);
          const zFade = Math.exp(-((z / 40) ** 2));
          hu += (260 * Math.cos(8 * Math.atan2(y, dx)) * zFade * 40) / (r + 40);
          hu += rng.normal() * 12;
        }
        ct[p] = Math.round(Math.max(-1024, Math.min(3071, hu)));
        if (ct[p] >= 2500) mask[p] = 1;
        // MR evaluated at x + residual: what moving-on-fixed shows for an imperfect alignment.
        const tm = tissueAt(x + res[0], y + res[1], z + res[2]);
        let v = MR_VALUE[tm];
        const dm = Math.hypot(x + res[0] - HEAD_X, y + res[1], z + res[2]);
        if (dm < HEAD_RADIUS + 9) v = dm > HEAD_RADIUS + 5 ? 1300 : 0; // void with a bright rim
        mr[p] = Math.max(0, v + (tm === "air" ? Math.abs(rng.normal()) * 8 : rng.normal() * 20));
      }
    }
  }
  const fixed = new Volume([nx, ny, nz], ct, affine);
  const movingOnFixed = new Volume([nx, ny, nz], mr, affine);
  const landmarkSpots: [string, [number, number, number]][] = [
    ["head-L", [-HEAD_X, 0, 0]],
    ["trochanter-L", [-HEAD_X - 30, 0, -40]],
    ["trochanter-R", [HEAD_X + 30, 0, -40]],
    ["sacrum", [0, -78, 30]],
    ["rim-L", [-80, 12, 45]],
    ["rim-R", [80, 12, 45]],
  ];
  const landmarks: ReportLandmark[] = landmarkSpots.map(([label, p], idx) => {
    const jitter = [rng.normal() * 0.3, rng.normal() * 0.3, rng.normal() * 0.3];
    // Moving landmark mapped back to the fixed world: the feature sits at x - residual.
    const mapped: [number, number, number] = [
      p[0] - res[0] + jitter[0],
      p[1] - res[1] + jitter[1],
      p[2] - res[2] + jitter[2],
    ];
    return {
      label,
      fixedMm: p,
      mappedMovingMm: mapped,
      errorMm: Math.hypot(mapped[0] - p[0], mapped[1] - p[1], mapped[2] - p[2]),
      predictedTreMm: 0.6 + 0.05 * idx,
    };
  });
  const levels = [8, 4, 2];
  const metricTrace = levels.map((stepMm, level) => {
    const count = 28 - level * 6;
    const values: number[] = [];
    for (let e = 0; e < count; e++) {
      const base = -0.35 - 0.12 * level - 0.2 * (1 - Math.exp(-e / (4 + level)));
      values.push(base + rng.normal() * 0.004);
    }
    return { level, stepMm, values };
  });
  const meanError = landmarks.reduce((a, l) => a + l.errorMm, 0) / landmarks.length;
  const verdict = options.verdict ?? "review";
  return {
    title: "coxa alignment report (invented demo data)",
    verdict,
    reasons:
      verdict === "pass"
        ? ["All quality checks met (demo)."]
        : [
            `Mean landmark error is ${meanError.toFixed(2)} mm, above the 1 mm review threshold of this demo.`,
            "Metal shadows cover part of the right hip; check the edges there by eye.",
          ],
    fixed: {
      volume: fixed,
      path: "demo/ct.nii.gz",
      sha256: "0".repeat(64),
      modality: "ct",
      modalityReason:
        "values at air (-1000 HU) and fat (-100 HU) and a soft-tissue population: CT-like (demo).",
    },
    movingInfo: {
      path: "demo/mr.nii.gz",
      sha256: "f".repeat(64),
      shape: [nx, ny, nz],
      spacingMm: [...sp],
      orientation: "LPS",
      datatype: "float32",
      modality: "mr",
      modalityReason: "non-negative values on an arbitrary scale: MR-like (demo).",
    },
    movingOnFixed,
    metalMask: mask,
    metalHu: 2500,
    landmarks,
    freMm: 0.4,
    landmarkFlagMm: 2,
    dice: [
      { label: 1, name: "left femur", dice: 0.91, fixedVoxels: 4210, movingVoxels: 4105 },
      { label: 2, name: "pelvis", dice: 0.87, fixedVoxels: 9932, movingVoxels: 10110 },
    ],
    metric: {
      name: "mi",
      start: metricTrace[0].values[0],
      final: metricTrace[2].values[metricTrace[2].values.length - 1],
    },
    metricTrace,
    transform: {
      model: "rigid",
      matrix: [
        [1, 0, 0, res[0]],
        [0, 1, 0, res[1]],
        [0, 0, 1, res[2]],
        [0, 0, 0, 1],
      ],
      inverse: [
        [1, 0, 0, -res[0]],
        [0, 1, 0, -res[1]],
        [0, 0, 1, -res[2]],
        [0, 0, 0, 1],
      ],
      parameters: { center_mm: [0, 0, -10], rotation_deg: [0, 0, 0], translation_mm: [...res] },
    },
    timings: { read: 0.21, register: 3.4, resample: 0.35, report: 0.4, total: 4.36 },
    overlapFraction: 0.97,
    inverseConsistencyMm: 0.0001,
  };
}
