/**
 * The qform quaternion formulas of the NIfTI-1 standard (nifti1.h, method 2): matrix ->
 * quaternion -> matrix round trips, and hand-checked cases.
 */
import { describe, expect, it } from "vitest";
import { Rng } from "../../src/common/random.js";
import { compose, type Mat4, scaling, toRows } from "../../src/geometry/mat4.js";
import { rotationFromDeg } from "../../src/geometry/rotation.js";
import { matrixToQuaternion, quaternionToMatrix, shearOf } from "../../src/image/nifti-quaternion.js";
import { expectAllClose } from "../helpers/close.js";

describe("NIfTI-1 qform quaternion (nifti1.h method 2)", () => {
  it("quaternion [a,b,c,d] = [0,1,0,0] with qfac = 1 is R = diag(1,-1,-1) (the example in nifti1.h)", () => {
    const m = quaternionToMatrix({
      quaternB: 1,
      quaternC: 0,
      quaternD: 0,
      qoffset: [0, 0, 0],
      pixdim: [1, 1, 1],
      qfac: 1,
    });
    expectAllClose(
      toRows(m),
      [
        [1, 0, 0, 0],
        [0, -1, 0, 0],
        [0, 0, -1, 0],
        [0, 0, 0, 1],
      ],
      1e-12,
    );
  });

  it("hand-checked: 90 degrees about z (b = c = 0, d = sin 45°), pixdim 2,3,4, qfac -1, offset (10,-20,30)", () => {
    // a = cos 45°, d = sin 45°: R = [[0,-1,0],[1,0,0],[0,0,1]] (worked by hand from the formula),
    // columns scaled by pixdim, third column negated by qfac = -1.
    const m = quaternionToMatrix({
      quaternB: 0,
      quaternC: 0,
      quaternD: Math.SQRT1_2,
      qoffset: [10, -20, 30],
      pixdim: [2, 3, 4],
      qfac: -1,
    });
    expectAllClose(
      toRows(m),
      [
        [0, -3, 0, 10],
        [2, 0, 0, -20],
        [0, 0, -4, 30],
        [0, 0, 0, 1],
      ],
      1e-12,
    );
    const q = matrixToQuaternion(m);
    expect(q.qfac).toBe(-1);
    expectAllClose([q.quaternB, q.quaternC, q.quaternD], [0, 0, Math.SQRT1_2], 1e-12);
    expectAllClose(q.pixdim, [2, 3, 4], 1e-12);
  });

  it("matrix -> quaternion -> matrix is the identity for 500 random rotations, pixdims and qfac = ±1", () => {
    const rng = new Rng(20261201);
    const r = new Float64Array(16);
    for (let t = 0; t < 500; t++) {
      rotationFromDeg(r, rng.range(-180, 180), rng.range(-90, 90), rng.range(-180, 180));
      const qfac = t % 2 === 0 ? 1 : -1;
      const s = scaling(rng.range(0.3, 5), rng.range(0.3, 5), qfac * rng.range(0.3, 5));
      const m: Mat4 = compose(r, s);
      m[3] = rng.range(-300, 300);
      m[7] = rng.range(-300, 300);
      m[11] = rng.range(-300, 300);
      const q = matrixToQuaternion(m);
      expect(q.qfac).toBe(qfac);
      // The standard keeps a >= 0.
      expect(1 - (q.quaternB ** 2 + q.quaternC ** 2 + q.quaternD ** 2)).toBeGreaterThanOrEqual(-1e-12);
      expectAllClose(quaternionToMatrix(q), m, 1e-9, `trial ${t}`);
    }
  });

  it("shearOf is 0 for rotation·scaling and > 0 when columns are not orthogonal", () => {
    const m = compose(rotationFromDeg(new Float64Array(16), 10, 20, 30), scaling(1, 2, 3));
    expect(shearOf(m)).toBeLessThan(1e-12);
    m[1] += 0.2;
    expect(shearOf(m)).toBeGreaterThan(0.01);
  });
});
