/**
 * CMA-ES, the covariance matrix adaptation evolution strategy (μ/μ_w, λ) with weighted
 * recombination, cumulative step-size adaptation, and rank-one plus rank-μ covariance updates,
 * with the default strategy parameters of Hansen (2016, "The CMA Evolution Strategy: A
 * Tutorial", arXiv:1604.00772, table 1 and appendix A; positive weights only).
 *
 * Used by the registration driver as a coarse global search on the first pyramid level.
 *
 * Conventions:
 * - Internally the search runs in scaled coordinates u_i = x_i / scales_i; `sigma` and the
 *   x tolerance are in those units.
 * - Random numbers come only from the caller's seeded `Rng`, so a seed reproduces a run.
 * - Box bounds (parameter units): a candidate outside the box is evaluated at its projection
 *   onto the box, and ranked by that value plus a penalty growing with the squared scaled
 *   distance outside the box, in units of the current step size, weighted by the spread of the
 *   generation's values (scale-free; the update uses the unprojected sample, so the sampling
 *   distribution stays unbiased and is pushed back inside). The returned point always lies in
 *   the box.
 * - The covariance is re-decomposed (Jacobi, ../geometry/symmetric-eigen.ts) every
 *   generation: n is at most 12 here, so that costs microseconds against a metric evaluation.
 */
import { CoxaError } from "../common/errors.js";
import type { Rng } from "../common/random.js";
import { symmetricEigen } from "../geometry/symmetric-eigen.js";
import {
  type Bounds,
  Evaluator,
  type Objective,
  type OptimizeOptions,
  type OptimizeResult,
  resolveOptions,
} from "./objective.js";

/** Options of CMA-ES. */
export interface CmaesOptions extends OptimizeOptions {
  /** Seeded generator (the only source of randomness). */
  rng: Rng;
  /**
   * Initial step size in scaled units. Default: 0.3 times the narrowest scaled box width when
   * bounds are given, else 1.
   */
  sigma?: number;
  /** Offspring per generation λ (default 4 + floor(3 ln n), Hansen 2016). */
  populationSize?: number;
  /** Optional box (parameter units). */
  bounds?: Bounds;
  /** Generation limit (default 10000). */
  maxGenerations?: number;
}

/**
 * Minimise f from x0 by CMA-ES.
 * @param f - objective (minimised); its argument is a reused buffer
 * @param x0 - initial mean (parameter units); projected into the bounds when given
 * @param options - rng (required), sigma, population size, bounds, scales, budget, tolerances
 * @returns best point, value, counts, convergence flag, reason and per-generation trace
 * @throws CoxaError BAD_ARGUMENT for invalid start, bounds, sigma or population size
 */
