/** Mask moments, field-of-view restriction and the box-corner maximum (closed forms). */
import { describe, expect, it } from "vitest";
import { compose, identity, inverse, scaling, translation } from "../../src/geometry/mat4.js";
import { rigidMatrix } from "../../src/geometry/rotation.js";
import { Volume } from "../../src/image/volume.js";
import { initialTransform } from "../../src/register/initialise.js";
import {
  boxCorners,
  maskInsideOther,
  maskMoments,
  maxDisplacementMm,
  positionSums,
  radiusFromSums,
} from "../../src/register/regions.js";
import { expectAllClose } from "../helpers/close.js";

/** An asymmetric blob (an L-shaped bar plus a knob) on a grid. */
function blob(vol: Volume, place: (x: number, y: number, z: number) => [number, number, number]): Uint8Array {
  const mask = new Uint8Array(vol.count);
  const p = [0, 0, 0];
  const [nx, ny, nz] = vol.dims;
  for (let k = 0, q = 0; k < nz; k++)
    for (let j = 0; j < ny; j++)
      for (let i = 0; i < nx; i++, q++) {
        vol.indexToWorldPoint(p, i, j, k);
        const [x, y, z] = place(p[0], p[1], p[2]);
        const bar = Math.abs(x) < 30 && Math.abs(y) < 8 && Math.abs(z) < 12;
        const leg = x > 10 && x < 30 && y > -8 && y < 25 && Math.abs(z) < 6;
        const knob = (x + 20) ** 2 + (y - 10) ** 2 + (z - 10) ** 2 < 49;
        mask[q] = bar || leg || knob ? 1 : 0;
      }
  return mask;
}

