/**
 * Two-thread histogram metrics (src/metrics/split.ts): splitting the samples between the main
 * thread and a helper gives the same metric as one thread (the sum of two partial joint
 * histograms equals the whole; closed form up to floating-point summation order).
 */
import { afterAll, describe, expect, it } from "vitest";
import { identity, translation } from "../../src/geometry/mat4.js";
import { Volume } from "../../src/image/volume.js";
import { createMetric } from "../../src/metrics/metric.js";
import { MetricSplitter } from "../../src/metrics/split.js";

function blobs(n: number, shift: number): Volume {
  const data = new Float32Array(n * n * n);
  for (let k = 0, q = 0; k < n; k++)
    for (let j = 0; j < n; j++)
      for (let i = 0; i < n; i++, q++) {
        const x = i - n / 2 - shift;
        data[q] =
          100 * Math.exp(-(x * x + (j - n / 3) ** 2 + (k - n / 2) ** 2) / 40) + ((i * 7 + j * 3 + k) % 5);
      }
  return new Volume([n, n, n], data, identity());
}

describe("MetricSplitter", () => {
  const splitter = new MetricSplitter(100, 0);
  afterAll(() => splitter.close());
  const fixed = blobs(32, 0);
  const moving = blobs(32, 1.5);
  const mask = new Uint8Array(fixed.count).fill(1);
  for (let q = 0; q < mask.length; q += 3) mask[q] = 0;

  for (const kind of ["mi", "nmi"] as const) {
    it(`${kind}: split evaluation equals single-thread evaluation, counts included`, () => {
      const one = createMetric(kind, { fixed, moving, movingMask: mask, samples: 20000, seed: 3 });
      const two = createMetric(kind, { fixed, moving, movingMask: mask, samples: 20000, seed: 3, splitter });
      for (const t of [identity(), translation(1.5, 0, 0), translation(0.3, -0.7, 2.2)]) {
        const a = one.evaluate(t);
        const b = two.evaluate(t);
        expect(b).toBeCloseTo(a, 12);
        expect(two.counted).toBe(one.counted);
      }
      // The metric is best at the true shift either way.
      expect(two.evaluate(translation(1.5, 0, 0))).toBeLessThan(two.evaluate(identity()));
    });
  }

  it("rebinding to another metric and back keeps both correct", () => {
    const a1 = createMetric("mi", { fixed, moving, samples: 5000, seed: 1, splitter });
    const b1 = createMetric("mi", { fixed, moving, samples: 6000, seed: 2, splitter });
    const a0 = createMetric("mi", { fixed, moving, samples: 5000, seed: 1 });
    const b0 = createMetric("mi", { fixed, moving, samples: 6000, seed: 2 });
    const t = translation(0.5, 0.5, 0);
    expect(a1.evaluate(t)).toBeCloseTo(a0.evaluate(t), 12);
    expect(b1.evaluate(t)).toBeCloseTo(b0.evaluate(t), 12);
    expect(a1.evaluate(t)).toBeCloseTo(a0.evaluate(t), 12);
  });
});
