import { readFileSync } from "node:fs";
import { describe, expect, test } from "vitest";
import {
  backProject,
  filteredBackProjection,
  fullDetectors,
  parallelBeamGeometry,
  radonTransform,
  rampFilter,
} from "../../src/phantom/radon.js";

// Reference: scikit-image 0.19.3 (Debian python3-skimage) radon / iradon(filter_name="ramp",
// circle=True) on the Shepp-Logan phantom (Shepp & Logan 1974), written by
// scripts/make-fixtures-radon.py.
const fixture = JSON.parse(
  readFileSync(new URL("../fixtures/phantom/radon-shepp-logan.json", import.meta.url), "utf8"),
) as { size: number; angles_deg: number[]; image: number[]; sinogram: number[]; fbp: number[] };

function maxAbsDiff(a: ArrayLike<number>, b: ArrayLike<number>): { diff: number; index: number } {
  let diff = 0;
  let index = -1;
  for (let i = 0; i < a.length; i++) {
    const d = Math.abs(a[i] - b[i]);
    if (d > diff) {
      diff = d;
      index = i;
    }
  }
  return { diff, index };
}

function maxAbs(a: ArrayLike<number>): number {
  let m = 0;
  for (let i = 0; i < a.length; i++) m = Math.max(m, Math.abs(a[i]));
  return m;
}

describe("radon transform vs scikit-image (Shepp-Logan)", () => {
  const geom = parallelBeamGeometry(fixture.size, { angles: fixture.angles_deg });

  test("radonTransform(image) equals skimage.transform.radon within 1e-9 of the peak", () => {
    const sino = radonTransform(null, Float64Array.from(fixture.image), geom);
    const { diff, index } = maxAbsDiff(sino, fixture.sinogram);
    expect(sino.length).toBe(fixture.sinogram.length);
    expect(diff, `worst at ${index}: ${sino[index]} vs ${fixture.sinogram[index]}`).toBeLessThan(
      1e-9 * maxAbs(fixture.sinogram),
    );
  });

  test("filteredBackProjection(sinogram) equals skimage.transform.iradon(ramp) within 1e-9 of the peak", () => {
    const recon = filteredBackProjection(Float64Array.from(fixture.sinogram), geom, { circle: true });
    const { diff, index } = maxAbsDiff(recon, fixture.fbp);
    expect(diff, `worst at ${index}: ${recon[index]} vs ${fixture.fbp[index]}`).toBeLessThan(
      1e-9 * maxAbs(fixture.fbp),
    );
  });

  test("FBP of the Radon transform returns the phantom (mean error < 0.03 of its range)", () => {
    const recon = filteredBackProjection(radonTransform(null, Float64Array.from(fixture.image), geom), geom, {
      circle: true,
    });
    let sum = 0;
    for (let i = 0; i < recon.length; i++) sum += Math.abs(recon[i] - fixture.image[i]);
    expect(sum / recon.length).toBeLessThan(0.03 * maxAbs(fixture.image));
  });
});