export function cmaes(f: Objective, x0: ArrayLike<number>, options: CmaesOptions): OptimizeResult {
  const { n, scales, maxEvaluations, tolerances } = resolveOptions(x0, options);
  const rng = options.rng;
  if (rng === undefined) throw new CoxaError("BAD_ARGUMENT", "CMA-ES needs a seeded Rng (options.rng)");

  // Bounds in scaled coordinates.
  let lowerU: Float64Array | undefined;
  let upperU: Float64Array | undefined;
  let narrowest = Number.POSITIVE_INFINITY;
  if (options.bounds !== undefined) {
    const { lower, upper } = options.bounds;
    if (lower.length !== n || upper.length !== n) {
      throw new CoxaError("BAD_ARGUMENT", `CMA-ES bounds need ${n} lower and ${n} upper limits`);
    }
    lowerU = new Float64Array(n);
    upperU = new Float64Array(n);
    for (let i = 0; i < n; i++) {
      if (!Number.isFinite(lower[i]) || !Number.isFinite(upper[i]) || !(lower[i] < upper[i])) {
        throw new CoxaError(
          "BAD_ARGUMENT",
          `CMA-ES bounds for parameter ${i} are [${lower[i]}, ${upper[i]}]; need finite lower < upper`,
        );
      }
      lowerU[i] = lower[i] / scales[i];
      upperU[i] = upper[i] / scales[i];
      narrowest = Math.min(narrowest, upperU[i] - lowerU[i]);
    }
  }
  let sigma = options.sigma ?? (lowerU ? 0.3 * narrowest : 1);
  if (!(sigma > 0) || !Number.isFinite(sigma)) {
    throw new CoxaError("BAD_ARGUMENT", `CMA-ES sigma is ${sigma}; it must be finite and > 0`);
  }
  const lambda = options.populationSize ?? 4 + Math.floor(3 * Math.log(n));
  if (!Number.isInteger(lambda) || lambda < 2) {
    throw new CoxaError("BAD_ARGUMENT", `CMA-ES population size is ${lambda}; it must be an integer >= 2`);
  }
  const maxGenerations = options.maxGenerations ?? 10000;

  // Strategy parameters (Hansen 2016, table 1, positive weights).
  const mu = Math.floor(lambda / 2);
  const weights = new Float64Array(mu);
  let wSum = 0;
  for (let i = 0; i < mu; i++) {
    weights[i] = Math.log((lambda + 1) / 2) - Math.log(i + 1);
    wSum += weights[i];
  }
  let w2Sum = 0;
  for (let i = 0; i < mu; i++) {
    weights[i] /= wSum;
    w2Sum += weights[i] * weights[i];
  }
  const muEff = 1 / w2Sum;
  const cSigma = (muEff + 2) / (n + muEff + 5);
  const dSigma = 1 + 2 * Math.max(0, Math.sqrt((muEff - 1) / (n + 1)) - 1) + cSigma;
  const cC = (4 + muEff / n) / (n + 4 + (2 * muEff) / n);
  const c1 = 2 / ((n + 1.3) * (n + 1.3) + muEff);
  const cMu = Math.min(1 - c1, (2 * (muEff - 2 + 1 / muEff)) / ((n + 2) * (n + 2) + muEff));
  const chiN = Math.sqrt(n) * (1 - 1 / (4 * n) + 1 / (21 * n * n)); // E||N(0, I)||
  const sigmaNorm = Math.sqrt(cSigma * (2 - cSigma) * muEff);
  const cNorm = Math.sqrt(cC * (2 - cC) * muEff);

  // State and buffers (allocated once).
  const mean = new Float64Array(n);
  for (let i = 0; i < n; i++) {
    let u = x0[i] / scales[i];
    if (lowerU && upperU) u = Math.min(upperU[i], Math.max(lowerU[i], u));
    mean[i] = u;
  }
  const cov = new Float64Array(n * n);
  const basis = new Float64Array(n * n); // columns = eigenvectors of cov
  const eigen = new Float64Array(n);
  const diag = new Float64Array(n); // sqrt of eigenvalues
  const eigenWork = new Float64Array(n * n);
  for (let i = 0; i < n; i++) {
    cov[i * n + i] = 1;
    basis[i * n + i] = 1;
    diag[i] = 1;
  }
  const pSigma = new Float64Array(n);
  const pC = new Float64Array(n);
  const zs = new Float64Array(lambda * n);
  const ys = new Float64Array(lambda * n);
  const candidate = new Float64Array(n); // parameter units, projected into the box
  const raw = new Float64Array(lambda);
  const outside = new Float64Array(lambda); // squared scaled distance outside the box
  const fitness = new Float64Array(lambda);
  const order = new Int32Array(lambda);
  const yW = new Float64Array(n);
  const tmp = new Float64Array(n);
  const historyLength = 10 + Math.ceil((30 * n) / lambda);
  const history = new Float64Array(historyLength);
  let historyCount = 0;

  // The start point (projected into the box) is evaluated first: the result is never worse.
  for (let i = 0; i < n; i++) candidate[i] = mean[i] * scales[i];
  const ev = new Evaluator(f, candidate, maxEvaluations);
  ev.evaluate(candidate);

  const trace: number[] = [];
  let generation = 0;
  let converged = false;
  let reason = "";
  for (;;) {
    if (ev.exhausted) {
      reason = `stopped at the evaluation budget (${maxEvaluations})`;
      break;
    }
    if (generation >= maxGenerations) {
      reason = `stopped at the generation limit (${maxGenerations})`;
      break;
    }
    // Sample λ offspring: y = B · (D ∘ z), u = mean + σ y.
    let lo = Number.POSITIVE_INFINITY;
    let hi = Number.NEGATIVE_INFINITY;
    for (let k = 0; k < lambda; k++) {
      const off = k * n;
      for (let j = 0; j < n; j++) zs[off + j] = rng.normal();
      let dist2 = 0;
      for (let i = 0; i < n; i++) {
        let y = 0;
        for (let j = 0; j < n; j++) y += basis[i * n + j] * diag[j] * zs[off + j];
        ys[off + i] = y;
        let u = mean[i] + sigma * y;
        if (lowerU && upperU) {
          const clamped = Math.min(upperU[i], Math.max(lowerU[i], u));
          const d = (u - clamped) / sigma;
          dist2 += d * d;
          u = clamped;
        }
        candidate[i] = u * scales[i];
      }
      outside[k] = dist2;
      const v = ev.evaluate(candidate);
      raw[k] = v;
      if (v < Number.POSITIVE_INFINITY) {
        if (v < lo) lo = v;
        if (v > hi) hi = v;
      }
      order[k] = k;
    }
    const penaltyWeight = lo <= hi ? hi - lo + 1e-12 * (1 + Math.abs(lo)) : 1;
    for (let k = 0; k < lambda; k++) fitness[k] = raw[k] + penaltyWeight * outside[k];
    for (let a = 1; a < lambda; a++) {
      const idx = order[a];
      const val = fitness[idx];
      let b = a - 1;
      while (b >= 0 && fitness[order[b]] > val) {
        order[b + 1] = order[b];
        b--;
      }
      order[b + 1] = idx;
    }

    // Recombination: y_w = Σ w_i y_(i:λ); mean += σ y_w.
    yW.fill(0);
    for (let r = 0; r < mu; r++) {
      const off = order[r] * n;
      const w = weights[r];
      for (let i = 0; i < n; i++) yW[i] += w * ys[off + i];
    }
    for (let i = 0; i < n; i++) mean[i] += sigma * yW[i];

    // Step-size path: p_σ = (1 - c_σ) p_σ + sqrt(c_σ (2 - c_σ) μ_eff) C^(-1/2) y_w.
    for (let j = 0; j < n; j++) {
      let s = 0;
      for (let i = 0; i < n; i++) s += basis[i * n + j] * yW[i];
      tmp[j] = s / diag[j];
    }
    let pSigmaNorm2 = 0;
    for (let i = 0; i < n; i++) {
      let s = 0;
      for (let j = 0; j < n; j++) s += basis[i * n + j] * tmp[j];
      pSigma[i] = (1 - cSigma) * pSigma[i] + sigmaNorm * s;
      pSigmaNorm2 += pSigma[i] * pSigma[i];
    }
    const pSigmaNorm = Math.sqrt(pSigmaNorm2);
    const hSigma =
      pSigmaNorm / Math.sqrt(1 - (1 - cSigma) ** (2 * (generation + 1))) < (1.4 + 2 / (n + 1)) * chiN ? 1 : 0;
    for (let i = 0; i < n; i++) pC[i] = (1 - cC) * pC[i] + hSigma * cNorm * yW[i];

    // Covariance: rank-one (p_c) and rank-μ (selected steps) updates.
    const keep = 1 - c1 - cMu + (1 - hSigma) * c1 * cC * (2 - cC);
    for (let i = 0; i < n; i++) {
      for (let j = 0; j <= i; j++) {
        let rankMu = 0;
        for (let r = 0; r < mu; r++) {
          const off = order[r] * n;
          rankMu += weights[r] * ys[off + i] * ys[off + j];
        }
        const v = keep * cov[i * n + j] + c1 * pC[i] * pC[j] + cMu * rankMu;
        cov[i * n + j] = v;
        cov[j * n + i] = v;
      }
    }
    sigma *= Math.exp((cSigma / dSigma) * (pSigmaNorm / chiN - 1));

    symmetricEigen(cov, n, eigen, basis, eigenWork);
    let eMax = 0;
    for (let i = 0; i < n; i++) eMax = Math.max(eMax, eigen[i]);
    let dMin = Number.POSITIVE_INFINITY;
    let dMax = 0;
    for (let i = 0; i < n; i++) {
      diag[i] = Math.sqrt(Math.max(eigen[i], 1e-20 * eMax, 1e-300));
      dMin = Math.min(dMin, diag[i]);
      dMax = Math.max(dMax, diag[i]);
    }

    generation++;
    trace.push(ev.bestValue);
    history[(generation - 1) % historyLength] = fitness[order[0]];
    historyCount = Math.min(historyCount + 1, historyLength);
    if (!ev.report(options.onIteration, generation)) {
      reason = "stopped by caller";
      break;
    }

    // Stopping tests (Hansen 2016, appendix B.3: TolX, TolFun, ConditionCov).
    let spread = 0;
    for (let i = 0; i < n; i++) {
      spread = Math.max(spread, sigma * Math.max(Math.sqrt(cov[i * n + i]), Math.abs(pC[i])));
    }
    if (spread <= tolerances.x) {
      converged = true;
      reason = "search distribution narrower than the x tolerance";
      break;
    }
    if (historyCount === historyLength) {
      let vLo = Number.POSITIVE_INFINITY;
      let vHi = Number.NEGATIVE_INFINITY;
      for (let i = 0; i < historyLength; i++) {
        vLo = Math.min(vLo, history[i]);
        vHi = Math.max(vHi, history[i]);
      }
      for (let k = 0; k < lambda; k++) {
        vLo = Math.min(vLo, fitness[k]);
        vHi = Math.max(vHi, fitness[k]);
      }
      if (
        Number.isFinite(vHi) &&
        vHi - vLo <= tolerances.fRelative * Math.abs(ev.bestValue) + tolerances.fAbsolute
      ) {
        converged = true;
        reason = "values over recent generations within the value tolerance";
        break;
      }
    }
    if (dMax > 1e7 * dMin) {
      reason = "covariance became ill-conditioned (condition number above 1e14)";
      break;
    }
  }
  return ev.result(generation, converged, reason, trace);
}
