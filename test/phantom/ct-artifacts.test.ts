import { describe, expect, test } from "vitest";
import { Rng } from "../../src/common/random.js";
import { identity } from "../../src/geometry/mat4.js";
import { Volume } from "../../src/image/volume.js";
import { addCtMetalArtifacts, sliceMetalArtifact } from "../../src/phantom/ct-artifacts.js";

/**
 * Synthetic CT (demo data): 64 x 64 x 6 voxels of 2 mm, a water cylinder (0 HU, radius 50 mm) with
 * a metal rod (radius 5 mm, 3071 HU) at x = -20 mm in slices 2 and 3 only.
 */
function makeCt(): { ct: Volume<Int16Array>; mask: Uint8Array } {
  const [nx, ny, nz] = [64, 64, 6];
  const m = identity();
  m[0] = m[5] = m[10] = 2;
  m[3] = m[7] = -63;
  const data = new Int16Array(nx * ny * nz).fill(-1000);
  const mask = new Uint8Array(nx * ny * nz);
  for (let k = 0; k < nz; k++)
    for (let j = 0; j < ny; j++)
      for (let i = 0; i < nx; i++) {
        const x = -63 + 2 * i;
        const y = -63 + 2 * j;
        const idx = i + nx * (j + ny * k);
        if (x * x + y * y <= 50 * 50) data[idx] = 0;
        if ((k === 2 || k === 3) && (x + 20) ** 2 + y * y <= 25) {
          data[idx] = 3071;
          mask[idx] = 1;
        }
      }
  return { ct: new Volume([nx, ny, nz], data, m), mask };
}

/** Standard deviation of HU in a disc of radius 6 mm around (x, y) in slice k. */
function discSd(vol: Volume, k: number, x: number, y: number): number {
  let n = 0;
  let s = 0;
  let s2 = 0;
  for (let j = 0; j < 64; j++)
    for (let i = 0; i < 64; i++) {
      const px = -63 + 2 * i;
      const py = -63 + 2 * j;
      if ((px - x) ** 2 + (py - y) ** 2 > 36) continue;
      const v = vol.data[i + 64 * (j + 64 * k)];
      n++;
      s += v;
      s2 += v * v;
    }
  return Math.sqrt(s2 / n - (s / n) ** 2);
}

describe("addCtMetalArtifacts", () => {
  const { ct, mask } = makeCt();
  const run = (severity: number, seed = 1, threads = 1) =>
    addCtMetalArtifacts(ct, new Rng(seed), { severity, metalMask: mask, metalMuPerMm: 0.5, threads });

  test("severity 0 returns the input values; slices without metal and metal voxels are never changed", async () => {
    const zero = await run(0);
    expect(Array.from(zero.volume.data)).toEqual(Array.from(ct.data));
    const full = await run(1);
    expect(full.slicesWithMetal).toEqual([2, 3]);
    for (let i = 0; i < ct.count; i++) {
      const k = Math.floor(i / 4096);
      if (k !== 2 && k !== 3) expect(full.volume.data[i]).toBe(ct.data[i]);
      if (mask[i]) expect(full.volume.data[i]).toBe(3071);
    }
  });

  test("streaks: HU spread next to the metal is at least twice that far from it (common practice, no source)", async () => {
    const res = await run(1);
    const near = discSd(res.volume, 2, -20, 14);
    const far = discSd(res.volume, 2, 30, -30);
    expect(near).toBeGreaterThan(2 * far);
    expect(res.maxAbsArtifactHu).toBeGreaterThan(200);
  });

  test("artifact strength grows with severity (mean |change| at 0.25 < 0.5 < 1)", async () => {
    const meanChange = async (s: number) => {
      const res = await run(s);
      let sum = 0;
      for (let i = 2 * 4096; i < 4 * 4096; i++) sum += Math.abs(res.volume.data[i] - ct.data[i]);
      return sum;
    };
    const a = await meanChange(0.25);
    const b = await meanChange(0.5);
    const c = await meanChange(1);
    expect(a).toBeGreaterThan(0);
    expect(b).toBeGreaterThan(a);
    expect(c).toBeGreaterThan(b);
  });

  test("the same seed reproduces the result exactly; another seed changes it", async () => {
    const a = await run(1, 5);
    const b = await run(1, 5);
    const c = await run(1, 6);
    expect(Buffer.from(a.volume.data.buffer).equals(Buffer.from(b.volume.data.buffer))).toBe(true);
    expect(Buffer.from(a.volume.data.buffer).equals(Buffer.from(c.volume.data.buffer))).toBe(false);
  });

  test("without a mask, voxels at or above metalHu (2500 by default) are the metal", async () => {
    const withMask = await run(1, 9);
    const byThreshold = await addCtMetalArtifacts(ct, new Rng(9), {
      severity: 1,
      metalMuPerMm: 0.5,
      threads: 1,
    });
    expect(byThreshold.slicesWithMetal).toEqual([2, 3]);
    expect(Buffer.from(byThreshold.volume.data.buffer).equals(Buffer.from(withMask.volume.data.buffer))).toBe(
      true,
    );
  });

  test("worker threads give the same bytes as one thread (needs npm run build)", async () => {
    const one = await run(1, 3, 1);
    const two = await run(1, 3, 2);
    expect(Buffer.from(one.volume.data.buffer).equals(Buffer.from(two.volume.data.buffer))).toBe(true);
  });

  test("bad input: severity outside 0..1, a mask of the wrong size", async () => {
    await expect(run(1.2)).rejects.toMatchObject({ code: "BAD_ARGUMENT" });
    await expect(
      addCtMetalArtifacts(ct, new Rng(1), { severity: 1, metalMask: new Uint8Array(5) }),
    ).rejects.toMatchObject({ code: "BAD_ARGUMENT" });
  });
});

test("sliceMetalArtifact of a slice without metal is all zeros", () => {
  const hu = new Float32Array(32 * 32);
  const out = sliceMetalArtifact({
    nx: 32,
    ny: 32,
    dx: 1,
    dy: 1,
    hu,
    metalMu: new Float32Array(32 * 32),
    severity: 1,
    photonsPerRay: 1e5,
    beamHardening: 0.02,
    maxProjectionSize: 256,
    seed: 1,
  });
  expect(out.every((v) => v === 0)).toBe(true);
});
