/**
 * The images a stress severity registers, on a small invented test object (a water cylinder with
 * a metal rod; not anatomy, not a patient). External checks: closed-form geometry of the test
 * object (the rod's axis is the metal centroid; voxel counts of the rod), the physics contract
 * of the issue (severity 0 = inputs unchanged; CT streaks only in slices that hold metal, metal
 * voxels untouched; MR signal void where the CT metal maps through the reference), and
 * reproducibility by seed.
 */
import { describe, expect, it } from "vitest";
import type { CoxaError } from "../../src/common/errors.js";
import { fromRows, identity, inverse, type Mat4, transformPoint } from "../../src/geometry/mat4.js";
import { rigidMatrix } from "../../src/geometry/rotation.js";
import { Volume } from "../../src/image/volume.js";
import {
  cropCodes,
  FOUND_METAL_CODE,
  findCtMetal,
  makeSeverityImages,
  prepareStressBase,
  sideOfPoint,
  sliceAxisOf,
} from "../../src/stress/images.js";

const ROD = { x: 20, y: 0, radius: 4.5, k0: 5, k1: 14 };

/** CT: 64 x 64 x 20 voxels of 2 x 2 x 3 mm centred on the origin; water cylinder r = 50 mm, metal rod. */
function makeCt(withRod = true): Volume<Int16Array> {
  const dims: [number, number, number] = [64, 64, 20];
  const affine = fromRows([
    [2, 0, 0, -63],
    [0, 2, 0, -63],
    [0, 0, 3, -28.5],
    [0, 0, 0, 1],
  ]);
  const data = new Int16Array(dims[0] * dims[1] * dims[2]);
  const v = new Volume(dims, data, affine);
  const p = [0, 0, 0];
  let idx = 0;
  for (let k = 0; k < dims[2]; k++) {
    for (let j = 0; j < dims[1]; j++) {
      for (let i = 0; i < dims[0]; i++, idx++) {
        v.indexToWorldPoint(p, i, j, k);
        const r = Math.hypot(p[0], p[1]);
        let hu = r <= 50 ? 0 : -1000;
        if (r > 40 && r <= 50) hu = 40;
        if (hu > -1000 && ((i * 7 + j * 13 + k * 5) % 11) - 5 > 3) hu -= 80; // some fat-like texture
        if (withRod && k >= ROD.k0 && k <= ROD.k1 && Math.hypot(p[0] - ROD.x, p[1] - ROD.y) <= ROD.radius)
          hu = 3071;
        data[idx] = hu;
      }
    }
  }
  return v;
}

/** MR: 48 x 48 x 12 voxels of 2.5 x 2.5 x 5 mm, tissue 800 inside the (moved) cylinder. */
function makeMr(reference: Mat4): Volume<Float32Array> {
  const dims: [number, number, number] = [48, 48, 12];
  const affine = fromRows([
    [2.5, 0, 0, -58.75],
    [0, 2.5, 0, -58.75],
    [0, 0, 5, -27.5],
    [0, 0, 0, 1],
  ]);
  const data = new Float32Array(dims[0] * dims[1] * dims[2]);
  const v = new Volume(dims, data, affine);
  const back = inverse(reference);
  const p = [0, 0, 0];
  const q = [0, 0, 0];
  let idx = 0;
  for (let k = 0; k < dims[2]; k++) {
    for (let j = 0; j < dims[1]; j++) {
      for (let i = 0; i < dims[0]; i++, idx++) {
        v.indexToWorldPoint(p, i, j, k);
        transformPoint(q, back, p[0], p[1], p[2]);
        data[idx] = Math.hypot(q[0], q[1]) <= 50 ? 800 : 0;
      }
    }
  }
  return v;
}

const reference = rigidMatrix([0, 0, 0], [0, 0, 4], [3, -2, 1]);

