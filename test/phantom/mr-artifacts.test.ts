import { describe, expect, test } from "vitest";
import { Rng } from "../../src/common/random.js";
import { identity } from "../../src/geometry/mat4.js";
import { Volume } from "../../src/image/volume.js";
import {
  addMrMetalArtifacts,
  addRicianNoise,
  applyBiasField,
  chamferDistance,
  dipoleField,
  GAMMA_BAR_HZ_PER_T,
  metalDipoles,
  remapAlongAxis,
} from "../../src/phantom/mr-artifacts.js";

/** A sphere of metal (value 1) of radius a mm on an isotropic grid of `h` mm centred at the origin. */
function sphereMask(a: number, h: number, halfWidthMm: number): Volume<Uint8Array> {
  const n = Math.round((2 * halfWidthMm) / h) + 1;
  const m = identity();
  m[0] = m[5] = m[10] = h;
  m[3] = m[7] = m[11] = -halfWidthMm;
  const data = new Uint8Array(n * n * n);
  for (let k = 0; k < n; k++)
    for (let j = 0; j < n; j++)
      for (let i = 0; i < n; i++) {
        const x = -halfWidthMm + i * h;
        const y = -halfWidthMm + j * h;
        const z = -halfWidthMm + k * h;
        if (x * x + y * y + z * z <= a * a) data[i + n * (j + n * k)] = 1;
      }
  return new Volume([n, n, n], data, m);
}

describe("susceptibility field of a metal sphere", () => {
  // Closed form (magnetostatics of a uniformly magnetised sphere): outside,
  // dB / B0 = (dChi / 3) (a / r)^3 (3 cos^2 theta - 1).
  const a = 8;
  const dChi = 900e-6;
  const dip = metalDipoles({ mask: sphereMask(a, 0.5, 10), deltaChiPpm: 900 }, 2, 1);
  const expected = (r: number, cos: number) => (dChi / 3) * (a / r) ** 3 * (3 * cos * cos - 1);

  test.each([
    ["along B0", 3 * a, 1],
    ["across B0", 3 * a, 0],
    ["at 45 degrees", 2.5 * a, Math.SQRT1_2],
  ])("dipoleField %s at r = %d mm matches the sphere formula within 3%%", (_name, r, cos) => {
    const sin = Math.sqrt(1 - cos * cos);
    const got = dipoleField(dip, 0, 0, 1, r * sin, 0, r * cos);
    const want = expected(r, cos);
    expect(Math.abs(got - want)).toBeLessThan(0.03 * Math.abs(want) + 1e-12);
  });

  test("the field vanishes at the magic angle (3 cos^2 = 1) to within 1% of the on-axis value", () => {
    const cos = 1 / Math.sqrt(3);
    const r = 3 * a;
    const got = dipoleField(dip, 0, 0, 1, r * Math.sqrt(1 - cos * cos), 0, r * cos);
    expect(Math.abs(got)).toBeLessThan(0.01 * expected(r, 1));
  });

  test("severity scales the dipole strengths linearly and 0 removes them", () => {
    const half = metalDipoles({ mask: sphereMask(a, 1, 10), deltaChiPpm: 900 }, 2, 0.5);
    const full = metalDipoles({ mask: sphereMask(a, 1, 10), deltaChiPpm: 900 }, 2, 1);
    const none = metalDipoles({ mask: sphereMask(a, 1, 10), deltaChiPpm: 900 }, 2, 0);
    expect(dipoleField(half, 0, 0, 1, 0, 0, 30)).toBeCloseTo(0.5 * dipoleField(full, 0, 0, 1, 0, 0, 30), 15);
    expect(dipoleField(none, 0, 0, 1, 0, 0, 30)).toBe(0);
  });
});

