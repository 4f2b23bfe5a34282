/**
 * Coarse global search on the first pyramid level: a seeded scan of translations followed by
 * local refinement of the best few, so that registration does not depend on the centroids
 * agreeing (a small MR field of view around one hip puts the body centroids ~100 mm apart).
 *
 * Method: with the moving image's reference point r (its body-mask centroid, moving world), a
 * candidate is "r lands at fixed point p": T_p = T0 ∘ Trans(q0 - p), where q0 = T0⁻¹(r) is where
 * the start transform T0 puts it, so T_p(p) = r and the rotation of T0 is kept. The points p
 * are the voxels of the fixed body mask on a regular grid of `gridMm` (seeded jitter of half a
 * cell, so the scan is not tied to the voxel lattice), plus p = q0 itself. Every candidate costs
 * one metric evaluation — or, with a screening cost, one cheap evaluation, after which only the
 * best share is scored by the full cost (two stages: most of a body-wide grid is plainly wrong,
 * and a few hundred samples say so). The `keep` best, at least `separationMm` apart (greedy
 * non-maximum suppression), are returned for local refinement, the start always among them.
 */
import { Rng } from "../common/random.js";
import { identity, inverse, type Mat4, multiply, transformPoint, translation } from "../geometry/mat4.js";
import type { Volume } from "../image/volume.js";

export interface ScanOptions {
  /** Start transform T0 (fixed -> moving). */
  start: Mat4;
  /** Cost of a fixed->moving transform (lower is better). */
  cost: (fixedToMoving: Mat4) => number;
  /**
   * A cheaper, noisier cost (fewer samples) that screens every grid point first: only the best
   * `screenKeep` share of them (at least `screenMin`) are then scored by `cost`.
   */
  screen?: (fixedToMoving: Mat4) => number;
  screenKeep?: number;
  screenMin?: number;
  /** Fixed body mask and its grid. */
  fixedBody: Uint8Array;
  fixedGrid: Volume;
  /** Moving reference point r (moving world mm). */
  movingPointMm: readonly number[];
  /** Candidate spacing (mm). */
  gridMm: number;
  /** Number of candidates to keep. */
  keep: number;
  /** Minimum distance between kept candidates (mm). */
  separationMm: number;
  seed: number;
}

export interface ScanCandidate {
  matrix: Mat4;
  cost: number;
  /** Fixed point p the moving reference lands on (mm). */
  pointMm: [number, number, number];
  isStart: boolean;
}

export interface ScanResult {
  candidates: ScanCandidate[];
  /** Grid points visited (each costs one screening or one full evaluation). */
  evaluated: number;
  /** Points scored by the full cost. */
  scored: number;
}

/** Scan translations of the start transform over the fixed body (see the module header). */
export function scanTranslations(o: ScanOptions): ScanResult {
  const rng = new Rng(o.seed);
  const q0 = transformPoint(
    [0, 0, 0],
    inverse(o.start),
    o.movingPointMm[0],
    o.movingPointMm[1],
    o.movingPointMm[2],
  );
  const grid = o.fixedGrid;
  const sp = grid.spacingMm;
  const stride = sp.map((s) => Math.max(1, Math.round(o.gridMm / s)));
  const [nx, ny, nz] = grid.dims;
  const all: ScanCandidate[] = [];
  const m = identity();
  const shift = identity();
  const p = [0, 0, 0];
  const first = o.screen ?? o.cost;
  const matrixAt = (px: number, py: number, pz: number) => {
    shift.set(translation(q0[0] - px, q0[1] - py, q0[2] - pz));
    return multiply(m, o.start, shift);
  };
  const evaluate = (px: number, py: number, pz: number, isStart: boolean) => {
    const c = first(matrixAt(px, py, pz));
    all.push({ matrix: new Float64Array(m), cost: c, pointMm: [px, py, pz], isStart });
  };
  evaluate(q0[0], q0[1], q0[2], true);
  const off = [rng.int(stride[0]), rng.int(stride[1]), rng.int(stride[2])];
  for (let k = off[2]; k < nz; k += stride[2]) {
    for (let j = off[1]; j < ny; j += stride[1]) {
      for (let i = off[0]; i < nx; i += stride[0]) {
        if (o.fixedBody[i + nx * (j + ny * k)] === 0) continue;
        grid.indexToWorldPoint(
          p,
          i + rng.range(-0.25, 0.25) * stride[0],
          j + rng.range(-0.25, 0.25) * stride[1],
          k,
        );
        evaluate(p[0], p[1], p[2], false);
      }
    }
  }
  const visited = all.length;
  let scored = all.length;
  if (o.screen) {
    // Score the best of the screened points (and the start) with the full cost; the rest drop out.
    const keepN = Math.max(o.screenMin ?? 50, Math.ceil((o.screenKeep ?? 0.1) * all.length));
    const ranked = all
      .map((_c, idx) => idx)
      .filter((idx) => Number.isFinite(all[idx].cost))
      .sort((a, b) => all[a].cost - all[b].cost)
      .slice(0, keepN);
    if (!ranked.includes(0)) ranked.push(0);
    const kept = ranked.map((idx) => all[idx]);
    for (const c of kept) c.cost = o.cost(c.matrix);
    all.length = 0;
    all.push(...kept);
    scored = kept.length;
  }
  const order = all
    .map((_c, idx) => idx)
    .filter((idx) => Number.isFinite(all[idx].cost))
    .sort((a, b) => all[a].cost - all[b].cost);
  const kept: ScanCandidate[] = [];
  const sep2 = o.separationMm * o.separationMm;
  for (const idx of order) {
    const c = all[idx];
    let far = true;
    for (const k of kept) {
      const d2 =
        (k.pointMm[0] - c.pointMm[0]) ** 2 +
        (k.pointMm[1] - c.pointMm[1]) ** 2 +
        (k.pointMm[2] - c.pointMm[2]) ** 2;
      if (d2 < sep2) {
        far = false;
        break;
      }
    }
    if (far) kept.push(c);
    if (kept.length >= o.keep) break;
  }
  if (!kept.some((c) => c.isStart)) kept.push(all.find((c) => c.isStart)!);
  return { candidates: kept, evaluated: visited, scored };
}
