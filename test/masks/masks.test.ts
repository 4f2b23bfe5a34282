import { readFileSync, writeFileSync } from "node:fs";
import { join } from "node:path";
import { describe, expect, it } from "vitest";
import { compose } from "../../src/geometry/mat4.js";
import { rigidMatrix } from "../../src/geometry/rotation.js";
import { encodeNifti } from "../../src/image/nifti-write.js";
import { Volume } from "../../src/image/volume.js";
import { axialAxis, bodyMaskCt, bodyMaskMr } from "../../src/masks/body.js";
import { labelComponents, largestComponent, removeSmallComponents } from "../../src/masks/components.js";
import { prepareLevelMasks } from "../../src/masks/level-masks.js";
import { expandMetalMask, metalMask } from "../../src/masks/metal.js";
import {
  countNonzero,
  dilateMm,
  erodeMm,
  fillHoles,
  fillHolesSlices,
  squaredDistanceMm,
} from "../../src/masks/morphology.js";
import { mrSignalVoid } from "../../src/masks/mr-void.js";
import { otsuThreshold } from "../../src/masks/otsu.js";
import { binaryMaskVolume, maskOntoGrid, readUserMask } from "../../src/masks/user-mask.js";
import { buildPyramid } from "../../src/pyramid/pyramid.js";
import { expectAllClose } from "../helpers/close.js";
import { tempDir } from "../helpers/tmp.js";

// Reference values: scipy.ndimage and scikit-image (versions in the fixture), written by
// scripts/make-fixtures-masks.py.
const fx = JSON.parse(
  readFileSync(new URL("../fixtures/masks/morphology.json", import.meta.url), "utf8"),
) as {
  source: string;
  dims: [number, number, number];
  spacing_mm: [number, number, number];
  mask: number[];
  edt_mm: number[];
  dilate: { radius_mm: number; values: number[] }[];
  erode: { radius_mm: number; values: number[] }[];
  sparse: number[];
  label6: { count: number; labels: number[]; sizes: number[] };
  label26: { count: number; labels: number[]; sizes: number[] };
  holes: number[];
  filled: number[];
  otsu: { values: number[]; threshold: number };
};
const mask = Uint8Array.from(fx.mask);

/** Same partition into components (labels may be numbered in another scan order). */
function samePartition(a: ArrayLike<number>, b: ArrayLike<number>): string {
  const ab = new Map<number, number>();
  const ba = new Map<number, number>();
  for (let q = 0; q < a.length; q++) {
    if ((a[q] === 0) !== (b[q] === 0)) return `voxel ${q}: ${a[q]} vs ${b[q]}`;
    if (a[q] === 0) continue;
    if ((ab.get(a[q]) ?? b[q]) !== b[q] || (ba.get(b[q]) ?? a[q]) !== a[q])
      return `voxel ${q}: ${a[q]} vs ${b[q]}`;
    ab.set(a[q], b[q]);
    ba.set(b[q], a[q]);
  }
  return "same";
}

function firstMismatch(a: ArrayLike<number>, b: ArrayLike<number>): string {
  for (let q = 0; q < a.length; q++) if (a[q] !== b[q]) return `voxel ${q}: got ${a[q]}, expected ${b[q]}`;
  return "none";
}

