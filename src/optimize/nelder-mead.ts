/**
 * The Nelder-Mead downhill simplex method (Nelder & Mead 1965, "A simplex method for function
 * minimization", Comput. J. 7), with the standard coefficients reflection 1, expansion 2,
 * contraction 1/2, shrink 1/2, or the dimension-adaptive ones of Gao & Han (2012, "Implementing
 * the Nelder-Mead simplex algorithm with adaptive parameters", Comput. Optim. Appl. 51):
 * reflection 1, expansion 1 + 2/n, contraction 3/4 - 1/(2n), shrink 1 - 1/n.
 *
 * Optional restarts rebuild a fresh simplex of the initial size around the best vertex when the
 * run has converged, a cheap guard against the simplex collapsing onto a non-stationary point
 * (McKinnon 1998 gives a function where that happens).
 *
 * Conventions: minimises; the initial simplex is x0 and x0 + scales[i]·e_i; convergence needs
 * both the value spread over the simplex within the value tolerance and the simplex size (the
 * largest scaled coordinate distance from the best vertex) within the x tolerance.
 */
import { CoxaError } from "../common/errors.js";
import {
  Evaluator,
  type Objective,
  type OptimizeOptions,
  type OptimizeResult,
  resolveOptions,
  valueConverged,
} from "./objective.js";

/** Options of the Nelder-Mead method. */
export interface NelderMeadOptions extends OptimizeOptions {
  /** Use the adaptive coefficients of Gao & Han (2012) (default false: standard ones). */
  adaptive?: boolean;
  /** How many times a converged run is restarted from a fresh simplex (default 0). */
  restarts?: number;
  /** Iteration limit over all restarts (default 100000). */
  maxIterations?: number;
  /**
   * Explicit initial simplex: n + 1 vertices of n numbers each (parameter units). Default
   * x0 and x0 + scales[i]·e_i. Restarts always use the default shape around the best vertex.
   */
  simplex?: readonly ArrayLike<number>[];
}

/**
 * Minimise f from x0 by the Nelder-Mead simplex method.
 * @param f - objective (minimised); its argument is a reused buffer
 * @param x0 - start point (parameter units)
 * @param options - scales (initial simplex edges), budget, tolerances, adaptive, restarts
 * @returns best point, value, counts, convergence flag, reason and per-iteration trace
 * @throws CoxaError BAD_ARGUMENT for an invalid start point, options or initial simplex
 */
