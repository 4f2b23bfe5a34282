/**
 * Powell's conjugate-direction method (Powell 1964, "An efficient method for finding the
 * minimum of a function of several variables without calculating derivatives", Comput. J. 7).
 *
 * Each iteration line-minimises along every direction of the set in turn (Brent line search,
 * ./line-search.ts), then considers the overall displacement d of the iteration as a new
 * direction. Direction replacement rule (Powell 1964, in the form given by Brent 1973, ch. 7):
 * with f0 the value at the start of the iteration, f1 at its end, fE at the extrapolated point
 * 2·x1 - x0 and Δ the largest single-direction decrease, d replaces the direction of largest
 * decrease only when fE < f0 and
 *     2 (f0 - 2 f1 + fE) (f0 - f1 - Δ)² < Δ (f0 - fE)²,
 * which keeps the set from collapsing into linear dependence.
 *
 * Conventions: minimises; the initial directions are the coordinate axes scaled by `scales`
 * (so the first trial step along parameter i is scales[i]); the x tolerance is in scaled units.
 */
import { createLineScratch, lineMinimize } from "./line-search.js";
import {
  Evaluator,
  type Objective,
  type OptimizeOptions,
  type OptimizeResult,
  resolveOptions,
  valueConverged,
} from "./objective.js";

/** Options of Powell's method. */
export interface PowellOptions extends OptimizeOptions {
  /** Brent iterations per line search (default 100). */
  maxLineIterations?: number;
  /**
   * Position tolerance of each line search, in scaled units (default: `tolerances.x`, or
   * 1e-6). Coarser values save evaluations on expensive, noisy objectives.
   */
  lineTolerance?: number;
  /** Iteration limit (default 1000). */
  maxIterations?: number;
}

/**
 * Minimise f from x0 by Powell's method.
 * @param f - objective (minimised); its argument is a reused buffer
 * @param x0 - start point (parameter units)
 * @param options - scales, budget, tolerances, callback; see `PowellOptions`
 * @returns best point, value, counts, convergence flag, reason and per-iteration trace
 * @throws CoxaError BAD_ARGUMENT for an invalid start point or options
 */
export function powell(f: Objective, x0: ArrayLike<number>, options: PowellOptions = {}): OptimizeResult {
  const { n, scales, maxEvaluations, tolerances } = resolveOptions(x0, options);
  const maxLineIterations = options.maxLineIterations ?? 100;
  const lineTolerance = options.lineTolerance ?? tolerances.x;
  const maxIterations = options.maxIterations ?? 1000;

  const ev = new Evaluator(f, x0, maxEvaluations);
  const x = Float64Array.from(x0);
  const xStart = new Float64Array(n);
  const xExtra = new Float64Array(n);
  const displacement = new Float64Array(n);
  const directions = new Float64Array(n * n); // row i = direction i
  for (let i = 0; i < n; i++) directions[i * n + i] = scales[i];
  const scratch = createLineScratch(n);
  const trace: number[] = [];

  // Tolerance on t for a direction: position tolerance over the direction's scaled length.
  const tolFor = (row: Float64Array): number => {
    let len = 0;
    for (let i = 0; i < n; i++) len = Math.max(len, Math.abs(row[i]) / scales[i]);
    return len > 0 ? Math.max(lineTolerance, 1e-15) / len : 1;
  };

  let fx = ev.evaluate(x);
  let iterations = 0;
  let converged = false;
  let reason = "";
  for (;;) {
    if (ev.exhausted) {
      reason = `stopped at the evaluation budget (${maxEvaluations})`;
      break;
    }
    if (iterations >= maxIterations) {
      reason = `stopped at the iteration limit (${maxIterations})`;
      break;
    }
    const fStart = fx;
    xStart.set(x);
    let biggestDrop = 0;
    let biggestIndex = 0;
    for (let i = 0; i < n; i++) {
      const dir = directions.subarray(i * n, i * n + n);
      const before = fx;
      fx = lineMinimize(ev, x, dir, fx, tolFor(dir), maxLineIterations, scratch);
      if (before - fx > biggestDrop) {
        biggestDrop = before - fx;
        biggestIndex = i;
      }
      if (ev.exhausted) break;
    }
    iterations++;
    trace.push(ev.bestValue);
    if (!ev.report(options.onIteration, iterations)) {
      reason = "stopped by caller";
      break;
    }
    if (ev.exhausted) {
      reason = `stopped at the evaluation budget (${maxEvaluations})`;
      break;
    }
    let step = 0;
    for (let i = 0; i < n; i++) {
      displacement[i] = x[i] - xStart[i];
      step = Math.max(step, Math.abs(displacement[i]) / scales[i]);
    }
    if (valueConverged(fStart, fx, tolerances)) {
      converged = true;
      reason = "value change per iteration below tolerance";
      break;
    }
    if (step <= tolerances.x) {
      converged = true;
      reason = "step per iteration below tolerance";
      break;
    }
    // Extrapolate along the iteration's displacement; maybe adopt it as a new direction.
    for (let i = 0; i < n; i++) xExtra[i] = x[i] + displacement[i];
    const fExtra = ev.evaluate(xExtra);
    if (fExtra < fStart) {
      const a = fStart - fx - biggestDrop;
      const b = fStart - fExtra;
      const test = 2 * (fStart - 2 * fx + fExtra) * a * a - biggestDrop * b * b;
      if (test < 0) {
        fx = lineMinimize(ev, x, displacement, fx, tolFor(displacement), maxLineIterations, scratch);
        // Discard the direction of largest decrease; the new one goes last.
        const last = (n - 1) * n;
        for (let j = 0; j < n; j++) {
          directions[biggestIndex * n + j] = directions[last + j];
          directions[last + j] = displacement[j];
        }
      } else if (fExtra < fx) {
        // Directions kept, but the extrapolated point is lower: start the next sweep there.
        x.set(xExtra);
        fx = fExtra;
      }
    }
  }
  return ev.result(iterations, converged, reason, trace);
}
