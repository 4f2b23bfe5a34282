/**
 * What all of coxa's gradient-free optimisers share: the objective type, the options, the
 * result, and the `Evaluator` that counts evaluations against a budget and keeps the best
 * point ever seen.
 *
 * Conventions:
 * - Optimisers MINIMISE `f(x)`. The registration driver passes the negated similarity.
 * - `x` handed to `f` is a buffer the optimiser reuses: read it, never keep it (copy if needed).
 * - NaN and ±Infinity from `f` count as +Infinity (a point with no overlap is simply bad).
 * - "Scaled units": parameter i divided by `scales[i]`. Steps, simplex sizes and tolerances on
 *   x are measured in scaled units, so a scale of 0.5 deg for a rotation and 1 mm for a
 *   translation make one unit of either move the image by about the same amount.
 * - The result is the best point evaluated over the whole run, never a later, worse one.
 */
import { CoxaError } from "../common/errors.js";

/** A function to minimise. `x` is a reused buffer: do not keep a reference to it. */
export type Objective = (x: Float64Array) => number;

/** Lower and upper limits per parameter (parameter units), lower < upper. */
export interface Bounds {
  lower: ArrayLike<number>;
  upper: ArrayLike<number>;
}

/** Stopping tolerances. */
export interface Tolerances {
  /**
   * Relative change of the best value (per iteration for Powell, across the simplex for
   * Nelder-Mead, across recent generations for CMA-ES) below which the run has converged:
   * |Δf| <= fRelative · |f| + fAbsolute. Default 1e-8.
   */
  fRelative?: number;
  /** Absolute part of the value test, in the units of f. Default 1e-12. */
  fAbsolute?: number;
  /** Step or size (in scaled units) below which the run has converged. Default 1e-6. */
  x?: number;
}

/** What `onIteration` is told after each iteration. */
export interface IterationInfo {
  /** Iterations completed so far (1 after the first). */
  iteration: number;
  /** Function evaluations so far. */
  evaluations: number;
  /** Best value seen so far. */
  bestValue: number;
  /** Best point seen so far (a live buffer: copy it to keep it). */
  bestX: Float64Array;
}

/**
 * Called after every iteration; returning `false` stops the run (reason "stopped by caller").
 */
export type IterationCallback = (info: IterationInfo) => unknown;

/** Options every optimiser accepts. */
export interface OptimizeOptions {
  /**
   * Per-parameter typical step (in the parameter's own unit): the initial step of Powell's
   * directions, the initial simplex edges of Nelder-Mead, the coordinate scaling of CMA-ES.
   * All > 0. Default 1 for every parameter.
   */
  scales?: ArrayLike<number>;
  /** Budget of function evaluations (hard limit, never exceeded). Default 2000 · n. */
  maxEvaluations?: number;
  /** Stopping tolerances (see `Tolerances`). */
  tolerances?: Tolerances;
  /** Progress hook, called once per iteration. */
  onIteration?: IterationCallback;
}

/** Outcome of an optimiser run. */
export interface OptimizeResult {
  /** Best point found (a new array). */
  x: Float64Array;
  /** f(x). */
  value: number;
  /** Function evaluations used. */
  evaluations: number;
  /** Iterations (Powell sweeps, simplex steps, CMA-ES generations). */
  iterations: number;
  /** True when a tolerance test ended the run (not the budget, a stall or the caller). */
  converged: boolean;
  /** One plain sentence saying why the run ended. */
  reason: string;
  /** Best value after each iteration (non-increasing). */
  trace: number[];
}

/** Resolved tolerances with defaults applied. */
export interface ResolvedTolerances {
  fRelative: number;
  fAbsolute: number;
  x: number;
}

/** Defaults for the tolerances, in one place. */
export const DEFAULT_TOLERANCES: Readonly<ResolvedTolerances> = {
  fRelative: 1e-8,
  fAbsolute: 1e-12,
  x: 1e-6,
};

/**
 * Check `x0` and the common options; return scales (copied), budget and tolerances.
 * @throws CoxaError BAD_ARGUMENT for an empty or non-finite start, wrong-length or
 *   non-positive scales, or a budget below 1
 */
