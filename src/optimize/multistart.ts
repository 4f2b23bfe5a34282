/**
 * Seeded multi-start: run a local optimiser from several starting points and keep the best.
 *
 * Starts are x0 itself (unless `includeStart` is false) and points drawn uniformly from the box
 * x0 ± spread (clipped to `bounds` when given), all from the caller's seeded `Rng`. With
 * `candidates` > `starts` the candidates are first screened by one evaluation each and the
 * local optimiser runs only from the best `starts` of them, a cheap way to spend a coarse
 * global search on the promising basins.
 *
 * Conventions: minimises; f's argument is a reused buffer; parameter units throughout.
 */
import { CoxaError } from "../common/errors.js";
import type { Rng } from "../common/random.js";
import type { Bounds, Objective, OptimizeResult } from "./objective.js";

/** A local optimiser bound to its options, e.g. `(f, x) => powell(f, x, { scales })`. */
export type LocalOptimizer = (f: Objective, x0: Float64Array) => OptimizeResult;

/** Options of `multiStart`. */
export interface MultiStartOptions {
  /** Seeded generator for the random starts. */
  rng: Rng;
  /** Half-width of the start box around x0, per parameter (parameter units, >= 0). */
  spread: ArrayLike<number>;
  /** Local runs to make (default 8). */
  starts?: number;
  /** Random candidates screened by one evaluation each (default: no screening). */
  candidates?: number;
  /** Whether x0 itself is one of the starts (default true). */
  includeStart?: boolean;
  /** Box the starts are clipped to (parameter units). */
  bounds?: Bounds;
  /** Called after each local run; returning false stops early. */
  onRun?: (info: { run: number; runs: number; value: number; bestValue: number }) => unknown;
}

/** One local run of a multi-start. */
export interface StartRun {
  /** Where the run started. */
  start: Float64Array;
  /** Its best value. */
  value: number;
  /** Its evaluations. */
  evaluations: number;
  /** Whether it converged. */
  converged: boolean;
}

/** Best local result plus a record of all runs. */
export interface MultiStartResult extends OptimizeResult {
  /** Every local run, in the order made. */
  runs: StartRun[];
  /** Index into `runs` of the best one. */
  bestRun: number;
}

/**
 * Run `local` from several seeded starts and keep the best result.
 * @param f - objective (minimised)
 * @param x0 - central start point (parameter units)
 * @param local - the local optimiser
 * @param options - rng, spread, number of starts and candidates, bounds
 * @returns the best run's point and value; evaluations and iterations summed over all work
 *   (screening included); trace = best value after each run
 * @throws CoxaError BAD_ARGUMENT for a spread of the wrong length or a count below 1
 */
export function multiStart(
  f: Objective,
  x0: ArrayLike<number>,
  local: LocalOptimizer,
  options: MultiStartOptions,
): MultiStartResult {
  const n = x0.length;
  const { rng, spread } = options;
  if (spread.length !== n) {
    throw new CoxaError(
      "BAD_ARGUMENT",
      `multi-start spread has ${spread.length} entries for ${n} parameters`,
    );
  }
  for (let i = 0; i < n; i++) {
    if (!(spread[i] >= 0) || !Number.isFinite(spread[i])) {
      throw new CoxaError(
        "BAD_ARGUMENT",
        `multi-start spread ${i} is ${spread[i]}; it must be finite and >= 0`,
      );
    }
  }
  const starts = options.starts ?? 8;
  if (!Number.isInteger(starts) || starts < 1) {
    throw new CoxaError("BAD_ARGUMENT", `multi-start needs a whole number of starts >= 1, got ${starts}`);
  }
  const includeStart = options.includeStart ?? true;
  const candidates = Math.max(options.candidates ?? starts, starts);
  const bounds = options.bounds;

  const clip = (x: Float64Array): Float64Array => {
    if (bounds !== undefined) {
      for (let i = 0; i < n; i++) x[i] = Math.min(bounds.upper[i], Math.max(bounds.lower[i], x[i]));
    }
    return x;
  };
  const pool: Float64Array[] = [];
  if (includeStart) pool.push(clip(Float64Array.from(x0)));
  while (pool.length < candidates) {
    const x = new Float64Array(n);
    for (let i = 0; i < n; i++) x[i] = x0[i] + spread[i] * (2 * rng.uniform() - 1);
    pool.push(clip(x));
  }

  let evaluations = 0;
  let chosen = pool;
  if (candidates > starts) {
    // Screening: one evaluation per candidate, keep the best `starts`.
    const probe = new Float64Array(n);
    const scored = pool.map((x) => {
      probe.set(x);
      evaluations++;
      const v = f(probe);
      return { x, v: Number.isFinite(v) ? v : Number.POSITIVE_INFINITY };
    });
    scored.sort((a, b) => a.v - b.v);
    chosen = scored.slice(0, starts).map((s) => s.x);
  }

  const runs: StartRun[] = [];
  const trace: number[] = [];
  let best: OptimizeResult | undefined;
  let bestRun = 0;
  let iterations = 0;
  for (let r = 0; r < chosen.length; r++) {
    const result = local(f, Float64Array.from(chosen[r]));
    evaluations += result.evaluations;
    iterations += result.iterations;
    runs.push({
      start: chosen[r],
      value: result.value,
      evaluations: result.evaluations,
      converged: result.converged,
    });
    if (best === undefined || result.value < best.value) {
      best = result;
      bestRun = r;
    }
    trace.push(best.value);
    const go = options.onRun?.({
      run: r + 1,
      runs: chosen.length,
      value: result.value,
      bestValue: best.value,
    });
    if (go === false) break;
  }
  const winner = best as OptimizeResult;
  return {
    x: winner.x,
    value: winner.value,
    evaluations,
    iterations,
    converged: winner.converged,
    reason: `best of ${runs.length} local run(s) (run ${bestRun + 1}): ${winner.reason}`,
    trace,
    runs,
    bestRun,
  };
}
