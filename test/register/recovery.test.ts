/**
 * Recovery of known transforms: phantoms with exactly known truth (src/phantom), several seeds,
 * with and without artifacts, plus the hard cases (an MR covering only the implanted hip, and
 * poses up to 15 degrees per axis). Accuracy targets of the registration core: full field of
 * view mean landmark TRE <= 0.5 mm and max <= 1.0 mm; hard cases mean <= 1.0 mm. The truth is
 * outside the registration code: landmarks-mr = truth · landmarks-ct by construction.
 */
import { describe, expect, it } from "vitest";
import { evaluateLandmarks } from "../../src/geometry/landmark-evaluation.js";
import { pairLandmarks } from "../../src/geometry/landmarks.js";
import { generatePhantom, type PhantomOptions } from "../../src/phantom/phantom.js";
import { registerImages } from "../../src/register/driver.js";

async function recover(options: PhantomOptions) {
  const p = await generatePhantom({ ...options, threads: 1 });
  const r = registerImages(p.ct, p.mr, { inverseConsistency: false });
  const asList = (l: typeof p.landmarksCt) =>
    l.map((x) => ({ label: x.label, pointMm: [...x.point] as [number, number, number], line: 0 }));
  const pairs = pairLandmarks(asList(p.landmarksCt), asList(p.landmarksMr), "landmarks-ct", "landmarks-mr");
  const start = evaluateLandmarks(r.startMatrix, pairs).treMm;
  return { tre: evaluateLandmarks(r.matrix, pairs).treMm, start, r };
}

describe("registerImages recovers the phantom's truth", () => {
  for (const [label, options] of [
    ["seed 3, right implant, full artifacts", { seed: 3, severity: 1 }],
    ["seed 4, right implant, no artifacts", { seed: 4, severity: 0 }],
    ["seed 5, left implant, full artifacts", { seed: 5, implant: "left", severity: 1 }],
  ] as const) {
    it(`${label}: mean TRE <= 0.5 mm, max <= 1.0 mm`, async () => {
      const { tre, start } = await recover(options);
      expect(start.mean).toBeGreaterThan(3); // the start really is off
      expect(tre.mean).toBeLessThanOrEqual(0.5);
      expect(tre.max).toBeLessThanOrEqual(1.0);
    });
  }

  it("hard case: MR covering only the implanted hip (centroids ~100 mm apart): mean TRE <= 1.0 mm", async () => {
    const { tre, start, r } = await recover({ seed: 31, mrFov: "implant" });
    expect(start.mean).toBeGreaterThan(50);
    expect(r.search?.movedMm).toBeGreaterThan(30); // the coarse search had to move it
    expect(tre.mean).toBeLessThanOrEqual(1.0);
  });

  it("hard case: poses up to 15 degrees per axis: mean TRE <= 1.0 mm", async () => {
    const { tre, r } = await recover({ seed: 41, poseDeg: 15 });
    expect(tre.mean).toBeLessThanOrEqual(1.0);
    expect(r.levels.every((l) => l.converged)).toBe(true);
  });

  it("cropping the CT to its content changes nothing: the same transform as on the whole CT", async () => {
    // Closed form: the crop starts on a multiple of every level's block factor, so each level of
    // the crop is a part of the same level of the whole CT (same voxel centres and values inside
    // the masks), and samples and ranges are drawn from the masks only.
    const p = await generatePhantom({ seed: 3, severity: 1, threads: 1 });
    const cropped = registerImages(p.ct, p.mr, { inverseConsistency: false });
    const whole = registerImages(p.ct, p.mr, { inverseConsistency: false, cropToContent: false });
    expect(cropped.levels[0].samples).toBe(whole.levels[0].samples);
    // Equal up to the rounding of world coordinates through the crop's own affine (~1e-12 mm).
    for (let q = 0; q < 16; q++) expect(Math.abs(cropped.matrix[q] - whole.matrix[q])).toBeLessThan(1e-9);
    expect(cropped.levels.map((l) => l.evaluations)).toEqual(whole.levels.map((l) => l.evaluations));
    // ... and the crop really was smaller than the CT.
    expect(cropped.fixedPyramid.levels[2].volume.count).toBeLessThan(
      whole.fixedPyramid.levels[2].volume.count,
    );
  });
});