export function resolveOptions(
  x0: ArrayLike<number>,
  options: OptimizeOptions,
): { n: number; scales: Float64Array; maxEvaluations: number; tolerances: ResolvedTolerances } {
  const n = x0.length;
  if (n < 1) throw new CoxaError("BAD_ARGUMENT", "optimiser start point is empty");
  for (let i = 0; i < n; i++) {
    if (!Number.isFinite(x0[i])) {
      throw new CoxaError("BAD_ARGUMENT", `optimiser start point entry ${i} is ${x0[i]}, not finite`);
    }
  }
  const scales = new Float64Array(n).fill(1);
  if (options.scales !== undefined) {
    if (options.scales.length !== n) {
      throw new CoxaError(
        "BAD_ARGUMENT",
        `optimiser scales have ${options.scales.length} entries for ${n} parameters`,
      );
    }
    for (let i = 0; i < n; i++) {
      const s = options.scales[i];
      if (!(s > 0) || !Number.isFinite(s)) {
        throw new CoxaError("BAD_ARGUMENT", `optimiser scale ${i} is ${s}; scales must be finite and > 0`);
      }
      scales[i] = s;
    }
  }
  const maxEvaluations = options.maxEvaluations ?? 2000 * n;
  if (!(maxEvaluations >= 1)) {
    throw new CoxaError("BAD_ARGUMENT", `maxEvaluations is ${maxEvaluations}; it must be >= 1`);
  }
  const t = options.tolerances ?? {};
  const tolerances: ResolvedTolerances = {
    fRelative: t.fRelative ?? DEFAULT_TOLERANCES.fRelative,
    fAbsolute: t.fAbsolute ?? DEFAULT_TOLERANCES.fAbsolute,
    x: t.x ?? DEFAULT_TOLERANCES.x,
  };
  for (const [name, v] of Object.entries(tolerances)) {
    if (!(v >= 0) || !Number.isFinite(v)) {
      throw new CoxaError("BAD_ARGUMENT", `tolerance ${name} is ${v}; it must be finite and >= 0`);
    }
  }
  return { n, scales, maxEvaluations: Math.floor(maxEvaluations), tolerances };
}

/**
 * Counts evaluations against a hard budget and remembers the best point.
 * Once the budget is spent `evaluate` returns +Infinity without calling f, so line searches
 * and simplex steps end quickly; optimisers also test `exhausted` in their loops.
 */
export class Evaluator {
  /** Evaluations made. */
  count = 0;
  /** Best value seen (+Infinity before the first finite one). */
  bestValue = Number.POSITIVE_INFINITY;
  /** Best point seen (copy of the argument that gave `bestValue`). */
  readonly bestX: Float64Array;
  private readonly f: Objective;
  private readonly max: number;

  /**
   * @param f - objective
   * @param x0 - start point; `bestX` starts as a copy of it
   * @param maxEvaluations - hard budget
   */
  constructor(f: Objective, x0: ArrayLike<number>, maxEvaluations: number) {
    this.f = f;
    this.max = maxEvaluations;
    this.bestX = Float64Array.from(x0);
  }

  /** True once the budget is spent. */
  get exhausted(): boolean {
    return this.count >= this.max;
  }

  /** f(x) with NaN/±Infinity mapped to +Infinity; +Infinity without a call once exhausted. */
  evaluate(x: Float64Array): number {
    if (this.count >= this.max) return Number.POSITIVE_INFINITY;
    this.count++;
    let v = this.f(x);
    if (!Number.isFinite(v)) v = Number.POSITIVE_INFINITY;
    if (v < this.bestValue) {
      this.bestValue = v;
      this.bestX.set(x);
    }
    return v;
  }

  /** Report the iteration; returns false when the caller asked to stop. */
  report(callback: IterationCallback | undefined, iteration: number): boolean {
    if (callback === undefined) return true;
    return (
      callback({ iteration, evaluations: this.count, bestValue: this.bestValue, bestX: this.bestX }) !== false
    );
  }

  /** Assemble the result from the best point. */
  result(iterations: number, converged: boolean, reason: string, trace: number[]): OptimizeResult {
    return {
      x: Float64Array.from(this.bestX),
      value: this.bestValue,
      evaluations: this.count,
      iterations,
      converged,
      reason,
      trace,
    };
  }
}

/** True when the change from `previous` to `current` is within the value tolerance. */
export function valueConverged(previous: number, current: number, tol: ResolvedTolerances): boolean {
  if (!Number.isFinite(previous) || !Number.isFinite(current)) return false;
  return (
    Math.abs(previous - current) <=
    tol.fRelative * 0.5 * (Math.abs(previous) + Math.abs(current)) + tol.fAbsolute
  );
}
