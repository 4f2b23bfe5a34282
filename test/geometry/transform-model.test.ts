// Transform models: rotation convention against scipy's Rotation.from_euler('xyz') and the
// nearest rotation against scipy.linalg.polar (fixtures from scripts/make-fixtures-geometry.py,
// scipy 1.10); composition, decomposition and re-centring against closed forms.
import { readFileSync } from "node:fs";
import { describe, expect, test } from "vitest";
import { CoxaError } from "../../src/common/errors.js";
import { Rng } from "../../src/common/random.js";
import { compose, identity, type Mat4, scaling, translation } from "../../src/geometry/mat4.js";
import { rigidMatrix, rotationFromDeg } from "../../src/geometry/rotation.js";
import {
  convertParameters,
  describeParameters,
  identityParameters,
  matrixToParameters,
  parameterCount,
  parameterNames,
  parameterScales,
  parametersToMatrix,
  recenterParameters,
  TRANSFORM_MODELS,
  type TransformModel,
} from "../../src/geometry/transform-model.js";
import { expectAllClose, flat } from "../helpers/close.js";

const ref = JSON.parse(readFileSync(new URL("../fixtures/geometry/reference.json", import.meta.url), "utf8"));
const center = [12.5, -40, 85];

function block(m: Mat4): number[] {
  return [m[0], m[1], m[2], m[4], m[5], m[6], m[8], m[9], m[10]];
}

function randomParams(model: TransformModel, rng: Rng): Float64Array {
  const p = new Float64Array(parameterCount(model));
  p[0] = rng.range(-179, 179);
  p[1] = rng.range(-89, 89);
  p[2] = rng.range(-179, 179);
  for (let i = 3; i < 6; i++) p[i] = rng.range(-60, 60);
  for (let i = 6; i < p.length; i++) p[i] = i < 9 ? rng.range(-0.3, 0.3) : rng.range(-0.2, 0.2);
  return p;
}

describe("parametersToMatrix(out, model, params, center)", () => {
  for (const c of ref.rotations.cases as { angles_deg: number[]; matrix: number[][] }[]) {
    test(`rotation [${c.angles_deg.map((a) => a.toFixed(1)).join(", ")}] deg equals scipy from_euler('xyz')`, () => {
      const m = parametersToMatrix(new Float64Array(16), "rigid", [...c.angles_deg, 0, 0, 0], center);
      expectAllClose(block(m), flat(c.matrix), 1e-14, "R");
    });
  }

  test("equals T(c + t) · R · S · H · T(-c) composed from elementary matrices (closed form)", () => {
    const p = [10, -20, 35, 3, -4, 5, Math.log(1.1), Math.log(0.9), Math.log(1.05), 0.1, -0.05, 0.2];
    const r = rotationFromDeg(identity(), p[0], p[1], p[2]);
    const s = scaling(Math.exp(p[6]), Math.exp(p[7]), Math.exp(p[8]));
    const h = identity();
    h[1] = p[9];
    h[2] = p[10];
    h[6] = p[11];
    const expected = compose(
      translation(center[0] + p[3], center[1] + p[4], center[2] + p[5]),
      r,
      s,
      h,
      translation(-center[0], -center[1], -center[2]),
    );
    expectAllClose(parametersToMatrix(new Float64Array(16), "affine", p, center), expected, 1e-12, "M");
  });

  test("rigid agrees with rigidMatrix(center, rotation, translation) of rotation.ts", () => {
    const m = parametersToMatrix(new Float64Array(16), "rigid", [5, 6, -7, 8, 9, 10], center);
    expectAllClose(m, rigidMatrix(center, [5, 6, -7], [8, 9, 10]), 1e-12, "M");
  });

  test("maps the centre to centre + translation for every model", () => {
    const rng = new Rng(8);
    for (const model of TRANSFORM_MODELS) {
      const p = randomParams(model, rng);
      const m = parametersToMatrix(new Float64Array(16), model, p, center);
      const mapped = [0, 1, 2].map(
        (r) => m[4 * r] * center[0] + m[4 * r + 1] * center[1] + m[4 * r + 2] * center[2] + m[4 * r + 3],
      );
      expectAllClose(mapped, [center[0] + p[3], center[1] + p[4], center[2] + p[5]], 1e-10, model);
    }
  });

  test("identity parameters give the identity matrix exactly", () => {
    for (const model of TRANSFORM_MODELS) {
      const m = parametersToMatrix(new Float64Array(16), model, identityParameters(model), center);
      expect(Array.from(m)).toEqual(Array.from(identity()));
    }
  });
});

