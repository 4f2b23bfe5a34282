import { readFileSync } from "node:fs";
import { describe, expect, it } from "vitest";
import { identity, type Mat4, translation } from "../../src/geometry/mat4.js";
import { rigidMatrix } from "../../src/geometry/rotation.js";
import { Volume } from "../../src/image/volume.js";
import { createMetric, type MetricKind } from "../../src/metrics/metric.js";
import { createSampleSet, percentile, robustRange } from "../../src/metrics/sampler.js";

// Reference values: skimage.metrics.normalized_mutual_information and scipy.stats.entropy
// (versions in the fixture), written by scripts/make-fixtures-metrics.py.
const fx = JSON.parse(readFileSync(new URL("../fixtures/metrics/nmi.json", import.meta.url), "utf8")) as {
  source: string;
  dims: [number, number, number];
  fixed: number[];
  related: number[];
  independent: number[];
  cases: { pair: "related" | "independent"; bins: number; nmi: number; mi_nats: number }[];
};

const unit = (spacing = 1): Mat4 =>
  new Float64Array([spacing, 0, 0, -10, 0, spacing, 0, 5, 0, 0, spacing, 2, 0, 0, 0, 1]);

function vol(
  dims: readonly [number, number, number],
  data: ArrayLike<number>,
  affine = unit(),
): Volume<Float32Array> {
  return new Volume([dims[0], dims[1], dims[2]], Float32Array.from(data), affine);
}

function minMax(a: ArrayLike<number>): [number, number] {
  let lo = Infinity;
  let hi = -Infinity;
  for (let i = 0; i < a.length; i++) {
    lo = Math.min(lo, Math.fround(a[i]));
    hi = Math.max(hi, Math.fround(a[i]));
  }
  return [lo, hi];
}

/** A smooth test image: three Gaussian blobs of different heights, world mm. */
function blobs(x: number, y: number, z: number): number {
  return (
    100 * Math.exp(-((x - 3) ** 2 + (y - 12) ** 2 + (z - 9) ** 2) / 18) +
    60 * Math.exp(-((x - 12) ** 2 + (y - 18) ** 2 + (z - 14) ** 2) / 30) +
    140 * Math.exp(-((x + 2) ** 2 + (y - 22) ** 2 + (z - 18) ** 2) / 12) +
    0.5 * x
  );
}

function field(
  dims: readonly [number, number, number],
  affine: Mat4,
  f: (x: number, y: number, z: number) => number,
) {
  const data = new Float32Array(dims[0] * dims[1] * dims[2]);
  let q = 0;
  for (let k = 0; k < dims[2]; k++)
    for (let j = 0; j < dims[1]; j++)
      for (let i = 0; i < dims[0]; i++) {
        const x = affine[0] * i + affine[1] * j + affine[2] * k + affine[3];
        const y = affine[4] * i + affine[5] * j + affine[6] * k + affine[7];
        const z = affine[8] * i + affine[9] * j + affine[10] * k + affine[11];
        data[q++] = f(x, y, z);
      }
  return new Volume([dims[0], dims[1], dims[2]], data, affine);
}

describe(`MI and NMI against scikit-image / scipy (${fx.source})`, () => {
  for (const c of fx.cases) {
    it(`${c.pair} arrays, ${c.bins} plain bins: NMI ${c.nmi.toFixed(4)}, MI ${c.mi_nats.toFixed(4)} nats`, () => {
      const fixed = vol(fx.dims, fx.fixed);
      const moving = vol(fx.dims, fx[c.pair]);
      const common = {
        fixed,
        moving,
        bins: c.bins,
        parzen: "box" as const,
        fixedRange: minMax(fx.fixed),
        movingRange: minMax(fx[c.pair]),
        samples: 1e9,
      };
      const nmi = createMetric("nmi", common);
      expect(nmi.evaluate(identity())).toBeCloseTo(-c.nmi, 5);
      expect(nmi.similarity).toBeCloseTo(c.nmi, 5);
      expect(nmi.overlap).toBe(1);
      const mi = createMetric("mi", common);
      expect(mi.evaluate(identity())).toBeCloseTo(-c.mi_nats, 5);
    });
  }
});