describe("addMrMetalArtifacts", () => {
  // A uniform MR block (value 100, 2 mm voxels) with a 6 mm cobalt-chrome-like sphere in the middle.
  const n = 48;
  const m = identity();
  m[0] = m[5] = m[10] = 2;
  m[3] = m[7] = m[11] = -47;
  const mr = new Volume([n, n, n], new Float32Array(n * n * n).fill(100), m);
  const metal = { mask: sphereMask(6, 1, 10), deltaChiPpm: 900 };

  test("severity 0: no displacement; only the metal (and its partial voxels) lose signal", () => {
    const res = addMrMetalArtifacts(mr, metal, { severity: 0 });
    expect(res.maxDisplacementMm).toBe(0);
    const centre = n / 2 + n * (n / 2 + n * (n / 2));
    expect(res.volume.data[centre]).toBeLessThan(1);
    expect(res.volume.data[0]).toBe(100);
    expect(res.volume.data[5 + n * (5 + n * 5)]).toBe(100);
  });

  test("severity 1: signal void around the sphere and displacement growing with severity", () => {
    const weak = addMrMetalArtifacts(mr, metal, { severity: 0.25 });
    const strong = addMrMetalArtifacts(mr, metal, { severity: 1 });
    const displaced = (d: Float32Array) => d.reduce((acc, v) => acc + (Math.abs(v) > 1 ? 1 : 0), 0);
    expect(displaced(strong.displacementMm)).toBeGreaterThan(displaced(weak.displacementMm));
    expect(displaced(weak.displacementMm)).toBeGreaterThan(0);
    // Within 3 mm of the metal surface (r <= 9 mm) the mean signal is below 10 % of the background.
    let sum = 0;
    let count = 0;
    for (let k = 0; k < n; k++)
      for (let j = 0; j < n; j++)
        for (let i = 0; i < n; i++) {
          const r = Math.hypot(-47 + 2 * i, -47 + 2 * j, -47 + 2 * k);
          if (r <= 9) {
            sum += strong.volume.data[i + n * (j + n * k)];
            count++;
          }
        }
    expect(count).toBeGreaterThan(50);
    expect(sum / count).toBeLessThan(10);
    // Far from the metal (80 mm, field ~ (6/80)^3 of the surface value) the image is within 0.5 %.
    expect(Math.abs(strong.volume.data[0] - 100)).toBeLessThan(0.5);
  });

  test("pile-up: somewhere the distorted signal exceeds the undistorted background", () => {
    const res = addMrMetalArtifacts(mr, metal, { severity: 1 });
    let peak = 0;
    for (const v of res.volume.data) peak = Math.max(peak, v);
    expect(peak).toBeGreaterThan(115);
  });

  test("refuses a severity outside 0..1 and equal readout and slice axes", () => {
    expect(() => addMrMetalArtifacts(mr, metal, { severity: 1.5 })).toThrow(
      expect.objectContaining({ code: "BAD_ARGUMENT" }),
    );
    expect(() => addMrMetalArtifacts(mr, metal, { severity: 1, readoutAxis: 2 })).toThrow(
      expect.objectContaining({ code: "BAD_ARGUMENT" }),
    );
  });

  test("GAMMA_BAR is the CODATA proton value 42.577 MHz/T", () => {
    expect(GAMMA_BAR_HZ_PER_T / 1e6).toBeCloseTo(42.577, 3);
  });
});

describe("remapAlongAxis", () => {
  test("a constant whole-voxel shift moves every value by that many voxels", () => {
    const dims = [8, 2, 1];
    const src = Float32Array.from([1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 11, 12, 13, 14, 15, 16]);
    const out = remapAlongAxis(new Float32Array(16), src, new Float32Array(16).fill(2), dims, 0);
    expect(Array.from(out)).toEqual([0, 0, 1, 2, 3, 4, 5, 6, 0, 0, 9, 10, 11, 12, 13, 14]);
  });

  test("signal is conserved when nothing leaves the line, along any axis", () => {
    const dims = [5, 6, 7];
    const n = 210;
    const rng = new Rng(3);
    const src = new Float32Array(n).map(() => rng.uniform());
    const shift = new Float32Array(n).map(() => rng.range(-0.4, 0.4));
    for (const axis of [0, 1, 2] as const) {
      // Zero the line ends so no signal can be pushed off the grid.
      const s = Float32Array.from(src);
      for (let k = 0; k < 7; k++)
        for (let j = 0; j < 6; j++)
          for (let i = 0; i < 5; i++) {
            const u = axis === 0 ? i : axis === 1 ? j : k;
            if (u === 0 || u === dims[axis] - 1) s[i + 5 * (j + 6 * k)] = 0;
          }
      const out = remapAlongAxis(new Float32Array(n), s, shift, dims, axis);
      const total = (a: Float32Array) => a.reduce((x, y) => x + y, 0);
      expect(total(out)).toBeCloseTo(total(s), 4);
    }
  });
});

describe("noise and bias", () => {
  test("Rician noise on zero signal has the Rayleigh mean sigma sqrt(pi/2) (closed form)", () => {
    const n = 200_000;
    const vol = new Volume([n, 1, 1], new Float32Array(n), identity());
    const out = addRicianNoise(vol, 10, new Rng(5));
    let sum = 0;
    for (const v of out.data) sum += v;
    expect(sum / n).toBeGreaterThan(10 * Math.sqrt(Math.PI / 2) * 0.99);
    expect(sum / n).toBeLessThan(10 * Math.sqrt(Math.PI / 2) * 1.01);
  });

  test("applyBiasField keeps gains within exp(+-amplitude) and reaches the bound", () => {
    const vol = new Volume([20, 20, 10], new Float32Array(4000).fill(1), identity());
    const res = applyBiasField(vol, new Rng(2), { amplitude: 0.2 });
    expect(res.minGain).toBeGreaterThanOrEqual(Math.exp(-0.2) - 1e-9);
    expect(res.maxGain).toBeLessThanOrEqual(Math.exp(0.2) + 1e-9);
    expect(Math.max(Math.log(res.maxGain), -Math.log(res.minGain))).toBeCloseTo(0.2, 6);
  });

  test("chamferDistance is exact along axes and the 3-D diagonal with anisotropic spacing", () => {
    const dims = [9, 9, 9];
    const seeds = new Uint8Array(729);
    seeds[4 + 9 * (4 + 9 * 4)] = 1;
    const d = chamferDistance(seeds, dims, [1, 2, 3], 100);
    expect(d[8 + 9 * (4 + 9 * 4)]).toBeCloseTo(4, 5);
    expect(d[4 + 9 * (0 + 9 * 4)]).toBeCloseTo(8, 5);
    expect(d[4 + 9 * (4 + 9 * 8)]).toBeCloseTo(12, 5);
    expect(d[6 + 9 * (6 + 9 * 6)]).toBeCloseTo(2 * Math.hypot(1, 2, 3), 5);
  });
});
