import { readFileSync } from "node:fs";
import { describe, expect, it } from "vitest";
import { fromRows } from "../../src/geometry/mat4.js";
import { Volume } from "../../src/image/volume.js";
import {
  displaySize,
  extractPlane,
  locateOnPlane,
  planeLayout,
  scaleSlice,
  sliceIndexAt,
  sliceThrough,
  toDisplayPx,
} from "../../src/report/slice.js";
import { expectAllClose } from "../helpers/close.js";

const reference = JSON.parse(
  readFileSync(new URL("../fixtures/report/reference.json", import.meta.url), "utf8"),
) as {
  resize_bilinear: {
    rows: number;
    cols: number;
    height: number;
    width: number;
    input: number[];
    output: number[];
  }[];
};

/** A float volume with one marker voxel (value 100) on the given grid. */
function markerVolume(dims: [number, number, number], affine: number[][], voxel: [number, number, number]) {
  const data = new Float32Array(dims[0] * dims[1] * dims[2]);
  data[voxel[0] + dims[0] * (voxel[1] + dims[1] * voxel[2])] = 100;
  const volume = new Volume(dims, data, fromRows(affine));
  const p = [0, 0, 0];
  volume.indexToWorldPoint(p, voxel[0], voxel[1], voxel[2]);
  return { volume, worldMm: p };
}

function argmax(values: ArrayLike<number>): number {
  let best = 0;
  for (let p = 1; p < values.length; p++) if (values[p] > values[best]) best = p;
  return best;
}

// RAS-stored grid, spacing 1 x 2 x 3 mm, 10 x 12 x 8 voxels.
const RAS = [
  [1, 0, 0, 10],
  [0, 2, 0, 20],
  [0, 0, 3, 30],
  [0, 0, 0, 1],
];
// LPS-stored grid (as many scanner exports).
const LPS = [
  [-1, 0, 0, 10],
  [0, -1, 0, 20],
  [0, 0, 2, 30],
  [0, 0, 0, 1],
];
// Permuted grid: i -> S (2 mm), j -> R (1 mm), k -> A (1.5 mm).
const PERMUTED = [
  [0, 1, 0, -5],
  [0, 0, 1.5, 4],
  [2, 0, 0, 7],
  [0, 0, 0, 1],
];

describe("planeLayout (radiological display)", () => {
  it("planeLayout(RAS grid) flips i and j for axial so patient right is on image left and anterior up", () => {
    const { volume } = markerVolume([10, 12, 8], RAS, [0, 0, 0]);
    const axial = planeLayout(volume, "axial");
    expect(axial).toMatchObject({ colAxis: 0, colFlip: true, rowAxis: 1, rowFlip: true, throughAxis: 2 });
    expect(axial).toMatchObject({ cols: 10, rows: 12, colSpacingMm: 1, rowSpacingMm: 2, sliceDistanceMm: 3 });
    expect(axial.letters).toEqual({ left: "R", right: "L", top: "A", bottom: "P" });
    const coronal = planeLayout(volume, "coronal");
    expect(coronal).toMatchObject({ colAxis: 0, colFlip: true, rowAxis: 2, rowFlip: true, throughAxis: 1 });
    expect(coronal.letters).toEqual({ left: "R", right: "L", top: "S", bottom: "I" });
    const sagittal = planeLayout(volume, "sagittal");
    expect(sagittal).toMatchObject({ colAxis: 1, colFlip: true, rowAxis: 2, rowFlip: true, throughAxis: 0 });
    expect(sagittal.letters).toEqual({ left: "A", right: "P", top: "S", bottom: "I" });
  });

  it("planeLayout(LPS grid) needs no flip in the axial plane", () => {
    const { volume } = markerVolume([6, 5, 4], LPS, [0, 0, 0]);
    expect(planeLayout(volume, "axial")).toMatchObject({
      colAxis: 0,
      colFlip: false,
      rowAxis: 1,
      rowFlip: false,
    });
  });

  it("planeLayout(permuted grid) picks the voxel axis that points along each world axis", () => {
    const { volume } = markerVolume([5, 6, 7], PERMUTED, [0, 0, 0]);
    const axial = planeLayout(volume, "axial");
    expect(axial).toMatchObject({ throughAxis: 0, colAxis: 1, colFlip: true, rowAxis: 2, rowFlip: true });
    expect(axial).toMatchObject({ cols: 6, rows: 7, colSpacingMm: 1, rowSpacingMm: 1.5, sliceDistanceMm: 2 });
  });
});

