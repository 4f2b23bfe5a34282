import { readFileSync } from "node:fs";
import { describe, expect, it } from "vitest";
import { compose, identity, inverse, type Mat4, translation } from "../../src/geometry/mat4.js";
import { rigidMatrix } from "../../src/geometry/rotation.js";
import { Volume } from "../../src/image/volume.js";
import {
  bsplinePrefilter,
  insideGrid,
  mirrorIndex,
  sampleCubic,
  sampleLinear,
  sampleNearest,
} from "../../src/resample/kernels.js";
import {
  createResamplePool,
  resampleOnto,
  resampleOntoSync,
  targetToMovingIndex,
} from "../../src/resample/resample.js";
import { expectAllClose } from "../helpers/close.js";

// Reference values: scipy.ndimage.map_coordinates / spline_filter (version in the fixture),
// written by scripts/make-fixtures-resample.py.
const fixture = JSON.parse(
  readFileSync(new URL("../fixtures/resample/map-coordinates.json", import.meta.url), "utf8"),
) as {
  source: string;
  dims: [number, number, number];
  data: number[];
  linear: { points: number[][]; values: number[] };
  cubic: { points: number[][]; values: number[] };
  coefficients: { values: number[] };
};

function obliqueAffine(): Mat4 {
  // 1.1 x 0.9 x 2.5 mm voxels, rotated, offset: a non-trivial index -> world map.
  const r = rigidMatrix([0, 0, 0], [10, -20, 30], [12.5, -40, 7]);
  return compose(r, new Float64Array([1.1, 0, 0, 0, 0, 0.9, 0, 0, 0, 0, 2.5, 0, 0, 0, 0, 1]));
}

function randomVolume(dims: [number, number, number], seed: number): Volume<Float32Array> {
  const n = dims[0] * dims[1] * dims[2];
  const data = new Float32Array(n);
  let s = seed;
  for (let q = 0; q < n; q++) {
    s = (Math.imul(s, 1664525) + 1013904223) >>> 0;
    data[q] = (s / 4294967296) * 1000 - 200;
  }
  return new Volume(dims, data, obliqueAffine());
}

describe("interpolation kernels", () => {
  it(`sampleLinear matches scipy map_coordinates order 1, mode nearest (${fixture.source})`, () => {
    const data = Float64Array.from(fixture.data);
    const got = fixture.linear.points.map(([x, y, z]) => sampleLinear(data, fixture.dims, x, y, z));
    expectAllClose(got, fixture.linear.values, 1e-9, "linear");
  });

  it("bsplinePrefilter matches scipy spline_filter order 3, mode mirror", () => {
    const data = Float64Array.from(fixture.data);
    const coeffs = bsplinePrefilter(new Float64Array(data.length), data, fixture.dims);
    expectAllClose(coeffs, fixture.coefficients.values, 1e-9, "coefficient");
  });

  it("sampleCubic matches scipy map_coordinates order 3, mode mirror, prefilter", () => {
    const data = Float64Array.from(fixture.data);
    const coeffs = bsplinePrefilter(new Float64Array(data.length), data, fixture.dims);
    const got = fixture.cubic.points.map(([x, y, z]) => sampleCubic(coeffs, fixture.dims, x, y, z));
    expectAllClose(got, fixture.cubic.values, 1e-8, "cubic");
  });

  it("bsplinePrefilter in place (out === data) gives the same coefficients", () => {
    const data = Float64Array.from(fixture.data);
    bsplinePrefilter(data, data, fixture.dims);
    expectAllClose(data, fixture.coefficients.values, 1e-9, "coefficient");
  });

  it("kernels return NaN (no data) outside the image box, never 0", () => {
    const data = new Float32Array(24).fill(5);
    const dims = [4, 3, 2] as const;
    const coeffs = bsplinePrefilter(new Float32Array(24), data, dims);
    for (const p of [
      [-0.51, 1, 0],
      [3.51, 1, 0],
      [1, -0.6, 0],
      [1, 2.6, 0],
      [1, 1, 1.7],
      [Number.NaN, 1, 1],
    ]) {
      expect(sampleLinear(data, dims, p[0], p[1], p[2])).toBeNaN();
      expect(sampleNearest(data, dims, p[0], p[1], p[2])).toBeNaN();
      expect(sampleCubic(coeffs, dims, p[0], p[1], p[2])).toBeNaN();
      expect(insideGrid(dims, p[0], p[1], p[2])).toBe(false);
    }
    // The half-voxel rim is inside; a constant image stays constant there.
    expect(sampleLinear(data, dims, -0.5, 2.5, 1.5)).toBe(5);
    expect(sampleNearest(data, dims, 3.5, -0.5, -0.5)).toBe(5);
    expect(sampleCubic(coeffs, dims, -0.4, 2.4, 1.4)).toBeCloseTo(5, 5);
  });

  it("mirrorIndex folds with period 2n-2 (whole-sample symmetric)", () => {
    expect([-3, -2, -1, 0, 1, 2, 3, 4, 5, 6, 7].map((k) => mirrorIndex(k, 4))).toEqual([
      3, 2, 1, 0, 1, 2, 3, 2, 1, 0, 1,
    ]);
    expect(mirrorIndex(-5, 1)).toBe(0);
  });

  it("sampleNearest picks the voxel whose cell contains the point (labels stay labels)", () => {
    const data = Uint8Array.from([0, 1, 2, 3, 4, 5]);
    const dims = [3, 2, 1] as const;
    expect(sampleNearest(data, dims, 1.49, 0.2, 0)).toBe(1);
    expect(sampleNearest(data, dims, 1.51, 0.51, 0.3)).toBe(5);
  });
});

