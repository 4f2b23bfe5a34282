/**
 * Error of a trial against the reference. External checks: the number of cubic-lattice points
 * in a ball (OEIS A000605, "number of points of norm <= n^2 in the cubic lattice": 7, 33, ...,
 * 7153 for n = 12; values from memory), closed forms for the RMS displacement over a solid ball
 * (pure translation d: |d|; rotation by θ about the centre: R sqrt(4 (1 - cos θ) / 5), from
 * E[u uᵀ] = R²/5 I for u uniform in a ball of radius R and ||R - I||_F² = 4 (1 - cos θ)), and a
 * hand-computed landmark example.
 */
import { describe, expect, it } from "vitest";
import { fromRows, identity, translation } from "../../src/geometry/mat4.js";
import {
  describeErrorRegion,
  landmarkRegion,
  meanDisplacementMm,
  rmsDisplacementMm,
  sphereLattice,
  sphereRegion,
  transformErrorMm,
} from "../../src/stress/error.js";
import { axisAngleMatrix } from "../../src/stress/poses.js";

describe("sphereLattice", () => {
  it("holds the cubic-lattice point counts of OEIS A000605 (n = 1, 2, 12)", () => {
    expect(sphereLattice([0, 0, 0], 5, 5).length / 3).toBe(7);
    expect(sphereLattice([0, 0, 0], 10, 5).length / 3).toBe(33);
    expect(sphereLattice([0, 0, 0], 60, 5).length / 3).toBe(7153);
  });

  it("is centred on the given point and stays within the radius", () => {
    const c = [12.5, -40, 200];
    const pts = sphereLattice(c, 60, 5);
    const mean = [0, 0, 0];
    let worst = 0;
    for (let p = 0; p < pts.length; p += 3) {
      const d = Math.hypot(pts[p] - c[0], pts[p + 1] - c[1], pts[p + 2] - c[2]);
      worst = Math.max(worst, d);
      for (let a = 0; a < 3; a++) mean[a] += pts[p + a] / (pts.length / 3);
    }
    expect(worst).toBeLessThanOrEqual(60 + 1e-9);
    expect(worst).toBeGreaterThan(59.9);
    for (let a = 0; a < 3; a++) expect(mean[a]).toBeCloseTo(c[a], 9);
  });
});

describe("rmsDisplacementMm over the 60 mm sphere", () => {
  const c = [90, 11, -196];
  const region = sphereRegion(c);

  it("is |d| for a pure translation d (closed form) and 0 for equal transforms", () => {
    const ref = fromRows([
      [0.999, -0.024, -0.032, 7.7],
      [0.024, 0.9996, -0.016, 10.75],
      [0.032, 0.015, 0.9994, 14.6],
      [0, 0, 0, 1],
    ]);
    const moved = new Float64Array(ref);
    moved[3] += 3;
    moved[7] -= 4;
    expect(transformErrorMm(region, moved, ref)).toBeCloseTo(5, 10);
    expect(transformErrorMm(region, ref, ref)).toBe(0);
  });

  it("is within 0.5% of the solid-ball closed form R sqrt(4 (1 - cos θ) / 5) for a rotation about the centre", () => {
    for (const deg of [1, 5, 10]) {
      const r = axisAngleMatrix(new Float64Array(16), [0.2, 0.9, -0.4], deg);
      // rotate about c: x -> R (x - c) + c
      for (let row = 0; row < 3; row++) {
        r[4 * row + 3] = c[row] - (r[4 * row] * c[0] + r[4 * row + 1] * c[1] + r[4 * row + 2] * c[2]);
      }
      const closed = 60 * Math.sqrt((4 * (1 - Math.cos((deg * Math.PI) / 180))) / 5);
      const got = rmsDisplacementMm(r, identity(), region.pointsMm);
      expect(Math.abs(got - closed) / closed, `${deg} deg`).toBeLessThan(0.005);
    }
  });

  it("describes itself with the point count and radius", () => {
    expect(describeErrorRegion(region)).toContain("7153 points of a 5 mm cubic lattice within 60 mm");
  });
});

describe("landmark error", () => {
  it("is the mean of |A p - B p| over the fixed landmarks (hand-computed)", () => {
    // A - B is a translation by (3, 4, 0) plus, for the second point, nothing else:
    // use A = translation(3, 4, 0), B = identity: every point moves 5 mm.
    const pts = Float64Array.from([0, 0, 0, 10, 0, 0, 0, 10, 0]);
    expect(meanDisplacementMm(translation(3, 4, 0), identity(), pts)).toBeCloseTo(5, 12);
    // A = scaling by 2 about the origin: displacements |p| = 0, 10, 10 -> mean 20/3, RMS sqrt(200/3).
    const scale = fromRows([
      [2, 0, 0, 0],
      [0, 2, 0, 0],
      [0, 0, 2, 0],
      [0, 0, 0, 1],
    ]);
    const region = landmarkRegion(["a", "b", "c"], pts);
    expect(transformErrorMm(region, scale, identity())).toBeCloseTo(20 / 3, 12);
    expect(rmsDisplacementMm(scale, identity(), pts)).toBeCloseTo(Math.sqrt(200 / 3), 12);
    expect(region.centerMm).toEqual([10 / 3, 10 / 3, 0]);
    expect(describeErrorRegion(region)).toContain("mean over the 3 fixed landmarks");
  });
});