describe("sliceThrough", () => {
  it("a marker voxel at a known world point lands at the hand-computed slice pixel in all three planes (RAS grid)", () => {
    // Voxel (2, 3, 5) of a RAS grid: axial col = 9 - 2, row = 11 - 3; coronal col = 7, row = 7 - 5;
    // sagittal col = 11 - 3, row = 2.
    const { volume, worldMm } = markerVolume([10, 12, 8], RAS, [2, 3, 5]);
    expect(worldMm).toEqual([12, 26, 45]);
    const expected = { axial: [7, 8, 10, 5], coronal: [7, 2, 10, 3], sagittal: [8, 2, 12, 2] } as const;
    for (const plane of ["axial", "coronal", "sagittal"] as const) {
      const s = sliceThrough(volume, plane, worldMm);
      const [col, row, cols, index] = expected[plane];
      expect(s.sliceIndex, plane).toBe(index);
      expect(s.pointInside).toBe(true);
      expect(argmax(s.values), plane).toBe(row * cols + col);
      expect(s.values[row * cols + col]).toBe(100);
      const at = locateOnPlane(volume, s.layout, s.sliceIndex, worldMm);
      expect([at.col, at.row, at.distanceMm]).toEqual([col, row, 0]);
    }
  });

  it("a marker on an LPS grid appears at col = i, row = j in the axial plane", () => {
    const { volume, worldMm } = markerVolume([6, 5, 4], LPS, [4, 1, 2]);
    const s = sliceThrough(volume, "axial", worldMm);
    expect(s.sliceIndex).toBe(2);
    expect(argmax(s.values)).toBe(1 * 6 + 4);
  });

  it("a marker on a permuted grid appears where the radiological convention puts it", () => {
    // Voxel (i=3, j=1, k=2): axial through i = 3, col = 5 - j = 4 (j -> R flipped), row = 6 - k = 4.
    const { volume, worldMm } = markerVolume([5, 6, 7], PERMUTED, [3, 1, 2]);
    const s = sliceThrough(volume, "axial", worldMm);
    expect(s.sliceIndex).toBe(3);
    expect(argmax(s.values)).toBe(4 * 6 + 4);
  });

  it("patient right shows on the image left and anterior on the image top (axial, any storage order)", () => {
    for (const affine of [RAS, LPS, PERMUTED]) {
      const dims: [number, number, number] = [9, 9, 9];
      const data = new Float32Array(729);
      const volume = new Volume(dims, data, fromRows(affine));
      // Fill each voxel with its world x (right positive) and check the first column is the most right.
      const p = [0, 0, 0];
      for (let k = 0, q = 0; k < 9; k++)
        for (let j = 0; j < 9; j++)
          for (let i = 0; i < 9; i++, q++) data[q] = volume.indexToWorldPoint(p, i, j, k)[0];
      const s = sliceThrough(volume, "axial", volume.centerWorld());
      expect(s.values[0]).toBeGreaterThan(s.values[8]);
      for (let k = 0, q = 0; k < 9; k++)
        for (let j = 0; j < 9; j++)
          for (let i = 0; i < 9; i++, q++) data[q] = volume.indexToWorldPoint(p, i, j, k)[1];
      const t = sliceThrough(volume, "axial", volume.centerWorld());
      expect(t.values[0]).toBeGreaterThan(t.values[8 * 9]);
    }
  });

  it("sliceIndexAt clamps a point outside the grid and reports it; locateOnPlane gives the distance in mm", () => {
    const { volume } = markerVolume([10, 12, 8], RAS, [0, 0, 0]);
    const axial = planeLayout(volume, "axial");
    expect(sliceIndexAt(volume, axial, [12, 26, 30 + 3 * 20])).toEqual({ index: 7, inside: false });
    expect(sliceIndexAt(volume, axial, [12, 26, 30 - 3 * 0.4])).toEqual({ index: 0, inside: true });
    // 1.5 voxels above slice 5 at 3 mm per slice: 4.5 mm.
    expect(locateOnPlane(volume, axial, 5, [12, 26, 30 + 3 * 6.5]).distanceMm).toBeCloseTo(4.5, 12);
  });

  it("extractPlane works for masks and rejects an index outside the grid", () => {
    const mask = new Uint8Array(2 * 3 * 4);
    mask[1 + 2 * (2 + 3 * 3)] = 1; // voxel (1, 2, 3)
    const volume = new Volume([2, 3, 4], new Float32Array(24), fromRows(RAS));
    const layout = planeLayout(volume, "axial");
    const out = extractPlane(new Uint8Array(6), mask, volume.dims, layout, 3);
    // col = 1 - 1 = 0, row = 2 - 2 = 0
    expect(Array.from(out)).toEqual([1, 0, 0, 0, 0, 0]);
    expect(() => extractPlane(new Uint8Array(6), mask, volume.dims, layout, 4)).toThrowError(
      /outside the grid/,
    );
  });
});