describe("matrixToParameters(model, matrix, center)", () => {
  test("round trip params -> matrix -> params is exact for 50 random vectors of every model", () => {
    const rng = new Rng(2024);
    for (const model of TRANSFORM_MODELS) {
      for (let trial = 0; trial < 50; trial++) {
        const p = randomParams(model, rng);
        const m = parametersToMatrix(new Float64Array(16), model, p, center);
        const back = matrixToParameters(model, m, center);
        expectAllClose(back, p, 1e-9, `${model} trial ${trial}`);
        expectAllClose(parametersToMatrix(new Float64Array(16), model, back, center), m, 1e-11, "M");
      }
    }
  });

  test("any orientation-preserving affine matrix is represented exactly by the affine model", () => {
    const rng = new Rng(5);
    for (let trial = 0; trial < 20; trial++) {
      const m = identity();
      for (let r = 0; r < 3; r++)
        for (let c = 0; c < 4; c++) m[r * 4 + c] += rng.range(-0.4, 0.4) * (c === 3 ? 100 : 1);
      if (
        m[0] * (m[5] * m[10] - m[6] * m[9]) -
          m[1] * (m[4] * m[10] - m[6] * m[8]) +
          m[2] * (m[4] * m[9] - m[5] * m[8]) <=
        0.1
      )
        continue;
      const p = matrixToParameters("affine", m, center);
      expectAllClose(
        parametersToMatrix(new Float64Array(16), "affine", p, center),
        m,
        1e-12,
        `trial ${trial}`,
      );
    }
  });

  for (const [i, c] of (ref.polar.cases as { block: number[][]; rotation: number[][] }[]).entries()) {
    test(`rigid projection of a non-rigid matrix is its polar rotation (scipy.linalg.polar, case ${i})`, () => {
      const m = identity();
      for (let r = 0; r < 3; r++) for (let col = 0; col < 3; col++) m[r * 4 + col] = c.block[r][col];
      m[3] = 7;
      m[7] = -8;
      m[11] = 9;
      const p = matrixToParameters("rigid", m, center);
      const rigid = parametersToMatrix(new Float64Array(16), "rigid", p, center);
      expectAllClose(block(rigid), flat(c.rotation), 1e-10, "R");
    });
  }

  test("similarity recovers the scale of s·R exactly", () => {
    const p = [20, -10, 5, 1, 2, 3, Math.log(1.37)];
    const m = parametersToMatrix(new Float64Array(16), "similarity", p, center);
    expect(Math.exp(matrixToParameters("similarity", m, center)[6])).toBeCloseTo(1.37, 12);
  });

  test("gimbal lock (ry = 90 deg) still reproduces the matrix", () => {
    const m = parametersToMatrix(new Float64Array(16), "rigid", [30, 90, 10, 1, 2, 3], center);
    const back = matrixToParameters("rigid", m, center);
    expect(back[1]).toBeCloseTo(90, 6);
    expectAllClose(parametersToMatrix(new Float64Array(16), "rigid", back, center), m, 1e-9, "M");
  });

  test("a mirroring or singular matrix is refused with BAD_TRANSFORM", () => {
    const mirror = scaling(1, 1, -1);
    const singular = scaling(1, 1, 0);
    for (const [m, pattern] of [
      [mirror, /mirrors/],
      [singular, /singular/],
    ] as const) {
      for (const model of TRANSFORM_MODELS) {
        try {
          matrixToParameters(model, m, center);
          expect.unreachable();
        } catch (err) {
          expect((err as CoxaError).code).toBe("BAD_TRANSFORM");
          expect((err as Error).message).toMatch(pattern);
        }
      }
    }
  });
});