export function nelderMead(
  f: Objective,
  x0: ArrayLike<number>,
  options: NelderMeadOptions = {},
): OptimizeResult {
  const { n, scales, maxEvaluations, tolerances } = resolveOptions(x0, options);
  const adaptive = options.adaptive ?? false;
  const alpha = 1;
  const gamma = adaptive ? 1 + 2 / n : 2;
  const rho = adaptive ? 0.75 - 1 / (2 * n) : 0.5;
  const sigma = adaptive ? (n > 1 ? 1 - 1 / n : 0.5) : 0.5;
  const maxRestarts = Math.max(0, Math.floor(options.restarts ?? 0));
  const maxIterations = options.maxIterations ?? 100000;

  const ev = new Evaluator(f, x0, maxEvaluations);
  const m = n + 1;
  const simplex = new Float64Array(m * n); // row v = vertex v
  const values = new Float64Array(m);
  const order = new Int32Array(m); // vertex indices sorted by value, best first
  const centroid = new Float64Array(n);
  const reflected = new Float64Array(n);
  const trial = new Float64Array(n);
  const probe = new Float64Array(n);
  const trace: number[] = [];

  const evaluateVertex = (v: number): number => {
    for (let j = 0; j < n; j++) probe[j] = simplex[v * n + j];
    return ev.evaluate(probe);
  };

  const build = (base: Float64Array): void => {
    for (let v = 0; v < m; v++) {
      for (let j = 0; j < n; j++) simplex[v * n + j] = base[j];
      if (v > 0) simplex[v * n + v - 1] += scales[v - 1];
    }
    for (let v = 0; v < m; v++) {
      values[v] = evaluateVertex(v);
      order[v] = v;
    }
  };

  if (options.simplex !== undefined) {
    const given = options.simplex;
    if (given.length !== m || given.some((v) => v.length !== n)) {
      throw new CoxaError("BAD_ARGUMENT", `an initial simplex needs ${m} vertices of ${n} numbers`);
    }
    for (let v = 0; v < m; v++) {
      for (let j = 0; j < n; j++) {
        const value = given[v][j];
        if (!Number.isFinite(value)) {
          throw new CoxaError("BAD_ARGUMENT", `initial simplex vertex ${v} has a non-finite entry`);
        }
        simplex[v * n + j] = value;
      }
    }
    for (let v = 0; v < m; v++) {
      values[v] = evaluateVertex(v);
      order[v] = v;
    }
  } else {
    build(Float64Array.from(x0));
  }
  let iterations = 0;
  let restartsDone = 0;
  let bestBeforeRestart = Number.POSITIVE_INFINITY;
  let converged = false;
  let reason = "";
  for (;;) {
    // Insertion sort of the m vertex indices by value (m is small).
    for (let a = 1; a < m; a++) {
      const idx = order[a];
      const val = values[idx];
      let b = a - 1;
      while (b >= 0 && values[order[b]] > val) {
        order[b + 1] = order[b];
        b--;
      }
      order[b + 1] = idx;
    }
    const best = order[0];
    const worst = order[n];
    const second = order[n - 1];

    // Convergence: value spread and simplex size.
    let size = 0;
    for (let v = 0; v < m; v++) {
      if (v === best) continue;
      for (let j = 0; j < n; j++) {
        size = Math.max(size, Math.abs(simplex[v * n + j] - simplex[best * n + j]) / scales[j]);
      }
    }
    if (valueConverged(values[worst], values[best], tolerances) && size <= tolerances.x) {
      const improved = !valueConverged(bestBeforeRestart, values[best], tolerances);
      if (restartsDone < maxRestarts && improved && !ev.exhausted) {
        restartsDone++;
        bestBeforeRestart = values[best];
        for (let j = 0; j < n; j++) trial[j] = simplex[best * n + j];
        build(trial);
        continue;
      }
      converged = true;
      reason =
        restartsDone > 0
          ? `simplex converged (value spread and size below tolerance) after ${restartsDone} restart(s)`
          : "simplex converged (value spread and size below tolerance)";
      break;
    }
    if (ev.exhausted) {
      reason = `stopped at the evaluation budget (${maxEvaluations})`;
      break;
    }
    if (iterations >= maxIterations) {
      reason = `stopped at the iteration limit (${maxIterations})`;
      break;
    }

    // Centroid of all vertices but the worst.
    centroid.fill(0);
    for (let v = 0; v < m; v++) {
      if (v === worst) continue;
      for (let j = 0; j < n; j++) centroid[j] += simplex[v * n + j];
    }
    for (let j = 0; j < n; j++) centroid[j] /= n;

    const wOff = worst * n;
    for (let j = 0; j < n; j++) reflected[j] = centroid[j] + alpha * (centroid[j] - simplex[wOff + j]);
    const fr = ev.evaluate(reflected);
    let accepted = false;
    if (fr < values[best]) {
      for (let j = 0; j < n; j++) trial[j] = centroid[j] + gamma * (reflected[j] - centroid[j]);
      const fe = ev.evaluate(trial);
      if (fe < fr) {
        simplex.set(trial, wOff);
        values[worst] = fe;
      } else {
        simplex.set(reflected, wOff);
        values[worst] = fr;
      }
      accepted = true;
    } else if (fr < values[second]) {
      simplex.set(reflected, wOff);
      values[worst] = fr;
      accepted = true;
    } else if (fr < values[worst]) {
      // Outside contraction.
      for (let j = 0; j < n; j++) trial[j] = centroid[j] + rho * (reflected[j] - centroid[j]);
      const fc = ev.evaluate(trial);
      if (fc <= fr) {
        simplex.set(trial, wOff);
        values[worst] = fc;
        accepted = true;
      }
    } else {
      // Inside contraction.
      for (let j = 0; j < n; j++) trial[j] = centroid[j] + rho * (simplex[wOff + j] - centroid[j]);
      const fc = ev.evaluate(trial);
      if (fc < values[worst]) {
        simplex.set(trial, wOff);
        values[worst] = fc;
        accepted = true;
      }
    }
    if (!accepted) {
      // Shrink every vertex towards the best.
      const bOff = best * n;
      for (let v = 0; v < m; v++) {
        if (v === best) continue;
        for (let j = 0; j < n; j++) {
          simplex[v * n + j] = simplex[bOff + j] + sigma * (simplex[v * n + j] - simplex[bOff + j]);
        }
        values[v] = evaluateVertex(v);
      }
    }
    iterations++;
    trace.push(ev.bestValue);
    if (!ev.report(options.onIteration, iterations)) {
      reason = "stopped by caller";
      break;
    }
  }
  return ev.result(iterations, converged, reason, trace);
}
