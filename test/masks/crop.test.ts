/**
 * Cropping keeps world geometry exactly (closed form: crop index i maps to the input index
 * i + box.min, so indexToWorld_crop = indexToWorld · Trans(box.min)).
 */
import { describe, expect, it } from "vitest";
import { isShared } from "../../src/common/shared-arrays.js";
import { compose } from "../../src/geometry/mat4.js";
import { rigidMatrix } from "../../src/geometry/rotation.js";
import { Volume } from "../../src/image/volume.js";
import { contentBox, cropVolume } from "../../src/masks/crop.js";

function grid(): Volume {
  const dims: [number, number, number] = [40, 30, 20];
  const scale = new Float64Array([0.8, 0, 0, 0, 0, 0.8, 0, 0, 0, 0, 1.5, 0, 0, 0, 0, 1]);
  const affine = compose(rigidMatrix([0, 0, 0], [5, -3, 12], [-10, 20, 30]), scale);
  const data = new Int16Array(dims[0] * dims[1] * dims[2]).fill(-1000);
  // Content: a box of soft tissue at i 10..24, j 6..19, k 4..13 (inclusive).
  for (let k = 4; k <= 13; k++)
    for (let j = 6; j <= 19; j++) for (let i = 10; i <= 24; i++) data[i + 40 * (j + 30 * k)] = 40;
  return new Volume(dims, data, affine);
}

describe("contentBox", () => {
  it("finds the content (on a stride of 1) and adds the margin in voxels per axis", () => {
    const v = grid();
    // margin 2 mm: ceil(2 / 0.8) + 1 = 4 voxels in i and j, ceil(2 / 1.5) + 1 = 3 in k.
    const box = contentBox(v, -500, 2, 1)!;
    expect(box.min).toEqual([10 - 4, 6 - 4, 4 - 3]);
    expect(box.max).toEqual([25 + 4, 20 + 4, 14 + 3]);
  });
  it("is clamped to the grid and undefined without content", () => {
    const v = grid();
    const box = contentBox(v, -500, 100, 2)!;
    expect(box.min).toEqual([0, 0, 0]);
    expect(box.max).toEqual([40, 30, 20]);
    expect(contentBox(v, 100, 5)).toBeUndefined();
  });
});

describe("cropVolume", () => {
  it("keeps every voxel's value and world position", () => {
    const v = grid();
    const box = { min: [7, 3, 2] as [number, number, number], max: [31, 27, 17] as [number, number, number] };
    const c = cropVolume(v, box, true);
    expect(c.dims).toEqual([24, 24, 15]);
    expect(isShared(c.data)).toBe(true);
    expect(c.data).toBeInstanceOf(Int16Array);
    const a = [0, 0, 0];
    const b = [0, 0, 0];
    for (const [i, j, k] of [
      [0, 0, 0],
      [23, 23, 14],
      [5, 9, 3],
      [17, 2, 11],
    ]) {
      expect(c.data[i + 24 * (j + 24 * k)]).toBe(v.data[i + 7 + 40 * (j + 3 + 30 * (k + 2))]);
      c.indexToWorldPoint(a, i, j, k);
      v.indexToWorldPoint(b, i + 7, j + 3, k + 2);
      for (let q = 0; q < 3; q++) expect(a[q]).toBeCloseTo(b[q], 9);
    }
  });
});