describe("parameterScales(model, radius)", () => {
  const radius = 80;
  const scales = parameterScales("affine", radius);

  test("one rotation step moves a point at the radius by 1 mm (chord 2 r sin(θ/2))", () => {
    for (let axis = 0; axis < 3; axis++) {
      const p = new Float64Array(12);
      p[axis] = scales[axis];
      const m = parametersToMatrix(new Float64Array(16), "affine", p, [0, 0, 0]);
      // A point at distance r perpendicular to the rotation axis.
      const q = axis === 0 ? [0, radius, 0] : [radius, 0, 0];
      const moved = [0, 1, 2].map((r) => m[4 * r] * q[0] + m[4 * r + 1] * q[1] + m[4 * r + 2] * q[2]);
      const dist = Math.hypot(moved[0] - q[0], moved[1] - q[1], moved[2] - q[2]);
      expect(Math.abs(dist - 1)).toBeLessThan(1e-4);
    }
  });

  test("translations step 1 mm; log-scales and shears 1/r, moving a point at r by about 1 mm", () => {
    expect(Array.from(scales.slice(3, 6))).toEqual([1, 1, 1]);
    for (let i = 6; i < 12; i++) expect(scales[i]).toBeCloseTo(1 / radius, 15);
    // Scale step: r (e^(1/r) - 1) = 1 + 1/(2r) + ... mm.
    expect(radius * (Math.exp(scales[6]) - 1)).toBeCloseTo(1 + 1 / (2 * radius), 4);
    // Shear_xy step moves (0, r, 0) by exactly r · (1/r) = 1 mm along x.
    const p = new Float64Array(12);
    p[9] = scales[9];
    const m = parametersToMatrix(new Float64Array(16), "affine", p, [0, 0, 0]);
    expect(m[1] * radius).toBeCloseTo(1, 12);
  });

  test("rejects a radius that is not positive", () => {
    expect(() => parameterScales("rigid", 0)).toThrow(CoxaError);
    expect(() => parameterScales("rigid", Number.NaN)).toThrow(/radius/);
  });
});

describe("recenterParameters / convertParameters / describeParameters", () => {
  test("re-centring keeps the matrix and all but the translation", () => {
    const rng = new Rng(77);
    for (const model of TRANSFORM_MODELS) {
      const p = randomParams(model, rng);
      const other = [-30, 20, 10];
      const q = recenterParameters(model, p, center, other);
      expectAllClose(
        parametersToMatrix(new Float64Array(16), model, q, other),
        parametersToMatrix(new Float64Array(16), model, p, center),
        1e-10,
        model,
      );
      expectAllClose(q.slice(6), p.slice(6), 0, "scale/shear");
      expectAllClose(q.slice(0, 3), p.slice(0, 3), 0, "rotation");
      // out may alias params.
      const alias = Float64Array.from(p);
      recenterParameters(model, alias, center, other, alias);
      expectAllClose(alias, q, 1e-12, "aliased");
    }
  });

  test("rigid -> similarity -> affine keeps the matrix; affine -> rigid projects", () => {
    const rigid = [10, 20, 30, 1, 2, 3];
    const sim = convertParameters("rigid", rigid, "similarity", center);
    expect(Array.from(sim)).toEqual([...rigid, 0]);
    sim[6] = Math.log(1.2);
    const aff = convertParameters("similarity", sim, "affine", center);
    expect(Array.from(aff.slice(6))).toEqual([Math.log(1.2), Math.log(1.2), Math.log(1.2), 0, 0, 0]);
    expectAllClose(
      parametersToMatrix(new Float64Array(16), "affine", aff, center),
      parametersToMatrix(new Float64Array(16), "similarity", sim, center),
      1e-12,
      "M",
    );
    const back = convertParameters("affine", aff, "rigid", center);
    expectAllClose(back, rigid, 1e-9, "rigid");
  });

  test("describeParameters gives the transform.json block with linear scales", () => {
    const p = [1, 2, 3, 4, 5, 6, Math.log(2), Math.log(0.5), 0, 0.1, 0.2, 0.3];
    expect(describeParameters("affine", p, center)).toEqual({
      center_mm: center,
      rotation_deg: [1, 2, 3],
      translation_mm: [4, 5, 6],
      scale: [2, 0.5, 1],
      shear: [0.1, 0.2, 0.3],
    });
    const rigid = describeParameters("rigid", p, center);
    expect(rigid.scale).toEqual([1, 1, 1]);
    expect(rigid.shear).toEqual([0, 0, 0]);
    expect(describeParameters("similarity", p, center).scale[2]).toBeCloseTo(2, 15);
  });

  test("parameter counts and names follow the documented layout", () => {
    expect(TRANSFORM_MODELS.map(parameterCount)).toEqual([6, 7, 12]);
    expect(parameterNames("similarity")[6]).toBe("log_scale");
    expect(parameterNames("affine")[11]).toBe("shear_yz");
    expect(() => parameterCount("bspline" as TransformModel)).toThrow(CoxaError);
  });
});
