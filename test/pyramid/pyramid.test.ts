import { readFileSync } from "node:fs";
import { describe, expect, it } from "vitest";
import { compose, type Mat4, transformPoint } from "../../src/geometry/mat4.js";
import { rigidMatrix } from "../../src/geometry/rotation.js";
import { Volume } from "../../src/image/volume.js";
import {
  blockAffine,
  blockAny,
  blockDims,
  blockMajority,
  blockMean,
  blockMeanTracking,
} from "../../src/pyramid/blocks.js";
import {
  discreteGaussianKernel,
  gaussianKernel,
  gaussianSmooth,
  reflectIndex,
  varianceExactKernel,
} from "../../src/pyramid/gaussian.js";
import { buildPyramid, levelAxisPlan } from "../../src/pyramid/pyramid.js";
import { expectAllClose } from "../helpers/close.js";

// Reference values: scipy.ndimage.gaussian_filter (version in the fixture), written by
// scripts/make-fixtures-pyramid.py.
const fixture = JSON.parse(
  readFileSync(new URL("../fixtures/pyramid/gaussian-filter.json", import.meta.url), "utf8"),
) as {
  source: string;
  dims: [number, number, number];
  data: number[];
  cases: { sigma: [number, number, number]; values: number[] }[];
};

function oblique(spacing: [number, number, number]): Mat4 {
  const r = rigidMatrix([0, 0, 0], [12, -7, 25], [-30.25, 14.5, 101]);
  return compose(
    r,
    new Float64Array([spacing[0], 0, 0, 0, 0, spacing[1], 0, 0, 0, 0, spacing[2], 0, 0, 0, 0, 1]),
  );
}

describe("gaussianSmooth", () => {
  for (const c of fixture.cases) {
    it(`matches scipy gaussian_filter with sigma ${c.sigma.join(",")} voxels (${fixture.source})`, () => {
      const out = gaussianSmooth(
        new Float32Array(fixture.data.length),
        Float64Array.from(fixture.data),
        fixture.dims,
        c.sigma,
      );
      // float32 storage between passes: ~1e-7 relative on values of a few hundred.
      expectAllClose(out, c.values, 2e-4, "smoothed");
    });
  }

  it("works in place (out === data) with the same result", () => {
    const c = fixture.cases[0];
    const data = Float32Array.from(fixture.data);
    gaussianSmooth(data, data, fixture.dims, c.sigma);
    expectAllClose(data, c.values, 2e-4, "in place");
  });

  it("kernel sums to 1 and has scipy's radius floor(4 sigma + 0.5)", () => {
    const w = gaussianKernel(1.3);
    expect(w.length).toBe(2 * Math.floor(4 * 1.3 + 0.5) + 1);
    expect(w.reduce((a, b) => a + b, 0)).toBeCloseTo(1, 14);
    expect(w[0]).toBeCloseTo(w[w.length - 1], 15);
  });

  it("discreteGaussianKernel has variance sigma^2 even below one voxel (Lindeberg 1990: exp(-t) I_n(t))", () => {
    for (const sigma of [0.3, 0.5, 1.5]) {
      const w = discreteGaussianKernel(sigma, 3);
      const r = (w.length - 1) / 2;
      let sum = 0;
      let variance = 0;
      for (let q = 0; q < w.length; q++) {
        sum += w[q];
        variance += w[q] * (q - r) ** 2;
      }
      expect(sum).toBeCloseTo(1, 14);
      // Truncation at ceil(3 sigma) + 1 taps costs about 0.3% of the variance.
      expect(Math.abs(variance - sigma * sigma)).toBeLessThan(0.005 * sigma * sigma);
    }
    // exp(-t) I_1(t) at t = 0.25; I_1(0.25) = 0.12597910894546793 from scipy.special.iv(1, 0.25)
    // (scipy 1.10.1), value from memory of running it once.
    const w = discreteGaussianKernel(0.5, 8);
    expect(w[(w.length - 1) / 2 + 1]).toBeCloseTo(Math.exp(-0.25) * 0.12597910894546793, 6);
    // Reference: scipy.special.ive(n, 2.25) for n = -6..6, normalised, has variance
    // 2.243656646916736 (scipy 1.10.1, computed once; truncation at radius 6 as here).
    const w15 = discreteGaussianKernel(1.5, 3);
    let v15 = 0;
    for (let q = 0; q < w15.length; q++) v15 += w15[q] * (q - 6) ** 2;
    expect(w15.length).toBe(13);
    expect(v15).toBeCloseTo(2.243656646916736, 10);
    // The kernels the pyramid uses keep the variance (3-tap heat kernel up to sigma^2 = 0.5).
    for (const sigma of [0.3, 0.6, 0.8, 1.5, 2.5]) {
      const k = varianceExactKernel(sigma, 3);
      const r = (k.length - 1) / 2;
      let v = 0;
      let total = 0;
      for (let q = 0; q < k.length; q++) {
        v += k[q] * (q - r) ** 2;
        total += k[q];
        expect(k[q]).toBeGreaterThan(0);
      }
      expect(total).toBeCloseTo(1, 14);
      expect(Math.abs(v - sigma * sigma)).toBeLessThan(0.006 * sigma * sigma);
    }
    expect(Array.from(varianceExactKernel(0.5))).toEqual([0.125, 0.75, 0.125]);
    // The sampled kernel (scipy's) falls far short at sigma = 0.3: 3 taps, variance 2 w[0] << 0.09.
    const g = gaussianKernel(0.3, 4);
    expect(g.length).toBe(3);
    expect(2 * g[0]).toBeLessThan(0.01);
  });

  it("reflectIndex is half-sample symmetric with period 2n", () => {
    expect([-4, -3, -2, -1, 0, 1, 2, 3, 4, 5, 6].map((p) => reflectIndex(p, 3))).toEqual([
      2, 2, 1, 0, 0, 1, 2, 2, 1, 0, 0,
    ]);
  });

  it("a constant image stays constant; negative sigma is refused", () => {
    const data = new Float32Array(60).fill(7.25);
    gaussianSmooth(data, data, [5, 4, 3], [1.5, 2, 0.8]);
    for (const v of data) expect(v).toBeCloseTo(7.25, 5);
    expect(() => gaussianSmooth(data, data, [5, 4, 3], [-1, 0, 0])).toThrow(
      expect.objectContaining({ code: "BAD_ARGUMENT" }),
    );
  });
});