describe("findCtMetal", () => {
  it("finds the rod: centroid on its axis, mid-height, and the voxel count of its disc times its slices", () => {
    const ct = makeCt();
    const found = findCtMetal(ct, 2500);
    // Voxel centres lie on odd mm in x and y; within 4.5 mm of (20, 0) are x - 20 and y in
    // {-3, -1, 1, 3} (3² + 3² = 18 <= 20.25): 16 per slice, symmetric about the axis.
    expect(found.voxels).toBe(16 * (ROD.k1 - ROD.k0 + 1));
    const c = found.centroidMm!;
    expect(c[0]).toBeCloseTo(20, 9);
    expect(c[1]).toBeCloseTo(0, 9);
    expect(c[2]).toBeCloseTo(-28.5 + 3 * ((ROD.k0 + ROD.k1) / 2), 9);
  });
});

describe("prepareStressBase", () => {
  it("refuses a CT without metal unless a virtual implant is asked for", () => {
    const ct = makeCt(false);
    const mr = makeMr(reference);
    expect(() => prepareStressBase(ct, mr, reference)).toThrowError(/holds no metal \(no voxel >= 2500 HU\)/);
    try {
      prepareStressBase(ct, mr, reference);
    } catch (err) {
      expect((err as CoxaError).code).toBe("BAD_INPUT");
    }
    const withImplant = prepareStressBase(ct, mr, reference, { virtualImplant: { pointMm: [25, 0, 0] } });
    expect(withImplant.implant?.side).toBe("right");
    expect(withImplant.implantCenterMm).toEqual([25, 0, 0]);
    // the head centre lies in the cobalt-chrome head: burned at >= 2500 HU, coded 2
    const idx = [0, 0, 0];
    ct.worldToIndexPoint(idx, 25, 0, 0);
    const flat = Math.round(idx[0]) + 64 * (Math.round(idx[1]) + 64 * Math.round(idx[2]));
    expect(withImplant.fixed.data[flat]).toBeGreaterThanOrEqual(2500);
    expect(ct.data[flat]).toBeLessThan(2500);
    expect(withImplant.virtualCodes![flat]).toBe(2);
  });

  it("refuses a virtual implant point outside the CT field of view", () => {
    const ct = makeCt();
    expect(() =>
      prepareStressBase(ct, makeMr(reference), reference, { virtualImplant: { pointMm: [0, 0, 400] } }),
    ).toThrowError(/lies outside the CT field of view/);
  });

  it("centres the error region on the found metal", () => {
    const ct = makeCt();
    const base = prepareStressBase(ct, makeMr(reference), reference);
    expect(base.implantCenterMm).toEqual(findCtMetal(ct, 2500).centroidMm);
    expect(base.virtualCodes).toBeNull();
    expect(base.metalCodes.reduce((n, c) => n + (c === FOUND_METAL_CODE ? 1 : 0), 0)).toBe(
      base.foundMetalVoxels,
    );
  });
});

describe("sideOfPoint", () => {
  it("is right at +x of the body centroid and left at -x (RAS+)", () => {
    const ct = makeCt(false);
    expect(sideOfPoint(ct, [30, 0, 0])).toBe("right");
    expect(sideOfPoint(ct, [-30, 0, 0])).toBe("left");
  });
});

describe("cropCodes", () => {
  it("keeps every code at its world position and drops nothing", () => {
    const ct = makeCt();
    const codes = findCtMetal(ct, 2500).mask;
    const crop = cropCodes(codes, ct)!;
    expect(crop.dims[0]).toBeLessThan(ct.dims[0]);
    let inCrop = 0;
    const w = [0, 0, 0];
    const back = [0, 0, 0];
    let idx = 0;
    for (let k = 0; k < crop.dims[2]; k++) {
      for (let j = 0; j < crop.dims[1]; j++) {
        for (let i = 0; i < crop.dims[0]; i++, idx++) {
          if (!crop.data[idx]) continue;
          inCrop++;
          crop.indexToWorldPoint(w, i, j, k);
          ct.worldToIndexPoint(back, w[0], w[1], w[2]);
          const flat = Math.round(back[0]) + 64 * (Math.round(back[1]) + 64 * Math.round(back[2]));
          expect(codes[flat]).toBe(1);
        }
      }
    }
    expect(inCrop).toBe(codes.reduce((n, c) => n + c, 0));
    expect(cropCodes(new Uint8Array(ct.count), ct)).toBeNull();
  });
});