describe("display scaling", () => {
  it("displaySize keeps the physical aspect ratio (10 x 1 mm by 12 x 2 mm -> 20 x 48 px at max 48)", () => {
    const { volume } = markerVolume([10, 12, 8], RAS, [0, 0, 0]);
    const size = displaySize(planeLayout(volume, "axial"), 48);
    expect(size).toEqual({ width: 20, height: 48, pxPerMmX: 2, pxPerMmY: 2 });
    const coronal = displaySize(planeLayout(volume, "coronal"), 300); // 10 mm x 24 mm
    expect([coronal.width, coronal.height]).toEqual([125, 300]);
  });

  it("the marker scaled to display (nearest) covers exactly the pixels under toDisplayPx", () => {
    const { volume, worldMm } = markerVolume([10, 12, 8], RAS, [2, 3, 5]);
    const s = sliceThrough(volume, "axial", worldMm);
    const { width, height } = displaySize(s.layout, 48);
    const img = scaleSlice(
      new Float32Array(width * height),
      s.values,
      s.layout.cols,
      s.layout.rows,
      width,
      height,
      "nearest",
    );
    const centre = toDisplayPx(
      locateOnPlane(volume, s.layout, s.sliceIndex, worldMm),
      s.layout,
      width,
      height,
    );
    expect(centre).toEqual({ x: 15, y: 34 }); // (7 + 0.5) * 20 / 10, (8 + 0.5) * 48 / 12
    const hits: [number, number][] = [];
    for (let y = 0; y < height; y++)
      for (let x = 0; x < width; x++) if (img[y * width + x] === 100) hits.push([x, y]);
    // 2 px per mm: a 1 mm x 2 mm voxel is 2 x 4 pixels around (15, 34).
    expect(hits).toEqual([
      [14, 32],
      [15, 32],
      [14, 33],
      [15, 33],
      [14, 34],
      [15, 34],
      [14, 35],
      [15, 35],
    ]);
  });

  it("scaleSlice(bilinear) matches skimage.transform.resize(order=1, mode='edge')", () => {
    // Reference: skimage.transform.resize, scripts/make-fixtures-report.py.
    for (const c of reference.resize_bilinear) {
      const out = scaleSlice(
        new Float32Array(c.width * c.height),
        Float32Array.from(c.input),
        c.cols,
        c.rows,
        c.width,
        c.height,
        "bilinear",
      );
      expectAllClose(out, c.output, 1e-3, `resize ${c.rows}x${c.cols}->${c.height}x${c.width}`);
    }
  });

  it("scaleSlice rejects buffers of the wrong size", () => {
    expect(() => scaleSlice(new Float32Array(3), new Float32Array(4), 2, 2, 2, 2, "nearest")).toThrowError(
      /2x2/,
    );
  });
});