describe(`morphology against scipy.ndimage (${fx.source})`, () => {
  it("squaredDistanceMm matches distance_transform_edt with anisotropic sampling", () => {
    const d = Array.from(squaredDistanceMm(mask, fx.dims, fx.spacing_mm), Math.sqrt);
    expectAllClose(d, fx.edt_mm, 1e-9, "distance");
  });

  for (const c of fx.dilate) {
    it(`dilateMm(${c.radius_mm} mm) matches binary_dilation with the ball footprint`, () => {
      const got = dilateMm(mask, fx.dims, fx.spacing_mm, c.radius_mm);
      expect(firstMismatch(got, c.values)).toBe("none");
    });
  }

  for (const c of fx.erode) {
    it(`erodeMm(${c.radius_mm} mm) matches binary_erosion(border_value=0) with the ball footprint`, () => {
      const got = erodeMm(mask, fx.dims, fx.spacing_mm, c.radius_mm);
      expect(countNonzero(got)).toBeGreaterThan(0);
      expect(firstMismatch(got, c.values)).toBe("none");
    });
  }

  it("labelComponents matches ndimage.label for 6- and 26-connectivity (count, partition, sizes)", () => {
    // scipy scans its C order (k fastest here), coxa i fastest: labels are a permutation.
    const sorted = (s: number[]) => [...s].sort((x, y) => x - y);
    const sparse = Uint8Array.from(fx.sparse);
    const six = labelComponents(sparse, fx.dims, 6);
    expect(six.count).toBe(fx.label6.count);
    expect(sorted(six.sizes)).toEqual(sorted(fx.label6.sizes));
    expect(samePartition(six.labels, fx.label6.labels)).toBe("same");
    const all = labelComponents(sparse, fx.dims, 26);
    expect(all.count).toBe(fx.label26.count);
    expect(all.count).toBeLessThan(six.count);
    expect(sorted(all.sizes)).toEqual(sorted(fx.label26.sizes));
    expect(samePartition(all.labels, fx.label26.labels)).toBe("same");
  });

  it("removeSmallComponents keeps exactly the 26-components of at least the given size", () => {
    const sparse = Uint8Array.from(fx.sparse);
    const kept = removeSmallComponents(sparse, fx.dims, 26, 3);
    expect([...kept].sort((x, y) => x - y)).toEqual(
      fx.label26.sizes.filter((s) => s >= 3).sort((x, y) => x - y),
    );
    for (let q = 0; q < sparse.length; q++) {
      const l = fx.label26.labels[q];
      expect(sparse[q]).toBe(l > 0 && fx.label26.sizes[l - 1] >= 3 ? 1 : 0);
    }
  });

  it("fillHoles matches binary_fill_holes", () => {
    const got = fillHoles(Uint8Array.from(fx.holes), fx.dims);
    expect(firstMismatch(got, fx.filled)).toBe("none");
    expect(countNonzero(got)).toBeGreaterThan(countNonzero(Uint8Array.from(fx.holes)));
  });

  it("otsuThreshold matches skimage threshold_otsu(nbins=256)", () => {
    const t = otsuThreshold(Float64Array.from(fx.otsu.values));
    expect(t).toBeCloseTo(fx.otsu.threshold, 9);
  });
});

describe("morphology edge cases", () => {
  it("empty masks stay empty; radius 0 is the identity; negative radius is refused", () => {
    const empty = new Uint8Array(27);
    expect(countNonzero(dilateMm(empty, [3, 3, 3], [1, 1, 1], 2))).toBe(0);
    expect(countNonzero(erodeMm(empty, [3, 3, 3], [1, 1, 1], 2))).toBe(0);
    expect(Array.from(dilateMm(mask, fx.dims, fx.spacing_mm, 0))).toEqual(Array.from(mask));
    expect(() => dilateMm(mask, fx.dims, fx.spacing_mm, -1)).toThrow(
      expect.objectContaining({ code: "BAD_ARGUMENT" }),
    );
    expect(largestComponent(empty, [3, 3, 3]).every((v) => v === 0)).toBe(true);
  });

  it("a single voxel dilated by r covers the voxel centres of the mm ball (anisotropic: 1 x 1 x 3 mm, r = 3)", () => {
    const dims = [9, 9, 5] as const;
    const one = new Uint8Array(9 * 9 * 5);
    one[4 + 9 * (4 + 9 * 2)] = 1;
    const got = dilateMm(one, dims, [1, 1, 3], 3);
    // Closed form: in-plane disc of radius 3 (29 centres) in slice 2, one voxel above and below.
    expect(countNonzero(got)).toBe(29 + 2);
  });

  it("fillHolesSlices closes cavities open only through the slice direction", () => {
    // A tube along k: hollow in every slice, open at both ends (3-D fill leaves it).
    const dims = [5, 5, 4] as const;
    const tube = new Uint8Array(100);
    for (let k = 0; k < 4; k++)
      for (let j = 1; j < 4; j++)
        for (let i = 1; i < 4; i++) if (i !== 2 || j !== 2) tube[i + 5 * (j + 5 * k)] = 1;
    expect(countNonzero(fillHoles(tube, dims))).toBe(countNonzero(tube));
    expect(countNonzero(fillHolesSlices(tube, dims, 2))).toBe(countNonzero(tube) + 4);
  });
});

