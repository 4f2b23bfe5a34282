/** Line-against-interval clipping (closed forms: p0 + t d in [lo, hi] <=> t in [(lo-p0)/d, (hi-p0)/d]). */
import { describe, expect, it } from "vitest";
import { clipLine } from "../../src/geometry/clip-line.js";

const clip = (r0: number, r1: number, p0: number, d: number, lo: number, hi: number, tol = 0) => {
  const range = Float64Array.of(r0, r1);
  clipLine(range, p0, d, lo, hi, tol);
  return [range[0], range[1]];
};

describe("clipLine", () => {
  it("narrows to the closed-form parameter interval for rising and falling lines", () => {
    // 2 + 0.5 t in [0, 4] <=> t in [-4, 4]; intersected with [0, 10] -> [0, 4].
    expect(clip(0, 10, 2, 0.5, 0, 4)).toEqual([0, 4]);
    // 2 - 0.5 t in [0, 4] <=> t in [-4, 4] (ends swap); with [-10, 10] -> [-4, 4].
    expect(clip(-10, 10, 2, -0.5, 0, 4)).toEqual([-4, 4]);
  });

  it("a line parallel to the interval keeps everything or nothing", () => {
    expect(clip(0, 9, 3, 0, 0, 4)).toEqual([0, 9]);
    expect(clip(0, 9, 5, 0, 0, 4)).toEqual([1, 0]);
  });

  it("a line that misses the interval, or an interval with hi < lo, gives [1, 0]", () => {
    // 10 + t in [0, 4] <=> t in [-10, -6], disjoint from [0, 5].
    expect(clip(0, 5, 10, 1, 0, 4)).toEqual([1, 0]);
    expect(clip(0, 5, 0, 1, 1, 0.5)).toEqual([1, 0]);
  });

  it("the tolerance widens the ends by its share of the largest |t|", () => {
    // t in [-4, 4], tolerance 1e-3 of max(1, 4) = 4e-3 on each side.
    const [a, b] = clip(-10, 10, 2, 0.5, 0, 4, 1e-3);
    expect(a).toBeCloseTo(-4.004, 12);
    expect(b).toBeCloseTo(4.004, 12);
  });
});