describe("makeSeverityImages", () => {
  const ct = makeCt();
  const mr = makeMr(reference);
  const base = prepareStressBase(ct, mr, reference);

  it("at severity 0 returns the inputs unchanged", async () => {
    const img = await makeSeverityImages(base, 0, { seed: 1, threads: 1 });
    expect(Array.from(img.fixed.data)).toEqual(Array.from(ct.data));
    expect(Array.from(img.moving.data)).toEqual(Array.from(mr.data));
    expect(img.stats.ctSlicesWithMetal).toBe(0);
  });

  it("at severity 1 streaks only the metal slices, keeps metal, and voids the MR where the metal maps", async () => {
    const img = await makeSeverityImages(base, 1, { seed: 1, threads: 1 });
    const plane = 64 * 64;
    let changedOutside = 0;
    let largest = 0;
    for (let i = 0; i < ct.count; i++) {
      const k = Math.floor(i / plane);
      const d = Math.abs(img.fixed.data[i] - ct.data[i]);
      if (ct.data[i] >= 2500) expect(img.fixed.data[i]).toBe(ct.data[i]);
      if (k < ROD.k0 || k > ROD.k1) {
        if (d !== 0) changedOutside++;
      } else largest = Math.max(largest, d);
    }
    expect(changedOutside).toBe(0);
    expect(largest).toBeGreaterThan(100);
    expect(img.stats.ctSlicesWithMetal).toBe(ROD.k1 - ROD.k0 + 1);
    // MR voxel nearest the rod axis mapped into MR world
    const y = [0, 0, 0];
    transformPoint(y, reference, ROD.x, ROD.y, 0);
    const idx = [0, 0, 0];
    mr.worldToIndexPoint(idx, y[0], y[1], y[2]);
    const flat = Math.round(idx[0]) + 48 * (Math.round(idx[1]) + 48 * Math.round(idx[2]));
    expect(mr.data[flat]).toBe(800);
    expect(img.moving.data[flat]).toBeLessThan(0.05 * 800);
    expect(img.stats.mrMaxDisplacementMm).toBeGreaterThan(0);
  });

  it("is reproduced by the seed, and differs for another seed", async () => {
    const a = await makeSeverityImages(base, 0.5, { seed: 3, threads: 1 });
    const b = await makeSeverityImages(base, 0.5, { seed: 3, threads: 1 });
    const c = await makeSeverityImages(base, 0.5, { seed: 4, threads: 1 });
    expect(Buffer.from(a.fixed.data.buffer).equals(Buffer.from(b.fixed.data.buffer))).toBe(true);
    expect(Buffer.from(a.moving.data.buffer).equals(Buffer.from(b.moving.data.buffer))).toBe(true);
    expect(Buffer.from(a.fixed.data.buffer).equals(Buffer.from(c.fixed.data.buffer))).toBe(false);
  });

  it("refuses a severity outside 0..1", async () => {
    await expect(makeSeverityImages(base, 1.5, { seed: 1, threads: 1 })).rejects.toThrowError(
      /severity 1.5 is outside 0..1/,
    );
  });
});

describe("sliceAxisOf", () => {
  it("picks the thick axis among the two that are not the readout", () => {
    const mr = makeMr(identity());
    expect(sliceAxisOf(mr, 0)).toBe(2);
    expect(sliceAxisOf(mr, 1)).toBe(2);
    const tilted = new Volume(
      [4, 4, 4],
      new Float32Array(64),
      fromRows([
        [1, 0, 0, 0],
        [0, 6, 0, 0],
        [0, 0, 1, 0],
        [0, 0, 0, 1],
      ]),
    );
    expect(sliceAxisOf(tilted, 0)).toBe(1);
    expect(sliceAxisOf(tilted, 2)).toBe(1);
  });
});
