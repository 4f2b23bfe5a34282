/**
 * Starting poses of stress trials. External checks: Rodrigues' rotation formula against the
 * elementary rotation matrices written out here, the closed-form angle of a rotation matrix
 * (trace = 1 + 2 cos θ), and the moments of the uniform distributions the poses are drawn from
 * (uniform on [0, a]: mean a/2, variance a²/12; uniform on the unit sphere: E[d_x] = 0,
 * E[d_x²] = 1/3).
 */
import { describe, expect, it } from "vitest";
import { Rng } from "../../src/common/random.js";
import { fromRows, inverse, multiply } from "../../src/geometry/mat4.js";
import {
  axisAngleMatrix,
  deriveSeed,
  drawPerturbation,
  POSE_STREAM,
  startTransform,
  trialPerturbations,
} from "../../src/stress/poses.js";

const DEG = Math.PI / 180;

function apply(m: Float64Array, p: readonly number[]): number[] {
  return [0, 1, 2].map((r) => m[4 * r] * p[0] + m[4 * r + 1] * p[1] + m[4 * r + 2] * p[2] + m[4 * r + 3]);
}

/** Angle of the rotation in the 3x3 block from its trace, degrees (closed form). */
function angleFromTrace(m: Float64Array): number {
  return Math.acos(Math.max(-1, Math.min(1, (m[0] + m[5] + m[10] - 1) / 2))) / DEG;
}

describe("axisAngleMatrix", () => {
  it("about x, y and z equals the elementary rotation matrices (right-handed)", () => {
    const t = 37 * DEG;
    const c = Math.cos(t);
    const s = Math.sin(t);
    const expected = {
      x: [
        [1, 0, 0, 0],
        [0, c, -s, 0],
        [0, s, c, 0],
        [0, 0, 0, 1],
      ],
      y: [
        [c, 0, s, 0],
        [0, 1, 0, 0],
        [-s, 0, c, 0],
        [0, 0, 0, 1],
      ],
      z: [
        [c, -s, 0, 0],
        [s, c, 0, 0],
        [0, 0, 1, 0],
        [0, 0, 0, 1],
      ],
    };
    const axes = { x: [1, 0, 0], y: [0, 1, 0], z: [0, 0, 1] };
    for (const k of ["x", "y", "z"] as const) {
      const m = axisAngleMatrix(new Float64Array(16), axes[k], 37);
      const e = fromRows(expected[k]);
      for (let i = 0; i < 16; i++) expect(m[i], `${k}[${i}]`).toBeCloseTo(e[i], 12);
    }
  });

  it("keeps the axis fixed, is orthonormal and turns by the requested angle (trace formula)", () => {
    const axis = [0.3, -0.5, 0.81];
    const len = Math.hypot(...axis);
    const m = axisAngleMatrix(new Float64Array(16), axis, 23.5);
    const u = axis.map((v) => v / len);
    const ru = apply(m, u);
    for (let a = 0; a < 3; a++) expect(ru[a]).toBeCloseTo(u[a], 12);
    const mtm = multiply(new Float64Array(16), inverse(m), m);
    for (let r = 0; r < 3; r++)
      for (let c = 0; c < 3; c++) expect(mtm[4 * r + c]).toBeCloseTo(r === c ? 1 : 0, 12);
    // R^T = R^-1 for a rotation
    const inv = inverse(m);
    for (let r = 0; r < 3; r++)
      for (let c = 0; c < 3; c++) expect(inv[4 * r + c]).toBeCloseTo(m[4 * c + r], 12);
    expect(angleFromTrace(m)).toBeCloseTo(23.5, 10);
  });
});

