// Point-set fitting (Umeyama 1991) against closed-form recovery of known transforms and against
// scikit-image's EuclideanTransform/SimilarityTransform.estimate (fixture from
// scripts/make-fixtures-geometry.py, skimage 0.19); the predicted TRE and expected FRE of
// Fitzpatrick, West & Maurer (1998) against a seeded Monte Carlo simulation of fiducial noise.
import { readFileSync } from "node:fs";
import { describe, expect, test } from "vitest";
import { CoxaError } from "../../src/common/errors.js";
import { Rng } from "../../src/common/random.js";
import { det3, type Mat4 } from "../../src/geometry/mat4.js";
import {
  errorStats,
  estimateFle,
  expectedFre,
  fitPointSets,
  pointErrors,
  predictedTre,
  transformPoints,
} from "../../src/geometry/pointset.js";
import { parametersToMatrix } from "../../src/geometry/transform-model.js";
import { expectAllClose, flat } from "../helpers/close.js";

const ref = JSON.parse(readFileSync(new URL("../fixtures/geometry/reference.json", import.meta.url), "utf8"));

function randomPoints(rng: Rng, n: number, half: number, planarZ?: number): Float64Array {
  const p = new Float64Array(3 * n);
  for (let i = 0; i < 3 * n; i++) p[i] = rng.range(-half, half);
  if (planarZ !== undefined) for (let i = 0; i < n; i++) p[3 * i + 2] = planarZ;
  return p;
}

function mapped(m: Mat4, pts: Float64Array): Float64Array {
  return transformPoints(new Float64Array(pts.length), m, pts);
}

describe("fitPointSets(source, target) recovers known transforms from noiseless points", () => {
  test("rigid: 20 random transforms and 6-point configurations, matrix to 1e-10", () => {
    const rng = new Rng(31);
    for (let trial = 0; trial < 20; trial++) {
      const truth = parametersToMatrix(
        new Float64Array(16),
        "rigid",
        [
          rng.range(-170, 170),
          rng.range(-80, 80),
          rng.range(-170, 170),
          rng.range(-50, 50),
          rng.range(-50, 50),
          rng.range(-50, 50),
        ],
        [0, 0, 0],
      );
      const src = randomPoints(rng, 6, 100);
      const fit = fitPointSets(src, mapped(truth, src));
      expectAllClose(fit.matrix, truth, 1e-10, `trial ${trial}`);
      expect(fit.freMm).toBeLessThan(1e-9);
      expect(fit.scale).toBe(1);
    }
  });

  test("similarity: scale 1.3 and rotation recovered exactly", () => {
    const rng = new Rng(32);
    const truth = parametersToMatrix(
      new Float64Array(16),
      "similarity",
      [25, -15, 40, 5, 6, 7, Math.log(1.3)],
      [10, 0, 0],
    );
    const src = randomPoints(rng, 5, 80);
    const fit = fitPointSets(src, mapped(truth, src), { withScale: true });
    expect(fit.scale).toBeCloseTo(1.3, 12);
    expectAllClose(fit.matrix, truth, 1e-10, "M");
  });

  test("planar configurations: always a proper rotation, exact, with the sign fix used where SVD mirrors", () => {
    // Coplanar points leave the cross-covariance rank 2: the mirror image through the plane fits
    // exactly too, and the SVD returns it whenever det(U) det(V) = -1 (Umeyama 1991, sect. II).
    const rng = new Rng(33);
    let corrected = 0;
    for (let trial = 0; trial < 40; trial++) {
      const truth = parametersToMatrix(
        new Float64Array(16),
        "rigid",
        [rng.range(-170, 170), rng.range(-80, 80), rng.range(-170, 170), 1, 2, 3],
        [0, 0, 0],
      );
      const src = randomPoints(rng, 4, 60, rng.range(-20, 20));
      const fit = fitPointSets(src, mapped(truth, src));
      expect(det3(fit.matrix)).toBeCloseTo(1, 10);
      expectAllClose(fit.matrix, truth, 1e-9, `trial ${trial}`);
      if (fit.reflectionCorrected) corrected++;
    }
    expect(corrected).toBeGreaterThan(0);
  });
});

describe("fitPointSets agrees with scikit-image's Umeyama estimate", () => {
  for (const c of ref.point_fits.cases as {
    kind: string;
    case: string;
    source_mm: number[];
    target_mm: number[];
    matrix: number[][];
    fre_mm: number;
  }[]) {
    test(`${c.kind}, ${c.case}`, () => {
      const fit = fitPointSets(c.source_mm, c.target_mm, { withScale: c.kind === "similarity" });
      expectAllClose(fit.matrix, flat(c.matrix), 1e-9, "M");
      expect(fit.freMm).toBeCloseTo(c.fre_mm, 9);
      expect(det3(fit.matrix)).toBeGreaterThan(0);
      expect(fit.reflectionCorrected).toBe(c.case.startsWith("mirrored"));
    });
  }
});

describe("fitPointSets refuses what it cannot fit", () => {
  test("fewer than 3 pairs and collinear points are BAD_LANDMARKS; unequal sets BAD_ARGUMENT", () => {
    const code = (fn: () => unknown) => {
      try {
        fn();
      } catch (err) {
        return (err as CoxaError).code;
      }
      return "none";
    };
    expect(code(() => fitPointSets([0, 0, 0, 1, 0, 0], [0, 0, 0, 1, 0, 0]))).toBe("BAD_LANDMARKS");
    const line = [0, 0, 0, 1, 1, 1, 2, 2, 2, 5, 5, 5];
    expect(code(() => fitPointSets(line, line))).toBe("BAD_LANDMARKS");
    expect(code(() => fitPointSets([0, 0, 0, 1, 0, 0, 0, 1, 0], [0, 0, 0]))).toBe("BAD_ARGUMENT");
    expect(code(() => fitPointSets([0, 0, Number.NaN, 1, 0, 0, 0, 1, 0], [0, 0, 0, 1, 0, 0, 0, 1, 0]))).toBe(
      "BAD_ARGUMENT",
    );
  });
});