function ctPhantom(): Volume<Int16Array> {
  // 60 x 50 x 30 at 1 x 1 x 2 mm: air (-1000), an elliptic body of soft tissue (40 HU) with an
  // enclosed gas pocket (-900), a 6 x 6 x 20 mm metal rod (3000 HU), one noise voxel at 2600 HU.
  const dims = [60, 50, 30] as const;
  const data = new Int16Array(60 * 50 * 30).fill(-1000);
  for (let k = 0; k < 30; k++)
    for (let j = 0; j < 50; j++)
      for (let i = 0; i < 60; i++) {
        const q = i + 60 * (j + 50 * k);
        if (((i - 30) / 24) ** 2 + ((j - 25) / 18) ** 2 <= 1) data[q] = 40;
        if (Math.hypot(i - 40, j - 25) < 3 && k > 10 && k < 16) data[q] = -900;
        if (i >= 17 && i < 23 && j >= 22 && j < 28 && k >= 5 && k < 15) data[q] = 3000;
      }
  data[50 + 60 * (25 + 50 * 25)] = 2600;
  const affine = compose(
    rigidMatrix([0, 0, 0], [0, 0, 90], [10, 20, 30]),
    new Float64Array([1, 0, 0, 0, 0, 1, 0, 0, 0, 0, 2, 0, 0, 0, 0, 1]),
  );
  return new Volume(dims, data, affine);
}

