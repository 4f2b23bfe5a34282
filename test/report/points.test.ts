import { readFileSync } from "node:fs";
import { describe, expect, it } from "vitest";
import { fromRows } from "../../src/geometry/mat4.js";
import { Volume } from "../../src/image/volume.js";
import {
  centroidAbove,
  choosePoints,
  metalCentroidsBySide,
  midSagittalXmm,
  otsuThreshold,
} from "../../src/report/points.js";
import { expectAllClose } from "../helpers/close.js";

const reference = JSON.parse(
  readFileSync(new URL("../fixtures/report/reference.json", import.meta.url), "utf8"),
) as { otsu: { data: number[]; threshold: number; bin_width: number } };

// 40 x 20 x 10 voxels of 2 mm, LPS-stored, centred so that world x runs 39 .. -39 mm along i.
const AFFINE = fromRows([
  [-2, 0, 0, 39],
  [0, -2, 0, 19],
  [0, 0, 2, -9],
  [0, 0, 0, 1],
]);
const DIMS: [number, number, number] = [40, 20, 10];

/** CT-like grid: air -1000, a body box of soft tissue 40 HU shifted to world x > -15 mm, metal blocks. */
function hipGrid(metal: { i: [number, number]; j: [number, number]; k: [number, number] }[]) {
  const n = DIMS[0] * DIMS[1] * DIMS[2];
  const data = new Int16Array(n).fill(-1000);
  const mask = new Uint8Array(n);
  for (let k = 0; k < DIMS[2]; k++)
    for (let j = 2; j < 18; j++) for (let i = 2; i < 30; i++) data[i + DIMS[0] * (j + DIMS[1] * k)] = 40; // x from 35 to -19 mm
  for (const b of metal)
    for (let k = b.k[0]; k <= b.k[1]; k++)
      for (let j = b.j[0]; j <= b.j[1]; j++)
        for (let i = b.i[0]; i <= b.i[1]; i++) {
          const p = i + DIMS[0] * (j + DIMS[1] * k);
          data[p] = 3000;
          mask[p] = 1;
        }
  return { volume: new Volume(DIMS, data, AFFINE), mask };
}

describe("points of interest", () => {
  it("midSagittalXmm is the x of the body centroid (voxels above -300 HU): i 2..29 -> x = 39 - 2 * 15.5 = 8 mm", () => {
    const { volume } = hipGrid([]);
    expect(midSagittalXmm(volume, true)).toBeCloseTo(8, 10);
    expect(centroidAbove(volume, 1e6)).toBeUndefined();
  });

  it("choosePoints puts the implant at the metal centroid and mirrors it across the mid-sagittal plane", () => {
    // Metal block i 4..7 (x 31..25 mm, centre 28), j 8..11 (y 3..-3, centre 0), k 3..6 (z -3..3, centre 0).
    const { volume, mask } = hipGrid([{ i: [4, 7], j: [8, 11], k: [3, 6] }]);
    const points = choosePoints(volume, { metalMask: mask, fixedIsCt: true });
    expect(points.map((p) => p.key)).toEqual(["implant", "otherHip"]);
    expectAllClose(points[0].mm, [28, 0, 0], 1e-9, "implant");
    // The metal block lies inside the body box (and is above -300 HU too), so the body centroid
    // stays at i = 15.5: x_mid = 39 - 2 * 15.5 = 8 mm.
    const mid = 8;
    expectAllClose(points[1].mm, [2 * mid - 28, 0, 0], 1e-9, "other hip");
    expect(points[0].how).toContain("64 metal-mask voxels on the patient's right");
    expect(points[1].how).toContain("mirrored");
  });

  it("with metal on both sides the larger block is the implant and the other block is the other hip", () => {
    const { volume, mask } = hipGrid([
      { i: [4, 7], j: [8, 11], k: [3, 6] }, // 64 voxels, x centre 28 (right)
      { i: [24, 25], j: [8, 9], k: [3, 4] }, // 8 voxels, x centre 39 - 2 * 24.5 = -10 (left)
    ]);
    const sides = metalCentroidsBySide(mask, volume, midSagittalXmm(volume, true));
    expect(sides.right?.voxels).toBe(64);
    expect(sides.left?.voxels).toBe(8);
    const points = choosePoints(volume, { metalMask: mask, fixedIsCt: true });
    expectAllClose(points[0].mm, [28, 0, 0], 1e-9, "implant");
    expectAllClose(points[1].mm, [-10, 2, -2], 1e-9, "second implant"); // j 8..9 -> y 3..1, k 3..4 -> z -3..-1
    expect(points[1].title).toContain("metal there too");
  });

  it("given points win; without metal or points the body centre is used", () => {
    const { volume } = hipGrid([]);
    const given = choosePoints(volume, { implant: [1, 2, 3], otherHip: [-1, 2, 3], fixedIsCt: true });
    expect(given.map((p) => p.mm)).toEqual([
      [1, 2, 3],
      [-1, 2, 3],
    ]);
    const none = choosePoints(volume, { metalMask: new Uint8Array(volume.count), fixedIsCt: true });
    expect(none.map((p) => p.key)).toEqual(["centre"]);
    expectAllClose(none[0].mm, [8, 0, 0], 1e-9, "body centre");
    expect(() => choosePoints(volume, { implant: [1, Number.NaN, 3], fixedIsCt: true })).toThrowError(
      /finite/,
    );
    expect(() => choosePoints(volume, { metalMask: new Uint8Array(5), fixedIsCt: true })).toThrowError(
      /metal mask/,
    );
  });

  it("otsuThreshold agrees with skimage.filters.threshold_otsu within one bin", () => {
    // Reference: skimage.filters.threshold_otsu(nbins=256), scripts/make-fixtures-report.py.
    const t = otsuThreshold(Float64Array.from(reference.otsu.data));
    expect(Math.abs(t - reference.otsu.threshold)).toBeLessThanOrEqual(reference.otsu.bin_width);
    expect(otsuThreshold([5, 5, 5])).toBe(5);
    expect(otsuThreshold([Number.NaN])).toBeNaN();
  });
});
