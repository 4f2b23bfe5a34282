/**
 * Channel statistics and normalisation windows against NumPy (test/fixtures/export/normalize.json,
 * made by scripts/make-fixtures-export.py: numpy.percentile "linear", numpy.mean, numpy.std
 * ddof 0) and closed-form cases.
 */
import { readFileSync } from "node:fs";
import { join } from "node:path";
import { describe, expect, it } from "vitest";
import { applyUnitWindow, channelStats, ctUnitWindow, mrUnitWindow } from "../../src/export/normalize.js";

const FIX = JSON.parse(
  readFileSync(join(import.meta.dirname, "..", "fixtures", "export", "normalize.json"), "utf8"),
);
const values = Float32Array.from(FIX.values as number[]);
const body = Uint8Array.from(FIX.body as number[]);
const covered = Uint8Array.from(FIX.covered as number[]);

describe("channelStats", () => {
  it("count, min, max, mean and population std equal numpy's over all voxels and over two masks", () => {
    const all = channelStats(values);
    expect(all.count).toBe(FIX.all_stats.count);
    expect(all.min).toBe(FIX.all_stats.min);
    expect(all.max).toBe(FIX.all_stats.max);
    expect(all.mean).toBeCloseTo(FIX.all_stats.mean, 9);
    expect(all.std).toBeCloseTo(FIX.all_stats.std, 9);
    const sel = channelStats(values, body, covered);
    expect(sel.count).toBe(FIX.selected_stats.count);
    expect(sel.mean).toBeCloseTo(FIX.selected_stats.mean, 9);
    expect(sel.std).toBeCloseTo(FIX.selected_stats.std, 9);
    expect(sel.min).toBe(FIX.selected_stats.min);
    expect(sel.max).toBe(FIX.selected_stats.max);
  });

  it("skips NaN, gives NaN for an empty selection, std 0 for a constant (closed form)", () => {
    const s = channelStats(Float32Array.from([1, Number.NaN, 3]));
    expect(s.count).toBe(2);
    expect(s.mean).toBe(2);
    expect(s.std).toBe(1);
    const none = channelStats(Float32Array.from([1, 2]), Uint8Array.from([0, 0]));
    expect(none.count).toBe(0);
    expect(none.mean).toBeNaN();
    expect(channelStats(new Float32Array(5).fill(7)).std).toBe(0);
  });

  it("refuses a mask of another length", () => {
    expect(() => channelStats(new Float32Array(3), new Uint8Array(2))).toThrow(/differ in length/);
  });
});

describe("mrUnitWindow", () => {
  for (const p of FIX.percentiles as { low: number; high: number; low_value: number; high_value: number }[]) {
    it(`percentiles ${p.low},${p.high} of the body and covered voxels equal numpy.percentile (linear)`, () => {
      const both = new Uint8Array(body.length);
      for (let q = 0; q < both.length; q++) both[q] = body[q] & covered[q];
      const w = mrUnitWindow(values, both, p.low, p.high, "mr.nii.gz");
      expect(w.low).toBeCloseTo(p.low_value, 3);
      expect(w.high).toBeCloseTo(p.high_value, 3);
      expect(w.samples).toBe(FIX.selected_stats.count);
    });
  }

  it("ignores NaN voxels and refuses an MR without contrast or outside the body, naming the file", () => {
    const mr = Float32Array.from([5, 5, 5, Number.NaN]);
    expect(() => mrUnitWindow(mr, Uint8Array.from([1, 1, 1, 1]), 1, 99, "m.nii")).toThrow(
      /m\.nii: MR has no contrast/,
    );
    expect(() => mrUnitWindow(mr, new Uint8Array(4), 1, 99, "m.nii")).toThrow(
      /no MR voxel lies inside the CT body/,
    );
    expect(() => mrUnitWindow(mr, new Uint8Array(4), 50, 10, "m.nii")).toThrow(
      /are not 0 <= low < high <= 100/,
    );
  });
});

describe("ctUnitWindow / applyUnitWindow", () => {
  it("level 500 / width 3000 HU maps -1000 to 0, 500 to 0.5, 2000 to 1 and clips (closed form)", () => {
    const w = ctUnitWindow(500, 3000);
    expect(w).toEqual({ low: -1000, high: 2000 });
    const hu = Float32Array.from([-3024, -1000, 500, 2000, 3500, 125]);
    const out = applyUnitWindow(new Float32Array(6), hu, w);
    expect(Array.from(out)).toEqual([0, 0, 0.5, 1, 1, Math.fround(0.375)]);
  });

  it("works in place and leaves unselected voxels alone", () => {
    const data = Float32Array.from([0, 10, 20]);
    applyUnitWindow(data, data, { low: 0, high: 20 }, Uint8Array.from([1, 0, 1]));
    expect(Array.from(data)).toEqual([0, 10, 1]);
  });

  it("refuses a width that is not positive", () => {
    expect(() => ctUnitWindow(0, 0)).toThrow(/not usable/);
    expect(() => ctUnitWindow(Number.NaN, 10)).toThrow(/not usable/);
  });
});