describe("radon transform of a uniform disc (closed form: chord length 2 sqrt(r^2 - s^2))", () => {
  const n = 128;
  const r = 30;
  const c = Math.floor(n / 2);
  // Disc of value 1 centred on the rotation centre, pixel coverage by 8 x 8 supersampling.
  const disc = new Float64Array(n * n);
  for (let row = 0; row < n; row++) {
    for (let col = 0; col < n; col++) {
      let inside = 0;
      for (let a = 0; a < 8; a++)
        for (let b = 0; b < 8; b++) {
          const x = col - c + (a + 0.5) / 8 - 0.5;
          const y = row - c + (b + 0.5) / 8 - 0.5;
          if (x * x + y * y <= r * r) inside++;
        }
      disc[row * n + col] = inside / 64;
    }
  }
  const geom = parallelBeamGeometry(n, { angles: 180 });
  // Chord length averaged over one detector bin [s - 1/2, s + 1/2]: the antiderivative of
  // 2 sqrt(r^2 - u^2) is u sqrt(r^2 - u^2) + r^2 asin(u / r).
  const area = (u: number) => {
    const v = Math.max(-r, Math.min(r, u));
    return v * Math.sqrt(r * r - v * v) + r * r * Math.asin(v / r);
  };
  const chord = (s: number) => area(s + 0.5) - area(s - 0.5);

  test("every projection matches the bin-averaged chord within 1% of the diameter (|s| <= r - 2) and 1.5 px at the rim", () => {
    const sino = radonTransform(null, disc, geom);
    const half = Math.floor(geom.detectors / 2);
    for (let a = 0; a < geom.anglesDeg.length; a++) {
      for (let b = 0; b < geom.detectors; b++) {
        const s = b - half;
        const got = sino[a * geom.detectors + b];
        const want = chord(s);
        const tol = Math.abs(s) <= r - 2 ? 0.01 * 2 * r : 1.5;
        expect(Math.abs(got - want), `angle ${geom.anglesDeg[a]} bin ${b}: ${got} vs ${want}`).toBeLessThan(
          tol,
        );
      }
    }
  });

  test("FBP of the analytic disc sinogram gives 1 inside (mean within 0.2%) and |value| < 0.02 outside", () => {
    const sino = new Float64Array(geom.anglesDeg.length * geom.detectors);
    const half = Math.floor(geom.detectors / 2);
    for (let a = 0; a < geom.anglesDeg.length; a++)
      for (let b = 0; b < geom.detectors; b++) sino[a * geom.detectors + b] = chord(b - half);
    const recon = filteredBackProjection(sino, geom, { circle: true });
    let inSum = 0;
    let inN = 0;
    let outMax = 0;
    for (let row = 0; row < n; row++)
      for (let col = 0; col < n; col++) {
        const d = Math.hypot(col - c, row - c);
        const v = recon[row * n + col];
        if (d < r - 3) {
          inSum += v;
          inN++;
        } else if (d > r + 3 && d < c - 2) outMax = Math.max(outMax, Math.abs(v));
      }
    expect(Math.abs(inSum / inN - 1)).toBeLessThan(0.002);
    expect(outMax).toBeLessThan(0.02);
  });
});

describe("geometry and filters", () => {
  test("parallelBeamGeometry spreads angles evenly over [0, 180) and rejects bad sizes", () => {
    const g = parallelBeamGeometry(16, { angles: 4, detectors: fullDetectors(16) });
    expect(Array.from(g.anglesDeg)).toEqual([0, 45, 90, 135]);
    expect(g.detectors).toBe(Math.ceil(16 * Math.SQRT2) + 2);
    expect(() => parallelBeamGeometry(0)).toThrow(expect.objectContaining({ code: "BAD_ARGUMENT" }));
    expect(() => parallelBeamGeometry(8, { angles: 0 })).toThrow(
      expect.objectContaining({ code: "BAD_ARGUMENT" }),
    );
  });

  test("rampFilter of a unit impulse is 2 h(d): 1/2 at 0, -2/(pi d)^2 at odd d, 0 at even d (Kak & Slaney eq. 61)", () => {
    const g = parallelBeamGeometry(9, { angles: 1, detectors: 9 });
    const sino = new Float64Array(9);
    sino[4] = 1;
    const q = rampFilter(null, sino, g);
    expect(q[4]).toBeCloseTo(0.5, 15);
    expect(q[5]).toBeCloseTo(-2 / Math.PI ** 2, 15);
    expect(q[3]).toBeCloseTo(-2 / Math.PI ** 2, 15);
    expect(q[7]).toBeCloseTo(-2 / (9 * Math.PI ** 2), 15);
    expect(q[6]).toBe(0);
    expect(() => rampFilter(sino, sino, g)).toThrow(expect.objectContaining({ code: "BAD_ARGUMENT" }));
  });

  test("radonTransform with a ray mask computes only the masked rays", () => {
    const g = parallelBeamGeometry(16, { angles: 3 });
    const img = new Float64Array(256).fill(1);
    const mask = new Uint8Array(3 * 16);
    mask[5] = 1;
    const full = radonTransform(null, img, g);
    const part = radonTransform(null, img, g, mask);
    expect(part[5]).toBe(full[5]);
    expect(part[6]).toBe(0);
    expect(full[6]).toBeGreaterThan(0);
  });

  test("backProject of an all-zero sinogram is zero and honours an output buffer", () => {
    const g = parallelBeamGeometry(8, { angles: 4 });
    const out = new Float32Array(64).fill(7);
    backProject(out, new Float64Array(4 * 8), g);
    expect(maxAbs(out)).toBe(0);
  });
});
