import { describe, expect, test } from "vitest";
import {
  compileShape,
  evalProgram,
  programStack,
  type Shape,
  shapeBounds,
  shapeDistance,
  smoothMin,
} from "../../src/phantom/sdf.js";

// Closed-form distances (Euclidean geometry) for the exact primitives; the ellipsoid is a
// first-order estimate that is exact on its axes.
describe("signed distances", () => {
  test("sphere: |x - c| - r", () => {
    const s: Shape = { op: "sphere", c: [1, 2, 3], r: 5 };
    expect(shapeDistance(s, 1, 2, 3)).toBeCloseTo(-5, 12);
    expect(shapeDistance(s, 1 + 8, 2, 3)).toBeCloseTo(3, 12);
  });

  test("capsule: distance to the segment minus the interpolated radius", () => {
    const s: Shape = { op: "capsule", a: [0, 0, 0], b: [0, 0, 10], ra: 2, rb: 2 };
    expect(shapeDistance(s, 5, 0, 5)).toBeCloseTo(3, 12);
    expect(shapeDistance(s, 0, 0, 14)).toBeCloseTo(2, 12);
    const taper: Shape = { op: "capsule", a: [0, 0, 0], b: [0, 0, 10], ra: 4, rb: 2 };
    expect(shapeDistance(taper, 10, 0, 5)).toBeCloseTo(7, 12);
  });

  test("box with rotated axes: face distance and corner distance", () => {
    const s: Shape = {
      op: "box",
      c: [0, 0, 0],
      half: [1, 2, 3],
      axes: [
        [0, 1, 0],
        [-1, 0, 0],
        [0, 0, 1],
      ],
    };
    // local x is world y: the half-size 1 lies along world y.
    expect(shapeDistance(s, 0, 3, 0)).toBeCloseTo(2, 12);
    expect(shapeDistance(s, 4, 0, 0)).toBeCloseTo(2, 12);
    expect(shapeDistance(s, 3, 2, 3)).toBeCloseTo(Math.hypot(1, 1), 12);
  });

  test("ellipsoid estimate is exact on the axes and negative at the centre", () => {
    const s: Shape = { op: "ellipsoid", c: [0, 0, 0], r: [10, 5, 2] };
    expect(shapeDistance(s, 12, 0, 0)).toBeCloseTo(2, 10);
    expect(shapeDistance(s, 0, 4, 0)).toBeCloseTo(-1, 10);
    expect(shapeDistance(s, 0, 0, 0)).toBeLessThan(0);
  });

  test("union, intersection and subtraction are min, max and max(a, -b) without blending", () => {
    const a: Shape = { op: "sphere", c: [0, 0, 0], r: 3 };
    const b: Shape = { op: "sphere", c: [4, 0, 0], r: 3 };
    const x = 1;
    const da = shapeDistance(a, x, 0, 0);
    const db = shapeDistance(b, x, 0, 0);
    expect(shapeDistance({ op: "union", of: [a, b] }, x, 0, 0)).toBeCloseTo(Math.min(da, db), 12);
    expect(shapeDistance({ op: "intersect", of: [a, b] }, x, 0, 0)).toBeCloseTo(Math.max(da, db), 12);
    expect(shapeDistance({ op: "subtract", from: a, cut: b }, x, 0, 0)).toBeCloseTo(Math.max(da, -db), 12);
    expect(shapeDistance({ op: "offset", of: a, by: 1 }, 5, 0, 0)).toBeCloseTo(1, 12);
  });

  test("smoothMin is at most min(a, b) and equals it when the values are k apart", () => {
    expect(smoothMin(1, 2, 0)).toBe(1);
    expect(smoothMin(1, 1, 2)).toBeCloseTo(0.5, 12);
    expect(smoothMin(1, 3, 2)).toBe(1);
    expect(smoothMin(1, 1.5, 2)).toBeLessThan(1);
  });

  test("bounds contain every inside point of a rotated ellipsoid, and a bare plane is refused", () => {
    const s: Shape = {
      op: "ellipsoid",
      c: [5, -3, 2],
      r: [10, 4, 2],
      axes: [
        [0.6, 0.8, 0],
        [-0.8, 0.6, 0],
        [0, 0, 1],
      ],
    };
    const b = shapeBounds(s);
    const prog = compileShape(s);
    const stack = programStack(prog);
    let inside = 0;
    for (let x = -20; x <= 30; x += 0.5)
      for (let y = -20; y <= 15; y += 0.5)
        for (let z = -2; z <= 6; z += 0.5) {
          if (evalProgram(prog, stack, x, y, z) < 0) {
            inside++;
            expect(x >= b.min[0] && x <= b.max[0] && y >= b.min[1] && y <= b.max[1]).toBe(true);
          }
        }
    expect(inside).toBeGreaterThan(100);
    expect(() => compileShape({ op: "plane", p: [0, 0, 0], n: [0, 0, 1] })).toThrow(
      expect.objectContaining({ code: "BAD_ARGUMENT" }),
    );
    expect(() => compileShape({ op: "sphere", c: [0, 0, 0], r: -1 })).toThrow(
      expect.objectContaining({ code: "BAD_ARGUMENT" }),
    );
  });
});
