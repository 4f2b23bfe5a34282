import { describe, expect, test } from "vitest";
import { identity, transformPoint } from "../../src/geometry/mat4.js";
import { rigidMatrix } from "../../src/geometry/rotation.js";
import { Volume } from "../../src/image/volume.js";
import {
  burnImplant,
  IMPLANT_LABELS,
  placeImplant,
  rasterizeImplantMetal,
  stemShoulder,
  stemTip,
  transformImplant,
} from "../../src/phantom/implant.js";
import { METALS } from "../../src/phantom/tissues.js";

describe("placeImplant", () => {
  test("default cup axis follows the radiographic inclination and anteversion (Murray 1993)", () => {
    const m = placeImplant({
      side: "right",
      headCenterMm: [80, 0, 0],
      inclinationDeg: 40,
      anteversionDeg: 20,
    });
    const [x, y, z] = m.cupAxis;
    // Anteversion: angle between the axis and the coronal plane; inclination: angle of its coronal projection to the long axis.
    expect((Math.asin(y) * 180) / Math.PI).toBeCloseTo(20, 10);
    expect((Math.atan2(x, -z) * 180) / Math.PI).toBeCloseTo(40, 10);
    const left = placeImplant({ side: "left", headCenterMm: [-80, 0, 0] });
    expect(left.cupAxis[0]).toBeLessThan(0);
    expect(left.headRadiusMm).toBe(16);
    expect(left.cupOuterRadiusMm).toBe(26);
  });

  test("refuses a head that does not fit the cup and a non-finite centre", () => {
    expect(() =>
      placeImplant({ side: "right", headCenterMm: [0, 0, 0], headDiameterMm: 44, cupDiameterMm: 48 }),
    ).toThrow(expect.objectContaining({ code: "BAD_ARGUMENT" }));
    expect(() => placeImplant({ side: "right", headCenterMm: [0, Number.NaN, 0] })).toThrow(
      expect.objectContaining({ code: "BAD_ARGUMENT" }),
    );
  });
});

describe("implant geometry", () => {
  const model = placeImplant({ side: "right", headCenterMm: [10, 20, 30] });

  test("rasterised metal volumes match the analytic head sphere (within 3%) and cup shell", () => {
    const mask = rasterizeImplantMetal(model, 0.5);
    const voxelMm3 = 0.125;
    let cocr = 0;
    let headMetal = 0;
    let titaniumNearHead = 0;
    const p = [0, 0, 0];
    const [nx, ny, nz] = mask.dims;
    for (let k = 0; k < nz; k++)
      for (let j = 0; j < ny; j++)
        for (let i = 0; i < nx; i++) {
          const v = mask.data[i + nx * (j + ny * k)];
          if (v === 0) continue;
          mask.indexToWorldPoint(p, i, j, k);
          const r = Math.hypot(p[0] - 10, p[1] - 20, p[2] - 30);
          if (v === METALS.cocr.code) cocr++;
          if (r <= 16) headMetal++;
          if (v === METALS.titanium.code && r > 21.5) titaniumNearHead++;
        }
    // Closed forms: head (4/3) pi 16^3 (the titanium neck taper fills its bore, so count all metal
    // inside it); cup shell (2/3) pi (26^3 - 22^3) (plus a little neck/stem beyond r 21.5).
    const head = (4 / 3) * Math.PI * 16 ** 3;
    const shell = (2 / 3) * Math.PI * (26 ** 3 - 22 ** 3);
    expect(Math.abs(headMetal * voxelMm3 - head) / head).toBeLessThan(0.03);
    expect(cocr * voxelMm3).toBeGreaterThan(0.85 * head);
    expect(titaniumNearHead * voxelMm3).toBeGreaterThan(0.97 * shell);
  });

  test("transformImplant by a rigid matrix moves the centre, shoulder and tip like points", () => {
    const t = rigidMatrix([0, 0, 0], [5, -3, 10], [12, -4, 7]);
    const moved = transformImplant(model, t);
    for (const [before, after] of [
      [model.headCenterMm, moved.headCenterMm],
      [stemShoulder(model), stemShoulder(moved)],
      [stemTip(model), stemTip(moved)],
    ]) {
      const q = transformPoint([0, 0, 0], t, before[0], before[1], before[2]);
      for (let a = 0; a < 3; a++) expect(after[a]).toBeCloseTo(q[a], 9);
    }
    expect(moved.headRadiusMm).toBeCloseTo(16, 12);
  });

  test("burnImplant writes 3071 HU into the metal, marks materials and keeps the rest", () => {
    const m = identity();
    m[0] = m[5] = m[10] = 2;
    m[3] = -50;
    m[7] = -30;
    m[11] = -150;
    const ct = new Volume([60, 60, 100], new Int16Array(360000).fill(40), m);
    const res = burnImplant(ct, model);
    let metal = 0;
    let liner = 0;
    for (let i = 0; i < ct.count; i++) {
      if (res.metalMask[i]) {
        metal++;
        expect(res.ct.data[i]).toBe(3071);
      } else if (res.labels[i] === IMPLANT_LABELS.liner) {
        liner++;
        expect(res.ct.data[i]).toBe(-90);
      } else if (res.labels[i] === 0 && res.ct.data[i] !== 40) {
        // partial-volume edge voxels only: within one voxel of the implant
        expect(res.ct.data[i]).not.toBe(40);
      }
    }
    expect(metal).toBeGreaterThan(1000);
    expect(liner).toBeGreaterThan(100);
    expect(res.ct.data[0]).toBe(40);
    expect(ct.data[0]).toBe(40);
  });
});