describe("metal, body and MR void masks", () => {
  it("metalMask: threshold, 26-connected components, small specks dropped, exact mm-ball margin", () => {
    const ct = ctPhantom();
    const m = metalMask(ct, { metalHu: 2500, marginMm: 5, minComponentMm3: 4 });
    expect(m.metalVoxels).toBe(6 * 6 * 10);
    expect(m.componentSizes).toEqual([360]);
    expect(m.metalVolumeMm3).toBeCloseTo(720, 9);
    // Reference: the same dilation by the distance transform (checked against scipy above).
    const core = new Uint8Array(ct.count);
    for (let q = 0; q < core.length; q++) core[q] = ct.data[q] >= 2500 ? 1 : 0;
    core[50 + 60 * (25 + 50 * 25)] = 0;
    const want = dilateMm(core, ct.dims, ct.spacingMm, 5);
    expect(firstMismatch(expandMetalMask(m, ct.dims), want)).toBe("none");
    expect(m.maskVoxels).toBe(countNonzero(want));
    // Without the component filter, the noise voxel is kept as its own component.
    expect(metalMask(ct, { minComponentMm3: 0 }).componentSizes).toEqual([360, 1]);
    // The pyramid's base pass finds the same high voxels; metalMask then skips its own search.
    const pyr = buildPyramid(ct, { trackAbove: 2500 });
    expect(pyr.highValues?.count).toBe(361);
    expect(pyr.highValues?.bounds).toEqual({ min: [17, 22, 5], max: [51, 28, 26] });
    const viaPyramid = metalMask(ct, {
      metalHu: 2500,
      marginMm: 5,
      minComponentMm3: 4,
      search: pyr.highValues,
    });
    expect(firstMismatch(expandMetalMask(viaPyramid, ct.dims), want)).toBe("none");
  });

  it("metalMask of an image without metal is empty", () => {
    const ct = ctPhantom();
    const m = metalMask(ct, { metalHu: 5000 });
    expect(m.metalVoxels).toBe(0);
    expect(m.box).toBeUndefined();
    expect(countNonzero(expandMetalMask(m, ct.dims))).toBe(0);
  });

  it("bodyMaskCt is the solid body: gas pocket filled, air outside excluded", () => {
    const ct = ctPhantom();
    const body = bodyMaskCt(ct);
    let ellipse = 0;
    for (let j = 0; j < 50; j++)
      for (let i = 0; i < 60; i++) if (((i - 30) / 24) ** 2 + ((j - 25) / 18) ** 2 <= 1) ellipse++;
    expect(countNonzero(body)).toBe(ellipse * 30);
    expect(axialAxis(ct.indexToWorld)).toBe(2);
  });

  it("bodyMaskMr by Otsu, and mrSignalVoid finds a thick dark region inside the body but not a thin dark shell", () => {
    const dims = [50, 50, 20] as const;
    const data = new Float32Array(50 * 50 * 20);
    for (let k = 0; k < 20; k++)
      for (let j = 0; j < 50; j++)
        for (let i = 0; i < 50; i++) {
          const q = i + 50 * (j + 50 * k);
          const r = Math.hypot(i - 25, j - 25);
          let v = r < 20 ? 800 : 10;
          const rb = Math.hypot(i - 32, j - 27);
          if (rb >= 4 && rb < 5) v = 30; // thin dark ring ("cortex" around bright "marrow"), 1 voxel thick
          if (Math.hypot(i - 18, j - 22) < 5 && k >= 5 && k < 15) v = 20; // thick void
          data[q] = v;
        }
    const mr = new Volume(
      dims,
      data,
      compose(new Float64Array([1.5, 0, 0, 0, 0, 1.5, 0, 0, 0, 0, 3, 0, 0, 0, 0, 1])),
    );
    const { mask: body, threshold } = bodyMaskMr(mr);
    expect(threshold).toBeGreaterThan(30);
    expect(threshold).toBeLessThan(800);
    let disc = 0;
    for (let j = 0; j < 50; j++) for (let i = 0; i < 50; i++) if (Math.hypot(i - 25, j - 25) < 20) disc++;
    expect(countNonzero(body)).toBe(disc * 20);
    const v = mrSignalVoid(mr, { openingMm: 2, minVolumeMm3: 100 });
    expect(v.componentSizes.length).toBe(1);
    // All void voxels lie inside the thick dark cylinder, and most of it is found.
    let inside = 0;
    let cylinder = 0;
    for (let q = 0; q < data.length; q++) {
      const i = q % 50;
      const j = Math.floor(q / 50) % 50;
      const k = Math.floor(q / 2500);
      const inCyl = Math.hypot(i - 18, j - 22) < 5 && k >= 5 && k < 15;
      if (inCyl) cylinder++;
      if (v.mask[q]) {
        expect(inCyl).toBe(true);
        inside++;
      }
    }
    expect(inside / cylinder).toBeGreaterThan(0.6);
    // With a hint far from it, nothing is kept.
    const hint = new Uint8Array(data.length);
    hint[45 + 50 * (45 + 50 * 10)] = 1;
    expect(mrSignalVoid(mr, { openingMm: 2, minVolumeMm3: 100, near: hint, nearMm: 5 }).voxels).toBe(0);
  });
});

