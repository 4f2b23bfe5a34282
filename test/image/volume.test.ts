/** Volume geometry helpers: voxel centre <-> world, bounds, orientation codes. */
import { describe, expect, it } from "vitest";
import { compose, scaling, translation } from "../../src/geometry/mat4.js";
import { rotationFromDeg } from "../../src/geometry/rotation.js";
import { intensityStats, orientationCode, Volume } from "../../src/image/volume.js";
import { expectAllClose } from "../helpers/close.js";

describe("Volume", () => {
  it("indexToWorldPoint maps voxel centres; boundsWorld covers the outer voxel faces", () => {
    const vol = new Volume(
      [10, 20, 5],
      new Float32Array(1000),
      compose(translation(-50, 10, 100), scaling(2, 1, 4)),
    );
    const p = [0, 0, 0];
    vol.indexToWorldPoint(p, 9, 19, 4);
    expectAllClose(p, [-32, 29, 116], 1e-12);
    const box = vol.boundsWorld();
    expectAllClose(box.min, [-51, 9.5, 98], 1e-12);
    expectAllClose(box.max, [-31, 29.5, 118], 1e-12);
    expectAllClose(vol.centerWorld(), [-41, 19.5, 108], 1e-12);
    expectAllClose(vol.spacingMm, [2, 1, 4], 1e-12);
  });

  it("orientation codes: RAS for identity, LPS for DICOM-like, and the dominant axis for oblique grids", () => {
    // RAS+ world: +x = R, +y = A, +z = S (NIfTI-1 standard).
    expect(orientationCode(scaling(1, 1, 1))).toBe("RAS");
    expect(orientationCode(scaling(-1, -1, 1))).toBe("LPS");
    expect(orientationCode(scaling(-1, 1, 1))).toBe("LAS");
    const oblique = compose(rotationFromDeg(new Float64Array(16), 20, 0, 0), scaling(1, 1, 1));
    expect(orientationCode(oblique)).toBe("RAS");
    // Axes permuted: i along S, j along R, k along P.
    const perm = new Float64Array([0, 1, 0, 0, 0, 0, -1, 0, 1, 0, 0, 0, 0, 0, 0, 1]);
    expect(orientationCode(perm)).toBe("SRP");
  });

  it("refuses mismatched data length and a singular affine", () => {
    expect(() => new Volume([2, 2, 2], new Float32Array(7), scaling(1, 1, 1))).toThrow(/7 voxels/);
    expect(() => new Volume([2, 2, 2], new Float32Array(8), scaling(1, 0, 1))).toThrow(/singular/);
  });

  it("intensityStats ignores NaN and gives exact mean for a known set", () => {
    const s = intensityStats(Float32Array.from([1, 2, Number.NaN, 3, 4]));
    expect(s).toEqual({ min: 1, max: 4, mean: 2.5, finite: 4 });
    expect(intensityStats(Float32Array.from([Number.NaN])).finite).toBe(0);
  });
});