describe("resampleOnto", () => {
  it("identity transform onto the image's own grid returns the input exactly (linear, nearest, cubic)", async () => {
    const vol = randomVolume([9, 8, 7], 7);
    for (const interp of ["linear", "nearest", "cubic"] as const) {
      const { volume, insideFraction } = resampleOntoSync(vol, vol, identity(), { interp });
      expect(insideFraction).toBe(1);
      expect(volume.data).toBeInstanceOf(Float32Array);
      if (interp === "cubic") expectAllClose(volume.data, vol.data, 1e-3, "cubic identity");
      else expect(Array.from(volume.data)).toEqual(Array.from(vol.data));
    }
  });

  it("a pure integer-voxel shift moves the data by whole voxels and fills outside with `fill`", () => {
    const vol = randomVolume([9, 8, 7], 11);
    // Fixed world point x maps to moving world x + A·(2,-1,1) voxels: output(i,j,k) = input(i+2, j-1, k+1).
    const a = vol.indexToWorld;
    const shiftWorld = [
      a[0] * 2 + a[1] * -1 + a[2] * 1,
      a[4] * 2 + a[5] * -1 + a[6] * 1,
      a[8] * 2 + a[9] * -1 + a[10] * 1,
    ];
    const t = translation(shiftWorld[0], shiftWorld[1], shiftWorld[2]);
    for (const interp of ["linear", "nearest", "cubic"] as const) {
      const { volume, insideFraction } = resampleOntoSync(vol, vol, t, { interp, fill: -999 });
      const [nx, ny, nz] = vol.dims;
      let inside = 0;
      for (let k = 0; k < nz; k++)
        for (let j = 0; j < ny; j++)
          for (let i = 0; i < nx; i++) {
            const got = volume.data[i + nx * (j + ny * k)];
            const si = i + 2;
            const sj = j - 1;
            const sk = k + 1;
            if (si < nx && sj >= 0 && sk < nz) {
              inside++;
              const want = vol.data[si + nx * (sj + ny * sk)];
              if (interp === "cubic") expect(Math.abs(got - want)).toBeLessThan(1e-3);
              else expect(got).toBe(want);
            } else {
              expect(got).toBe(-999);
            }
          }
      expect(insideFraction).toBeCloseTo(inside / vol.count, 12);
    }
  });

  it("targetToMovingIndex snaps near-integer entries so identity is exact", () => {
    const vol = randomVolume([4, 4, 4], 3);
    const m = targetToMovingIndex(vol, vol, identity());
    expect(Array.from(m)).toEqual([1, 0, 0, 0, 0, 1, 0, 0, 0, 0, 1, 0]);
  });

  it("resampling onto another grid agrees with sampleLinear at every mapped voxel centre", () => {
    const moving = randomVolume([10, 9, 8], 5);
    const targetAffine = compose(
      moving.indexToWorld,
      translation(-1, 0.5, -1),
      rigidMatrix([0, 0, 0], [5, 0, -8], [0, 0, 0]),
    );
    const grid = { dims: [12, 7, 9] as const, indexToWorld: targetAffine };
    const t = rigidMatrix([1, 2, 3], [3, -4, 6], [1.5, -0.5, 2]);
    const { volume } = resampleOntoSync(moving, grid, t, { fill: Number.NaN });
    const toMoving = compose(moving.worldToIndex, t, targetAffine);
    const p = [0, 0, 0];
    let checked = 0;
    for (let k = 0; k < 9; k++)
      for (let j = 0; j < 7; j++)
        for (let i = 0; i < 12; i++) {
          p[0] = toMoving[0] * i + toMoving[1] * j + toMoving[2] * k + toMoving[3];
          p[1] = toMoving[4] * i + toMoving[5] * j + toMoving[6] * k + toMoving[7];
          p[2] = toMoving[8] * i + toMoving[9] * j + toMoving[10] * k + toMoving[11];
          const want = sampleLinear(moving.data, moving.dims, p[0], p[1], p[2]);
          const got = volume.data[i + 12 * (j + 7 * k)];
          if (Number.isNaN(want)) expect(got).toBeNaN();
          else {
            checked++;
            expect(Math.abs(got - want)).toBeLessThan(1e-3);
          }
        }
    expect(checked).toBeGreaterThan(50);
  });

  it("datatype: nearest keeps the input type, linear gives float32, forced int16 rounds and clamps", () => {
    const data = Int16Array.from([0, 100, 200, 300, 30000, -30000, 7, 8]);
    const vol = new Volume([2, 2, 2], data, identity());
    expect(resampleOntoSync(vol, vol, identity(), { interp: "nearest" }).volume.data).toBeInstanceOf(
      Int16Array,
    );
    expect(resampleOntoSync(vol, vol, identity()).volume.data).toBeInstanceOf(Float32Array);
    // Half a voxel along i: 0.5*(0+100) = 50; 0.5*(30000 + -30000) = 0; 7.5 rounds to 8; index 1.5 is
    // still inside the box (edge voxel repeated).
    const half = resampleOntoSync(vol, vol, translation(0.5, 0, 0), { datatype: "int16", fill: 99999 });
    expect(half.volume.data).toBeInstanceOf(Int16Array);
    expect(Array.from(half.volume.data)).toEqual([50, 100, 250, 300, 0, -30000, 8, 8]);
    // One voxel along i: the second column is outside; fill 99999 clamps to the int16 maximum.
    const whole = resampleOntoSync(vol, vol, translation(1, 0, 0), { datatype: "int16", fill: 99999 });
    expect(Array.from(whole.volume.data)).toEqual([100, 32767, 300, 32767, -30000, 32767, 8, 32767]);
  });

  it("out === moving data (aliasing) gives the same result as a separate output", () => {
    const vol = randomVolume([6, 5, 4], 9);
    const t = rigidMatrix([2, 2, 2], [4, 2, -3], [0.7, -0.3, 0.2]);
    const separate = resampleOntoSync(vol, vol, t).volume.data;
    const aliased = vol.data.slice();
    const vol2 = new Volume(vol.dims, aliased, vol.indexToWorld);
    const res = resampleOntoSync(vol2, vol2, t, { out: aliased });
    expect(res.volume.data).toBe(aliased);
    expect(Array.from(aliased)).toEqual(Array.from(separate));
  });

  it("rejects a non-finite transform (BAD_TRANSFORM) and a wrong out size (BAD_ARGUMENT)", () => {
    const vol = randomVolume([3, 3, 3], 1);
    const bad = identity();
    bad[3] = Number.NaN;
    expect(() => resampleOntoSync(vol, vol, bad)).toThrow(expect.objectContaining({ code: "BAD_TRANSFORM" }));
    expect(() => resampleOntoSync(vol, vol, identity(), { out: new Float32Array(5) })).toThrow(
      expect.objectContaining({ code: "BAD_ARGUMENT" }),
    );
  });

  it("worker threads give the same voxels as the calling thread (linear, nearest, cubic)", async () => {
    const moving = randomVolume([40, 36, 30], 21);
    const grid = {
      dims: [50, 44, 33] as const,
      indexToWorld: compose(translation(-5, 3, 1), moving.indexToWorld),
    };
    const t = inverse(rigidMatrix([10, 10, 10], [2, -3, 4], [1, 2, -1]));
    for (const interp of ["linear", "nearest", "cubic"] as const) {
      const single = resampleOntoSync(moving, grid, t, { interp });
      const events: number[] = [];
      const threaded = await resampleOnto(moving, grid, t, {
        interp,
        threads: 2,
        minParallelVoxels: 1,
        onProgress: (e) => events.push(e.fraction ?? -1),
      });
      expect(threaded.insideFraction).toBe(single.insideFraction);
      if (interp === "cubic") expectAllClose(threaded.volume.data, single.volume.data, 1e-3, "cubic");
      else expect(Array.from(threaded.volume.data)).toEqual(Array.from(single.volume.data));
      expect(events.at(-1)).toBe(1);
    }
  });

  it("a caller's pool is reused across calls and left open", async () => {
    const moving = randomVolume([30, 30, 20], 4);
    const t = rigidMatrix([5, 5, 5], [1, 2, 3], [0.5, 0, -0.5]);
    const single = resampleOntoSync(moving, moving, t).volume.data;
    const pool = createResamplePool(2);
    try {
      for (let r = 0; r < 2; r++) {
        const res = await resampleOnto(moving, moving, t, { pool, minParallelVoxels: 1 });
        expect(Array.from(res.volume.data)).toEqual(Array.from(single));
      }
      expect(
        await pool.run({
          kind: "prefilter",
          coeffs: { buffer: new SharedArrayBuffer(8), length: 1 },
          dims: [1, 1, 1],
          axes: [0],
        }),
      ).toBe(0);
    } finally {
      await pool.close();
    }
  });
});
