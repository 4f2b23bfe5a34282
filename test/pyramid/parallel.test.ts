/**
 * Pyramid passes shared with the helper thread give exactly the single-thread pyramid: each
 * output slice (or sheet) is computed by the same code from the same inputs, whichever thread
 * takes it (closed form: the work is only redistributed).
 */
import { afterAll, describe, expect, it } from "vitest";
import { Rng } from "../../src/common/random.js";
import { isShared, toShared } from "../../src/common/shared-arrays.js";
import { Volume } from "../../src/image/volume.js";
import { MetricSplitter } from "../../src/metrics/split.js";
import { buildPyramid } from "../../src/pyramid/pyramid.js";

const splitter = new MetricSplitter();
afterAll(() => splitter.close());

function ct(): Volume {
  const dims: [number, number, number] = [90, 70, 44];
  const rng = new Rng(5);
  const data = new Int16Array(dims[0] * dims[1] * dims[2]);
  for (let q = 0; q < data.length; q++) data[q] = Math.round(-1000 + 1100 * rng.uniform());
  // A few "metal" voxels, one in the incomplete far-edge block (i = 89).
  for (const q of [1234, 55_555, 89 + 90 * (3 + 70 * 7)]) data[q] = 3000;
  const affine = new Float64Array([0.8, 0, 0, -40, 0, 0.8, 0, 20, 0, 0, 1.5, 7, 0, 0, 0, 1]);
  return new Volume(dims, data, affine);
}

describe("buildPyramid with a helper thread", () => {
  it("equals the single-thread pyramid voxel for voxel, metal search included", () => {
    const v = ct();
    const single = buildPyramid(v, { levelsMm: [8, 4, 2], trackAbove: 2500 });
    const shared = v.withData(toShared(v.data, "int16"));
    const both = buildPyramid(shared, { levelsMm: [8, 4, 2], trackAbove: 2500, sharer: splitter });
    expect(both.levels.length).toBe(3);
    for (let l = 0; l < 3; l++) {
      expect(isShared(both.levels[l].volume.data)).toBe(true);
      expect(both.levels[l].volume.dims).toEqual(single.levels[l].volume.dims);
      expect(Array.from(both.levels[l].volume.indexToWorld)).toEqual(
        Array.from(single.levels[l].volume.indexToWorld),
      );
      const a = single.levels[l].volume.data;
      const b = both.levels[l].volume.data;
      let differ = 0;
      for (let q = 0; q < a.length; q++) if (a[q] !== b[q]) differ++;
      expect(differ).toBe(0);
    }
    expect(both.highValues).toEqual(single.highValues);
    expect(single.highValues?.count).toBe(3);
    expect(single.highValues?.bounds?.max[0]).toBe(90);
  });
});