describe("closed forms", () => {
  const dims = [16, 12, 10] as const;
  const half = Float32Array.from({ length: 16 * 12 * 10 }, (_, q) => (q % 16 < 8 ? 10 : 90));

  for (const parzen of ["box", "bspline"] as const) {
    it(`identical two-level images with equal halves: MI = ln 2 nats = 1 bit (${parzen} window)`, () => {
      const m = createMetric("mi", { fixed: vol(dims, half), moving: vol(dims, half), parzen, samples: 1e9 });
      expect(m.evaluate(identity())).toBeCloseTo(-Math.LN2, 12);
    });
  }

  it("identical two-level images: NMI = 2 (plain bins), since H(F,M) = H(F) = H(M)", () => {
    const m = createMetric("nmi", {
      fixed: vol(dims, half),
      moving: vol(dims, half),
      parzen: "box",
      samples: 1e9,
    });
    expect(m.evaluate(identity())).toBeCloseTo(-2, 12);
  });

  it("independent images: MI -> 0, near the plug-in bias (B-1)^2/(2N) (Miller 1955) for plain bins", () => {
    const big = [64, 64, 32] as const;
    const n = 64 * 64 * 32;
    let s = 12345;
    const rnd = () => {
      s = (Math.imul(s, 1103515245) + 12345) >>> 0;
      return s / 4294967296;
    };
    const a = Float32Array.from({ length: n }, rnd);
    const b = Float32Array.from({ length: n }, rnd);
    const box = createMetric("mi", {
      fixed: vol(big, a),
      moving: vol(big, b),
      parzen: "box",
      samples: 1e9,
      bins: 32,
    });
    const miBox = -box.evaluate(identity());
    const bias = (31 * 31) / (2 * n);
    expect(miBox).toBeGreaterThan(0.5 * bias);
    expect(miBox).toBeLessThan(1.5 * bias);
    const parzen = createMetric("mi", { fixed: vol(big, a), moving: vol(big, b), samples: 1e9, bins: 32 });
    const miParzen = -parzen.evaluate(identity());
    expect(miParzen).toBeGreaterThanOrEqual(0);
    expect(miParzen).toBeLessThan(miBox);
  });

  it("LNCC = 1 for an image against a positive affine intensity map of itself (cost -1)", () => {
    const f = field([24, 26, 22], unit(1.2), blobs);
    const g = f.withData(Float32Array.from(f.data, (v) => 3.5 * v - 40));
    for (const points of [3, 5]) {
      const m = createMetric("lncc", {
        fixed: f,
        moving: g,
        windowMm: 6,
        windowPoints: points,
        samples: 5000,
      });
      expect(m.evaluate(identity())).toBeCloseTo(-1, 9);
      expect(m.overlap).toBe(1);
    }
  });
});

describe("overlap and masks", () => {
  const dims = [20, 20, 20] as const;
  const f = field(dims, unit(), blobs);

  for (const kind of ["mi", "nmi", "lncc"] as MetricKind[]) {
    it(`${kind}: overlap fraction is exact for a known shift; no overlap gives a cost worse than any real value`, () => {
      const m = createMetric(kind, { fixed: f, moving: f, samples: 1e9, windowMm: 1.5, windowPoints: 3 });
      m.evaluate(identity());
      expect(m.overlap).toBe(1);
      // Fixed x maps to x + 5 mm: fixed voxels i <= 14 land inside the moving box (i + 5 <= 19.5).
      // For LNCC the window (+-0.5 mm) must fit as well: i + 5 + 0.5 <= 19.5 -> i <= 14 too.
      m.evaluate(translation(5, 0, 0));
      expect(m.overlap).toBe(15 / 20);
      const far = m.evaluate(translation(30, 0, 0));
      expect(m.overlap).toBe(0);
      expect(m.penalised).toBe(true);
      expect(far).toBeGreaterThan(kind === "nmi" ? 0 : 1);
      // Less overlap is worse still (guides the optimiser back).
      const sliver = createMetric(kind, {
        fixed: f,
        moving: f,
        samples: 1e9,
        minOverlap: 0.5,
        windowMm: 1.5,
      });
      const c1 = sliver.evaluate(translation(12, 0, 0));
      const c2 = sliver.evaluate(translation(16, 0, 0));
      expect(sliver.penalised).toBe(true);
      expect(c2).toBeGreaterThan(c1);
    });
  }

  it("moving mask: samples mapping where the moving mask is 0 do not count", () => {
    const mask = new Uint8Array(f.count);
    for (let q = 0; q < mask.length; q++) mask[q] = q % 20 < 10 ? 1 : 0;
    const m = createMetric("mi", { fixed: f, moving: f, movingMask: mask, samples: 1e9 });
    m.evaluate(identity());
    expect(m.overlap).toBe(0.5);
    expect(m.counted).toBe(4000);
  });

  it("moving mask on a grid whose size is not a multiple of 8: every masked-out voxel is dropped", () => {
    // 7 x 7 x 7 = 343 voxels: the bitset's last byte holds 7 voxels. Identity transform, every
    // voxel sampled: the counted samples are exactly the voxels the mask keeps (closed form).
    const g = new Volume(
      [7, 7, 7],
      Float32Array.from({ length: 343 }, (_, q) => (q * 37) % 11),
      identity(),
    );
    const mask = new Uint8Array(343);
    let kept = 0;
    for (let q = 0; q < 343; q++) {
      mask[q] = q % 3 === 0 || q >= 336 ? 1 : 0;
      kept += mask[q];
    }
    const m = createMetric("mi", { fixed: g, moving: g, movingMask: mask, samples: 1e9 });
    m.evaluate(identity());
    expect(kept).toBe(119);
    expect(m.counted).toBe(kept);
  });

  it("fixed mask: samples are drawn only from it", () => {
    const mask = new Uint8Array(f.count);
    mask[5] = mask[77] = mask[4000] = 1;
    const set = createSampleSet(f, { mask });
    expect(Array.from(set.voxel)).toEqual([5, 77, 4000]);
    expect(set.world[0]).toBeCloseTo(-10 + 5, 12);
    expect(() => createSampleSet(f, { mask: new Uint8Array(f.count) })).toThrow(
      expect.objectContaining({ code: "NO_OVERLAP" }),
    );
  });

  it("sample sets are seeded: same seed, same samples; another seed, others; no duplicates", () => {
    const a = createSampleSet(f, { samples: 500, seed: 7 });
    const b = createSampleSet(f, { samples: 500, seed: 7 });
    const c = createSampleSet(f, { samples: 500, seed: 8 });
    expect(Array.from(a.voxel)).toEqual(Array.from(b.voxel));
    expect(Array.from(a.voxel)).not.toEqual(Array.from(c.voxel));
    expect(new Set(a.voxel).size).toBe(500);
    for (let s = 1; s < 500; s++) expect(a.voxel[s]).toBeGreaterThan(a.voxel[s - 1]);
  });
});