describe("user masks and level masks", () => {
  const dir = tempDir();

  it("an empty user mask is BAD_MASK naming the file", () => {
    const path = join(dir, "empty-mask.nii");
    writeFileSync(
      path,
      encodeNifti(new Volume([4, 4, 4], new Uint8Array(64), ctPhantom().indexToWorld), { datatype: "uint8" }),
    );
    expect(() => readUserMask(path)).toThrow(expect.objectContaining({ code: "BAD_MASK", file: path }));
    expect(() => readUserMask(path)).toThrow(/empty-mask\.nii: mask is empty/);
  });

  it("any nonzero voxel is inside; a mask that misses the grid is BAD_MASK", () => {
    const ct = ctPhantom();
    const raw = new Float32Array(ct.count);
    raw[100] = -3;
    raw[200] = 0.5;
    raw[300] = Number.NaN;
    const m = binaryMaskVolume(ct.withData(raw), "m.nii");
    expect(countNonzero(m.data)).toBe(2);
    const far = {
      dims: [3, 3, 3] as const,
      indexToWorld: compose(new Float64Array([1, 0, 0, 1e4, 0, 1, 0, 0, 0, 0, 1, 0, 0, 0, 0, 1])),
    };
    expect(() => maskOntoGrid(m, far, "m.nii")).toThrow(expect.objectContaining({ code: "BAD_MASK" }));
  });

  it("prepareLevelMasks: CT detected, metal excluded on every level conservatively, body kept, user mask applied", () => {
    const ct = ctPhantom();
    const pyr = buildPyramid(ct, { levelsMm: [8, 4, 2] });
    const masks = prepareLevelMasks(ct, pyr, { minMetalComponentMm3: 4 });
    expect(masks.modality).toBe("ct");
    expect(masks.metalApplied).toBe(true);
    expect(masks.metal?.metalVoxels).toBe(360);
    for (let l = 0; l < pyr.levels.length; l++) {
      const lv = pyr.levels[l].volume;
      const lm = masks.levels[l];
      expect(lm.include.length).toBe(lv.count);
      // Every level voxel whose centre is within the margin of the rod is excluded.
      const p = [0, 0, 0];
      const idx = [0, 0, 0];
      for (let q = 0; q < lv.count; q++) {
        const i = q % lv.dims[0];
        const j = Math.floor(q / lv.dims[0]) % lv.dims[1];
        const k = Math.floor(q / (lv.dims[0] * lv.dims[1]));
        lv.indexToWorldPoint(p, i, j, k);
        ct.worldToIndexPoint(idx, p[0], p[1], p[2]);
        const inRod =
          idx[0] >= 17 && idx[0] <= 22 && idx[1] >= 22 && idx[1] <= 27 && idx[2] >= 5 && idx[2] <= 14;
        if (inRod) expect(lm.include[q]).toBe(0);
      }
      expect(lm.includeVoxels).toBeGreaterThan(0);
      expect(lm.includeVoxels).toBeLessThan(countNonzero(lm.body!));
    }
    const off = prepareLevelMasks(ct, pyr, { metalMask: false });
    expect(off.metalApplied).toBe(false);
    expect(off.levels[2].includeVoxels).toBe(countNonzero(off.levels[2].body!));
    // A user mask keeping only the left half of the grid (i < 30).
    const user = new Uint8Array(ct.count);
    for (let q = 0; q < user.length; q++) user[q] = q % 60 < 30 ? 1 : 0;
    const withUser = prepareLevelMasks(ct, pyr, { metalMask: false, userMask: ct.withData(user) });
    expect(withUser.levels[2].includeVoxels).toBeLessThan(off.levels[2].includeVoxels * 0.6);
    expect(withUser.levels[2].includeVoxels).toBeGreaterThan(off.levels[2].includeVoxels * 0.4);
    // An MR-like image (no negative values) gets no HU metal mask even with values above 2500.
    const mrLike = ct.withData(Float32Array.from(ct.data, (v) => v + 1000));
    const mrMasks = prepareLevelMasks(mrLike, buildPyramid(mrLike));
    expect(mrMasks.modality).toBe("mr");
    expect(mrMasks.metal).toBeUndefined();
  });
});