describe("block reduction", () => {
  it("blockMean averages full blocks and drops the incomplete far edge", () => {
    // 5x2x1 grid, blocks of 2x2x1: the fifth column is dropped.
    const data = Int16Array.from([1, 2, 3, 4, 5, 10, 20, 30, 40, 50]);
    expect(blockDims([5, 2, 1], [2, 2, 1])).toEqual([2, 1, 1]);
    const out = blockMean(new Float32Array(2), data, [5, 2, 1], [2, 2, 1]);
    expect(Array.from(out)).toEqual([(1 + 2 + 10 + 20) / 4, (3 + 4 + 30 + 40) / 4]);
  });

  it("blockMeanTracking finds high voxels in full blocks and in the dropped far-edge blocks", () => {
    const dims = [5, 3, 2] as const;
    const data = new Int16Array(30);
    for (let q = 0; q < 30; q++) data[q] = q;
    data[4 + 5 * (1 + 3 * 1)] = 3000; // i = 4: beyond the last full block along i
    data[1] = 2600;
    const out = new Float32Array(4);
    const hv = blockMeanTracking(out, data, dims, [2, 2, 1], 2500);
    expect(hv.count).toBe(2);
    expect(hv.bounds).toEqual({ min: [1, 0, 0], max: [5, 2, 2] });
    expect(Array.from(out)).toEqual(Array.from(blockMean(new Float32Array(4), data, dims, [2, 2, 1])));
    expect(blockMeanTracking(out, data, dims, [2, 2, 1], 5000)).toEqual({
      threshold: 5000,
      count: 0,
      bounds: undefined,
    });
  });

  it("blockAny and blockMajority for masks", () => {
    const mask = Uint8Array.from([0, 0, 1, 0, 1, 1, 0, 1]);
    expect(Array.from(blockAny(new Uint8Array(4), mask, [8, 1, 1], [2, 1, 1]))).toEqual([0, 1, 1, 1]);
    expect(Array.from(blockMajority(new Uint8Array(2), mask, [8, 1, 1], [4, 1, 1]))).toEqual([0, 1]);
  });

  it("blockAffine puts the reduced voxel centre at the centre of its block", () => {
    const a = oblique([0.8, 0.8, 1.5]);
    const b = blockAffine(a, [3, 2, 1]);
    const p = transformPoint([0, 0, 0], b, 4, 5, 6);
    const q = transformPoint([0, 0, 0], a, 3 * 4 + 1, 2 * 5 + 0.5, 6);
    expectAllClose(p, q, 1e-12, "centre");
  });
});