describe("metric minimum at the true transform", () => {
  // Moving = the same anatomy displaced: moving(x) = blobs(x - d), so fixed x matches moving x + d.
  const d = [2, -1.5, 1];
  const fixed = field([26, 30, 26], unit(1), blobs);
  const moving = field([28, 28, 28], unit(1.1), (x, y, z) => blobs(x - d[0], y - d[1], z - d[2]));

  for (const kind of ["mi", "nmi", "lncc"] as MetricKind[]) {
    it(`${kind}: a scan along each axis is lowest at the true shift (0.5 mm steps)`, () => {
      const m = createMetric(kind, { fixed, moving, samples: 20000, seed: 3, windowMm: 5 });
      for (let axis = 0; axis < 3; axis++) {
        let best = Infinity;
        let bestShift = Number.NaN;
        for (let step = -8; step <= 8; step++) {
          const t = [d[0], d[1], d[2]];
          t[axis] += step * 0.5;
          const cost = m.evaluate(translation(t[0], t[1], t[2]));
          if (cost < best) {
            best = cost;
            bestShift = step * 0.5;
          }
        }
        expect(bestShift, `axis ${axis}`).toBe(0);
      }
      // And a small rotation about the image centre is worse than none.
      const atTruth = m.evaluate(translation(d[0], d[1], d[2]));
      const rotated = m.evaluate(rigidMatrix([3, 15, 13], [0, 0, 6], [d[0], d[1], d[2]]));
      expect(rotated).toBeGreaterThan(atTruth);
    });
  }

  it("evaluate is deterministic and rejects a non-finite transform", () => {
    const m = createMetric("mi", { fixed, moving, samples: 5000, seed: 3 });
    const t = translation(1, 2, 3);
    expect(m.evaluate(t)).toBe(m.evaluate(t));
    const bad = identity();
    bad[5] = Number.POSITIVE_INFINITY;
    expect(() => m.evaluate(bad)).toThrow(expect.objectContaining({ code: "BAD_TRANSFORM" }));
  });

  it("rejects unknown kinds and bad bins", () => {
    expect(() => createMetric("cc" as MetricKind, { fixed, moving })).toThrow(
      expect.objectContaining({ code: "BAD_ARGUMENT" }),
    );
    expect(() => createMetric("mi", { fixed, moving, bins: 4 })).toThrow(
      expect.objectContaining({ code: "BAD_ARGUMENT" }),
    );
  });
});

describe("robust range", () => {
  it("percentile uses numpy's linear interpolation; robustRange honours the mask", () => {
    // numpy.percentile([1, 2, 3, 4], 25) = 1.75 (position 0.75; documented numpy behaviour).
    expect(percentile([4, 1, 3, 2], 25)).toBeCloseTo(1.75, 12);
    const data = Float32Array.from({ length: 1001 }, (_, q) => q);
    expect(robustRange(data, undefined, [0.5, 99.5])).toEqual([5, 995]);
    const mask = Uint8Array.from({ length: 1001 }, (_, q) => (q <= 100 ? 1 : 0));
    expect(robustRange(data, mask, [0, 100])).toEqual([0, 100]);
    // A constant image gets a unit-wide range instead of an empty one.
    expect(robustRange(new Float32Array(10).fill(3))).toEqual([2.5, 3.5]);
  });
});