describe("drawPerturbation", () => {
  it("keeps translation and angle within the offsets and maps the centre c to c + t", () => {
    const rng = new Rng(5);
    const c = [10, -20, 30];
    for (let n = 0; n < 200; n++) {
      const p = drawPerturbation(rng, n + 1, 20, 10, c);
      expect(p.offsetMm).toBeGreaterThanOrEqual(0);
      expect(p.offsetMm).toBeLessThanOrEqual(20);
      expect(p.offsetDeg).toBeGreaterThanOrEqual(0);
      expect(p.offsetDeg).toBeLessThanOrEqual(10);
      expect(Math.hypot(...p.translationMm)).toBeCloseTo(p.offsetMm, 10);
      const pc = apply(p.matrix, c);
      for (let a = 0; a < 3; a++) expect(pc[a]).toBeCloseTo(c[a] + p.translationMm[a], 10);
      expect(angleFromTrace(p.matrix)).toBeCloseTo(p.offsetDeg, 6);
    }
  });

  it("draws magnitudes uniformly and directions uniformly on the sphere (moments within 4 standard errors)", () => {
    const rng = new Rng(11);
    const n = 4000;
    let sumMm = 0;
    let sumDeg = 0;
    let sumX = 0;
    let sumX2 = 0;
    let sumAxisZ2 = 0;
    for (let i = 0; i < n; i++) {
      const p = drawPerturbation(rng, i + 1, 20, 10, [0, 0, 0]);
      sumMm += p.offsetMm;
      sumDeg += p.offsetDeg;
      const dx = p.offsetMm > 0 ? p.translationMm[0] / p.offsetMm : 0;
      sumX += dx;
      sumX2 += dx * dx;
      sumAxisZ2 += p.rotationAxis[2] * p.rotationAxis[2];
    }
    // uniform on [0, a]: mean a/2, sd a/sqrt(12)
    expect(Math.abs(sumMm / n - 10)).toBeLessThan((4 * 20) / Math.sqrt(12 * n));
    expect(Math.abs(sumDeg / n - 5)).toBeLessThan((4 * 10) / Math.sqrt(12 * n));
    // uniform on the sphere: d_x has mean 0, variance 1/3; d_x^2 has variance 4/45
    expect(Math.abs(sumX / n)).toBeLessThan(4 * Math.sqrt(1 / 3 / n));
    expect(Math.abs(sumX2 / n - 1 / 3)).toBeLessThan(4 * Math.sqrt(4 / 45 / n));
    expect(Math.abs(sumAxisZ2 / n - 1 / 3)).toBeLessThan(4 * Math.sqrt(4 / 45 / n));
  });

  it("with zero offsets gives the identity", () => {
    const p = drawPerturbation(new Rng(1), 1, 0, 0, [5, 6, 7]);
    for (let i = 0; i < 16; i++) expect(p.matrix[i]).toBeCloseTo(i % 5 === 0 ? 1 : 0, 14);
  });
});

describe("trialPerturbations", () => {
  it("gives trial n the same pose whatever the number of trials, and other poses for another seed", () => {
    const three = trialPerturbations(7, 3, 20, 10, [1, 2, 3]);
    const five = trialPerturbations(7, 5, 20, 10, [1, 2, 3]);
    const other = trialPerturbations(8, 3, 20, 10, [1, 2, 3]);
    expect(three.map((p) => p.trial)).toEqual([1, 2, 3]);
    for (let n = 0; n < 3; n++) {
      expect(Array.from(five[n].matrix)).toEqual(Array.from(three[n].matrix));
      expect(other[n].offsetMm).not.toBe(three[n].offsetMm);
    }
    expect(new Set(five.map((p) => p.offsetMm)).size).toBe(5);
  });

  it("deriveSeed separates streams and trials", () => {
    const seeds = new Set<number>();
    for (let n = 1; n <= 50; n++) {
      seeds.add(deriveSeed(1, POSE_STREAM, n));
      seeds.add(deriveSeed(1, POSE_STREAM + 1, n));
      seeds.add(deriveSeed(2, POSE_STREAM, n));
    }
    expect(seeds.size).toBe(150);
    expect(deriveSeed(1, POSE_STREAM, 3)).toBe(deriveSeed(1, POSE_STREAM, 3));
  });
});

describe("startTransform", () => {
  it("applies the perturbation in fixed world first, then the reference: S(x) = T_ref(P(x))", () => {
    const ref = fromRows([
      [0.99, -0.1, 0.02, 5],
      [0.1, 0.99, 0.01, -3],
      [-0.02, 0, 1, 12],
      [0, 0, 0, 1],
    ]);
    const p = drawPerturbation(new Rng(3), 1, 15, 8, [20, 0, -100]).matrix;
    const s = startTransform(ref, p);
    const x = [33, -12, -140];
    const expected = apply(ref, apply(p, x));
    const got = apply(s, x);
    for (let a = 0; a < 3; a++) expect(got[a]).toBeCloseTo(expected[a], 10);
  });
});