describe("register/regions", () => {
  const vol = new Volume(
    [50, 50, 40],
    new Float32Array(50 * 50 * 40),
    compose(translation(-50, -50, -40), scaling(2, 2, 2)),
  );

  it("maskMoments: centroid and volume of a box (closed form)", () => {
    const mask = new Uint8Array(vol.count);
    const [nx, ny] = vol.dims;
    for (let k = 10; k < 20; k++)
      for (let j = 5; j < 9; j++) for (let i = 0; i < 6; i++) mask[i + nx * (j + ny * k)] = 1;
    const m = maskMoments(mask, vol);
    expect(m.count).toBe(240);
    expect(m.volumeMm3).toBeCloseTo(240 * 8, 9);
    // i 0..5 -> x -50..-40 (mean -45); j 5..8 -> y -40..-34 (mean -37); k 10..19 -> z -20..-2 (mean -11)
    expectAllClose(m.centroidMm, [-45, -37, -11], 1e-9);
    // Variance of an evenly spaced set of n points at step 2 mm: 4 (n^2 - 1) / 12.
    expect(m.covariance[0]).toBeCloseTo((4 * (36 - 1)) / 12, 9);
    expect(m.covariance[8]).toBeCloseTo((4 * (100 - 1)) / 12, 9);
  });

  it("moments initialisation recovers a known rotation and shift of an asymmetric blob", () => {
    const truth = rigidMatrix([0, 0, 0], [8, -5, 12], [6, -4, 3]);
    // fixed blob at the origin; the moving blob is the same body moved by the truth: y = T x, so
    // a moving voxel at y shows the blob point T^-1 y.
    const fixedMask = blob(vol, (x, y, z) => [x, y, z]);
    const invM = inverse(truth);
    const movingMask = blob(vol, (x, y, z) => [
      invM[0] * x + invM[1] * y + invM[2] * z + invM[3],
      invM[4] * x + invM[5] * y + invM[6] * z + invM[7],
      invM[8] * x + invM[9] * y + invM[10] * z + invM[11],
    ]);
    const init = initialTransform("moments", {
      fixedBody: maskMoments(fixedMask, vol),
      movingBody: maskMoments(movingMask, vol),
      model: "rigid",
    });
    // Voxelisation limits the agreement: within 1.5 mm over the blob's extent.
    const corners = boxCorners({ min: [-30, -8, -12], max: [30, 25, 12] });
    expect(maxDisplacementMm(init.matrix, truth, corners)).toBeLessThan(1.5);
    const centroid = initialTransform("centroid", {
      fixedBody: maskMoments(fixedMask, vol),
      movingBody: maskMoments(movingMask, vol),
      model: "rigid",
    });
    // The centroid start has no rotation: it cannot match the 15-degree turn at the ends.
    expect(maxDisplacementMm(centroid.matrix, truth, corners)).toBeGreaterThan(5);
  });

  it("maskInsideOther keeps the voxels that map inside the other box (plus margin)", () => {
    const other = new Volume([10, 10, 10], new Float32Array(1000), scaling(1, 1, 1)); // x, y, z in -0.5..9.5
    const all = new Uint8Array(vol.count).fill(1);
    const out = new Uint8Array(vol.count);
    const n = maskInsideOther(out, all, vol, other, identity(), 0);
    // vol voxel centres at -50 + 2i: those in [-0.5, 9.5] are 0,2,4,6,8 -> 5 per axis.
    expect(n).toBe(125);
    const n2 = maskInsideOther(out, all, vol, other, identity(), 2);
    // margin 2 mm: [-2.5, 11.5] -> -2,0,...,10 -> 7 per axis
    expect(n2).toBe(343);
  });

  it("maskInsideOther's position sums give the RMS radius of the kept box (closed form)", () => {
    const other = new Volume([10, 10, 10], new Float32Array(1000), scaling(1, 1, 1));
    const all = new Uint8Array(vol.count).fill(1);
    const out = new Uint8Array(vol.count);
    const sums = positionSums();
    // Rotated about z by 30 degrees and shifted: rows cross the box obliquely.
    const turn = rigidMatrix([0, 0, 0], [3, -2, 1], [0, 0, Math.PI / 6]);
    const n = maskInsideOther(out, all, vol, other, turn, 1, sums);
    expect(n).toBeGreaterThan(0);
    expect(sums[0]).toBe(n);
    // Same radius as the full moments of the output mask.
    expect(radiusFromSums(sums)).toBeCloseTo(maskMoments(out, vol).radiusMm, 9);
    // Brute force: each voxel centre mapped and tested against the grown box.
    const p = [0, 0, 0];
    let brute = 0;
    let wrong = 0;
    const [nx, ny, nz] = vol.dims;
    for (let k = 0, q = 0; k < nz; k++)
      for (let j = 0; j < ny; j++)
        for (let i = 0; i < nx; i++, q++) {
          vol.indexToWorldPoint(p, i, j, k);
          const x = turn[0] * p[0] + turn[1] * p[1] + turn[2] * p[2] + turn[3];
          const y = turn[4] * p[0] + turn[5] * p[1] + turn[6] * p[2] + turn[7];
          const z = turn[8] * p[0] + turn[9] * p[1] + turn[10] * p[2] + turn[11];
          const inside = [x, y, z].every((c) => c >= -1.5 && c <= 10.5);
          if (out[q] !== (inside ? 1 : 0)) wrong++;
          brute += inside ? 1 : 0;
        }
    expect(wrong).toBe(0);
    expect(n).toBe(brute);
    // A full n x n x n grid of spacing h has RMS radius h * sqrt(3 (n^2 - 1) / 12) (closed form).
    const cube = new Volume([5, 5, 5], new Float32Array(125), scaling(2, 2, 2));
    const s2 = positionSums();
    maskInsideOther(new Uint8Array(125), new Uint8Array(125).fill(1), cube, cube, identity(), 0, s2);
    expect(radiusFromSums(s2)).toBeCloseTo(2 * Math.sqrt((3 * 24) / 12), 12);
  });

  it("maxDisplacementMm over box corners equals the maximum over the whole box (convexity)", () => {
    const a = rigidMatrix([0, 0, 0], [1, 2, 3], [0.5, 0, -0.2]);
    const b = identity();
    const box = { min: [-20, -10, -5], max: [20, 10, 5] };
    const atCorners = maxDisplacementMm(a, b, boxCorners(box));
    let dense = 0;
    for (let x = -20; x <= 20; x += 2)
      for (let y = -10; y <= 10; y += 2)
        for (let z = -5; z <= 5; z += 1) dense = Math.max(dense, maxDisplacementMm(a, b, [[x, y, z]]));
    expect(atCorners).toBeGreaterThanOrEqual(dense - 1e-12);
    expect(atCorners).toBeCloseTo(dense, 9);
  });
});