describe("buildPyramid", () => {
  it("levelAxisPlan: sigma^2 = (h^2 - s^2)/(8 ln 2) minus the box variance s^2 (F^2 - 1)/12", () => {
    const p = levelAxisPlan(0.8, 4, 2, 512);
    expect(p.factor).toBe(4); // 2 * floor(4 / 1.6)
    const target = (16 - 0.64) / (8 * Math.LN2);
    const box = (0.64 * 15) / 12;
    expect(p.gaussianSigmaMm).toBeCloseTo(Math.sqrt(target - box), 12);
    expect(p.totalSigmaMm).toBeCloseTo(Math.sqrt(target), 12);
    // Thick slices: 4 mm spacing at a 2 mm step is neither reduced nor smoothed.
    expect(levelAxisPlan(4, 2, 1, 60)).toEqual({ factor: 1, gaussianSigmaMm: 0, totalSigmaMm: 0 });
  });

  it("keeps world geometry exact: a linear ramp in world mm reads the same value at each level's voxel centres", () => {
    // f(x) = 2x - 3y + 0.5z + 10 is reproduced exactly by box averages and by symmetric
    // smoothing away from the boundary (closed form), so any offset of the level affine shows.
    const dims: [number, number, number] = [110, 100, 36];
    const affine = oblique([0.8, 0.9, 2.5]);
    const n = dims[0] * dims[1] * dims[2];
    const data = new Float32Array(n);
    const p = [0, 0, 0];
    for (let k = 0; k < dims[2]; k++)
      for (let j = 0; j < dims[1]; j++)
        for (let i = 0; i < dims[0]; i++) {
          transformPoint(p, affine, i, j, k);
          data[i + dims[0] * (j + dims[1] * k)] = 2 * p[0] - 3 * p[1] + 0.5 * p[2] + 10;
        }
    const pyr = buildPyramid(new Volume(dims, data, affine), { levelsMm: [8, 4, 2] });
    expect(pyr.levels.map((l) => l.stepMm)).toEqual([8, 4, 2]);
    expect(pyr.baseFactors).toEqual([2, 2, 1]);
    for (const level of pyr.levels) {
      const v = level.volume;
      expect(v.data).toBeInstanceOf(Float32Array);
      const input = [0.8, 0.9, 2.5];
      for (let a = 0; a < 3; a++)
        expect(level.spacingMm[a]).toBeLessThanOrEqual(Math.max(input[a], level.stepMm) + 1e-9);
      // Away from the reflecting boundary: beyond the kernel radius of the total blur.
      const margin = level.sigmaMm.map((s, a) => Math.ceil((3 * s) / level.spacingMm[a]) + 2);
      let checked = 0;
      for (let k = margin[2]; k < v.dims[2] - margin[2]; k++)
        for (let j = margin[1]; j < v.dims[1] - margin[1]; j++)
          for (let i = margin[0]; i < v.dims[0] - margin[0]; i++) {
            v.indexToWorldPoint(p, i, j, k);
            const want = 2 * p[0] - 3 * p[1] + 0.5 * p[2] + 10;
            const got = v.data[i + v.dims[0] * (j + v.dims[1] * k)];
            if (Math.abs(got - want) > 2e-3)
              expect.fail(`level ${level.stepMm} voxel ${i},${j},${k}: ${got} vs ${want}`);
            checked++;
          }
      expect(checked).toBeGreaterThan(0);
    }
  });

  it("a bright spot stays at its world position at every level (centroid within a tenth of a level voxel)", () => {
    const dims: [number, number, number] = [64, 64, 40];
    const affine = oblique([0.7, 0.7, 1.2]);
    const data = new Float32Array(dims[0] * dims[1] * dims[2]);
    const centre = [0, 0, 0];
    transformPoint(centre, affine, 30.3, 33.6, 18.2);
    const p = [0, 0, 0];
    for (let k = 0; k < dims[2]; k++)
      for (let j = 0; j < dims[1]; j++)
        for (let i = 0; i < dims[0]; i++) {
          transformPoint(p, affine, i, j, k);
          const d2 = (p[0] - centre[0]) ** 2 + (p[1] - centre[1]) ** 2 + (p[2] - centre[2]) ** 2;
          data[i + dims[0] * (j + dims[1] * k)] = Math.exp(-d2 / (2 * 3 * 3));
        }
    const pyr = buildPyramid(new Volume(dims, data, affine));
    for (const level of pyr.levels) {
      const v = level.volume;
      let w = 0;
      const c = [0, 0, 0];
      for (let k = 0; k < v.dims[2]; k++)
        for (let j = 0; j < v.dims[1]; j++)
          for (let i = 0; i < v.dims[0]; i++) {
            const val = v.data[i + v.dims[0] * (j + v.dims[1] * k)];
            v.indexToWorldPoint(p, i, j, k);
            w += val;
            for (let a = 0; a < 3; a++) c[a] += val * p[a];
          }
      const dist = Math.hypot(c[0] / w - centre[0], c[1] / w - centre[1], c[2] / w - centre[2]);
      expect(dist).toBeLessThan(0.1 * Math.min(...level.spacingMm));
    }
  });

  it("total blur per axis is the documented sigmaMm: a Gaussian blob's variance grows by sigmaMm^2 (variances add)", () => {
    // Closed form: blob of sigma0 blurred by sigma has variance sigma0^2 + sigma^2 along each axis.
    const dims: [number, number, number] = [120, 120, 64];
    const spacing: [number, number, number] = [0.8, 0.8, 1.5];
    const affine = oblique(spacing);
    const sigma0 = 6;
    const centre = [0, 0, 0];
    transformPoint(centre, affine, 59.3, 60.1, 31.7);
    const data = new Float32Array(dims[0] * dims[1] * dims[2]);
    const p = [0, 0, 0];
    for (let k = 0; k < dims[2]; k++)
      for (let j = 0; j < dims[1]; j++)
        for (let i = 0; i < dims[0]; i++) {
          transformPoint(p, affine, i, j, k);
          const d2 = (p[0] - centre[0]) ** 2 + (p[1] - centre[1]) ** 2 + (p[2] - centre[2]) ** 2;
          data[i + dims[0] * (j + dims[1] * k)] = 1000 * Math.exp(-d2 / (2 * sigma0 * sigma0));
        }
    const pyr = buildPyramid(new Volume(dims, data, affine), { levelsMm: [8, 4, 2] });
    for (const level of pyr.levels) {
      const v = level.volume;
      // Unit directions of the voxel axes in world (columns of the affine).
      const axes = [0, 1, 2].map((c) => {
        const n = Math.hypot(affine[c], affine[4 + c], affine[8 + c]);
        return [affine[c] / n, affine[4 + c] / n, affine[8 + c] / n];
      });
      let w = 0;
      const m2 = [0, 0, 0];
      for (let k = 0; k < v.dims[2]; k++)
        for (let j = 0; j < v.dims[1]; j++)
          for (let i = 0; i < v.dims[0]; i++) {
            const val = v.data[i + v.dims[0] * (j + v.dims[1] * k)];
            v.indexToWorldPoint(p, i, j, k);
            w += val;
            for (let a = 0; a < 3; a++) {
              const d =
                (p[0] - centre[0]) * axes[a][0] +
                (p[1] - centre[1]) * axes[a][1] +
                (p[2] - centre[2]) * axes[a][2];
              m2[a] += val * d * d;
            }
          }
      for (let a = 0; a < 3; a++) {
        const measured = m2[a] / w - sigma0 * sigma0;
        const expected = level.sigmaMm[a] ** 2;
        // Kernel truncation at 3 sigma removes a few % of the Gaussian part's variance.
        expect(
          Math.abs(measured - expected),
          `level ${level.stepMm} axis ${a}: ${measured} vs ${expected}`,
        ).toBeLessThan(0.06 * expected + 0.02);
      }
    }
  });

  it("does not smooth or reduce along an axis already coarser than the step (thick MR slices)", () => {
    const dims: [number, number, number] = [40, 40, 8];
    const data = new Float32Array(dims[0] * dims[1] * dims[2]);
    for (let q = 0; q < data.length; q++) data[q] = Math.floor(q / (dims[0] * dims[1])) % 2 === 0 ? 0 : 100;
    const vol = new Volume(dims, data, oblique([1, 1, 5]));
    const pyr = buildPyramid(vol, { levelsMm: [4, 2] });
    for (const level of pyr.levels) {
      expect(level.factors[2]).toBe(1);
      expect(level.gaussianSigmaVoxels[2]).toBe(0);
      const v = level.volume;
      // Alternating slices keep their values exactly (in-plane smoothing of a constant plane).
      for (let k = 0; k < v.dims[2]; k++) {
        const val = v.data[5 + v.dims[0] * (5 + v.dims[1] * k)];
        expect(val).toBeCloseTo(k % 2 === 0 ? 0 : 100, 3);
      }
    }
  });

  it("rejects an empty or non-positive level list", () => {
    const vol = new Volume([4, 4, 4], new Float32Array(64), oblique([1, 1, 1]));
    expect(() => buildPyramid(vol, { levelsMm: [] })).toThrow(
      expect.objectContaining({ code: "BAD_ARGUMENT" }),
    );
    expect(() => buildPyramid(vol, { levelsMm: [4, 0] })).toThrow(
      expect.objectContaining({ code: "BAD_ARGUMENT" }),
    );
  });
});