describe("pointErrors and errorStats", () => {
  test("a (3, 4, 0) mm shift gives 5 mm everywhere (closed form)", () => {
    const m = parametersToMatrix(new Float64Array(16), "rigid", [0, 0, 0, 3, 4, 0], [0, 0, 0]);
    const fixed = [0, 0, 0, 10, 20, 30, -5, 7, 1];
    const errors = pointErrors(m, fixed, fixed);
    expectAllClose(errors, [5, 5, 5], 1e-14, "error");
  });

  test("mean, median (odd and even count), RMS and max", () => {
    expect(errorStats([3, 1, 2])).toEqual({ count: 3, mean: 2, median: 2, rms: Math.sqrt(14 / 3), max: 3 });
    const even = errorStats([4, 1, 3, 2]);
    expect(even.median).toBe(2.5);
    expect(even.max).toBe(4);
    expect(() => errorStats([])).toThrow(CoxaError);
  });
});

describe("Fitzpatrick-West-Maurer (1998) predictions match a Monte Carlo simulation", () => {
  // Invented fiducial layout (a hip-sized, irregular configuration) and targets up to 150 mm out.
  const fiducials = Float64Array.from([
    -70, 10, 5, 65, 0, -10, 0, 55, 20, 5, -45, 30, -20, -10, -40, 30, 35, -35, 10, 0, 60,
  ]);
  const targets = Float64Array.from([0, 0, 0, 40, -20, 10, 120, 60, -40, -150, 0, 0, 0, 0, 150]);
  const n = fiducials.length / 3;
  const sigmaPerAxis = 1; // mm, isotropic Gaussian: FLE² = 3 σ²
  const fle = Math.sqrt(3) * sigmaPerAxis;
  const trials = 20000;

  test(`RMS TRE at ${targets.length / 3} targets and RMS FRE within 10% over ${trials} seeded trials`, () => {
    const rng = new Rng(1998);
    const noisy = new Float64Array(fiducials.length);
    const tre2 = new Float64Array(targets.length / 3);
    const movedTargets = new Float64Array(targets.length);
    let fre2 = 0;
    for (let t = 0; t < trials; t++) {
      for (let i = 0; i < fiducials.length; i++) noisy[i] = fiducials[i] + sigmaPerAxis * rng.normal();
      // Register the noisy fiducials onto the true ones; the true transform is the identity.
      const fit = fitPointSets(noisy, fiducials);
      fre2 += fit.freMm * fit.freMm;
      transformPoints(movedTargets, fit.matrix, targets);
      for (let k = 0; k < tre2.length; k++) {
        const dx = movedTargets[3 * k] - targets[3 * k];
        const dy = movedTargets[3 * k + 1] - targets[3 * k + 1];
        const dz = movedTargets[3 * k + 2] - targets[3 * k + 2];
        tre2[k] += dx * dx + dy * dy + dz * dz;
      }
    }
    const predicted = predictedTre(fiducials, targets, fle);
    for (let k = 0; k < tre2.length; k++) {
      const simulated = Math.sqrt(tre2[k] / trials);
      expect(
        Math.abs(predicted[k] - simulated) / simulated,
        `target ${k}: ${predicted[k]} vs ${simulated}`,
      ).toBeLessThan(0.1);
    }
    const simulatedFre = Math.sqrt(fre2 / trials);
    expect(Math.abs(expectedFre(fle, n) - simulatedFre) / simulatedFre).toBeLessThan(0.1);
    expect(Math.abs(estimateFle(simulatedFre, n) - fle) / fle).toBeLessThan(0.1);
  });

  test("TRE at the centroid is FLE / sqrt(N) (closed form of the formula) and grows away from it", () => {
    const cx = fiducials.filter((_, i) => i % 3 === 0).reduce((s, v) => s + v, 0) / n;
    const cy = fiducials.filter((_, i) => i % 3 === 1).reduce((s, v) => s + v, 0) / n;
    const cz = fiducials.filter((_, i) => i % 3 === 2).reduce((s, v) => s + v, 0) / n;
    const [atCentre, far] = predictedTre(fiducials, [cx, cy, cz, cx + 200, cy, cz], 2);
    expect(atCentre).toBeCloseTo(2 / Math.sqrt(n), 12);
    expect(far).toBeGreaterThan(atCentre);
  });

  test("expectedFre and estimateFle invert each other; a collinear layout predicts Infinity", () => {
    expect(estimateFle(expectedFre(1.7, 8), 8)).toBeCloseTo(1.7, 14);
    expect(expectedFre(1, 4)).toBeCloseTo(Math.sqrt(0.5), 15);
    expect(() => estimateFle(1, 2)).toThrow(CoxaError);
    const line = [0, 0, 0, 10, 0, 0, 20, 0, 0];
    expect(predictedTre(line, [0, 5, 0], 1)[0]).toBe(Number.POSITIVE_INFINITY);
    expect(() => predictedTre(fiducials, targets, -1)).toThrow(/FLE/);
  });
});
