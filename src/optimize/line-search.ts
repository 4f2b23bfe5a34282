/**
 * One-dimensional minimisation without derivatives: downhill bracketing by golden-ratio steps
 * with guarded parabolic extrapolation, then Brent's method (golden section combined with
 * successive parabolic interpolation; Brent 1973, "Algorithms for Minimization without
 * Derivatives", ch. 5). `lineMinimize` applies both along a direction in parameter space and
 * is the line search of Powell's method.
 *
 * Conventions: t is the step along a direction, x(t) = origin + t · direction; t = 0 is the
 * origin, t = 1 one full direction vector. All functions minimise. +Infinity values are fine
 * (they simply lose every comparison).
 */
import type { Evaluator } from "./objective.js";

const GOLDEN = 1.618033988749895; // (1 + sqrt 5) / 2: growth of successive bracket steps
const GOLDEN_SECTION = 0.3819660112501051; // (3 - sqrt 5) / 2: golden-section fraction
const TINY = 1e-21;

/** Three abscissae with the middle value lowest: fb <= fa and fb <= fc, b between a and c. */
export interface Bracket {
  a: number;
  b: number;
  c: number;
  fa: number;
  fb: number;
  fc: number;
  /** False when the bracket could not be closed within the step limit (still downhill at c). */
  ok: boolean;
}

/** A new bracket record for reuse. */
export function createBracket(): Bracket {
  return { a: 0, b: 0, c: 0, fa: 0, fb: 0, fc: 0, ok: false };
}

/**
 * Walk downhill from a, b until the value rises again, giving a bracket of a minimum.
 * @param g - function of one variable
 * @param a - first abscissa
 * @param b - second abscissa (b != a); fa, fb are g(a), g(b) already known
 * @param fa - g(a)
 * @param fb - g(b)
 * @param out - receives the bracket
 * @param maxSteps - maximum number of expansion steps (default 50)
 * @param growLimit - largest parabolic step as a multiple of the last interval (default 100)
 * @returns `out`
 */
export function bracketMinimum(
  g: (t: number) => number,
  a: number,
  b: number,
  fa: number,
  fb: number,
  out: Bracket,
  maxSteps = 50,
  growLimit = 100,
): Bracket {
  if (fb > fa) {
    let tmp = a;
    a = b;
    b = tmp;
    tmp = fa;
    fa = fb;
    fb = tmp;
  }
  let c = b + GOLDEN * (b - a);
  let fc = g(c);
  let steps = 0;
  while (fc < fb && steps < maxSteps) {
    steps++;
    // Vertex u of the parabola through (a, fa), (b, fb), (c, fc).
    const r = (b - a) * (fb - fc);
    const q = (b - c) * (fb - fa);
    let denom = q - r;
    if (Math.abs(denom) < TINY) denom = denom >= 0 ? TINY : -TINY;
    let u = b - ((b - c) * q - (b - a) * r) / (2 * denom);
    const limit = c + growLimit * (c - b);
    let fu: number;
    if ((b - u) * (u - c) > 0) {
      // Vertex between b and c: it may close the bracket at once.
      fu = g(u);
      if (fu < fc) {
        a = b;
        fa = fb;
        b = u;
        fb = fu;
        break;
      }
      if (fu > fb) {
        c = u;
        fc = fu;
        break;
      }
      u = c + GOLDEN * (c - b);
      fu = g(u);
    } else if ((c - u) * (u - limit) > 0) {
      // Vertex beyond c but within the growth limit.
      fu = g(u);
      if (fu < fc) {
        b = c;
        fb = fc;
        c = u;
        fc = fu;
        u = c + GOLDEN * (c - b);
        fu = g(u);
      }
    } else if ((u - limit) * (limit - c) >= 0) {
      u = limit;
      fu = g(u);
    } else {
      // Vertex behind us or not a number: plain golden step.
      u = c + GOLDEN * (c - b);
      fu = g(u);
    }
    a = b;
    fa = fb;
    b = c;
    fb = fc;
    c = u;
    fc = fu;
  }
  out.a = a;
  out.b = b;
  out.c = c;
  out.fa = fa;
  out.fb = fb;
  out.fc = fc;
  out.ok = !(fc < fb);
  return out;
}

/** Abscissa and value of a one-dimensional minimum. */
export interface LinePoint {
  t: number;
  value: number;
}

/**
 * Brent's method: minimum of g inside a bracket.
 * @param g - function of one variable
 * @param bracket - a closed bracket (`ok`), e.g. from `bracketMinimum`
 * @param tolAbs - absolute tolerance on t (> 0)
 * @param tolRel - relative tolerance on t (default 1.5e-8, about sqrt of double epsilon)
 * @param maxIterations - iteration limit (default 100)
 * @param out - receives the result
 * @returns `out` with the lowest point found (never above bracket.fb)
 */
export function brentMinimize(
  g: (t: number) => number,
  bracket: Bracket,
  tolAbs: number,
  tolRel = 1.5e-8,
  maxIterations = 100,
  out: LinePoint = { t: 0, value: 0 },
): LinePoint {
  let lo = Math.min(bracket.a, bracket.c);
  let hi = Math.max(bracket.a, bracket.c);
  let x = bracket.b;
  let w = x;
  let v = x;
  let fx = bracket.fb;
  let fw = fx;
  let fv = fx;
  let d = 0; // last step
  let e = 0; // step before last
  for (let iter = 0; iter < maxIterations; iter++) {
    const mid = 0.5 * (lo + hi);
    const tol1 = tolRel * Math.abs(x) + tolAbs;
    const tol2 = 2 * tol1;
    if (Math.abs(x - mid) <= tol2 - 0.5 * (hi - lo)) break;
    let parabolic = false;
    if (Math.abs(e) > tol1) {
      // Parabola through x, w, v; step p / q from x to its vertex.
      const r = (x - w) * (fx - fv);
      let q = (x - v) * (fx - fw);
      let p = (x - v) * q - (x - w) * r;
      q = 2 * (q - r);
      if (q > 0) p = -p;
      else q = -q;
      const eOld = e;
      e = d;
      // Accept only a step that is less than half the one before last and stays inside.
      if (Math.abs(p) < Math.abs(0.5 * q * eOld) && p > q * (lo - x) && p < q * (hi - x)) {
        d = p / q;
        const u = x + d;
        if (u - lo < tol2 || hi - u < tol2) d = mid >= x ? tol1 : -tol1;
        parabolic = true;
      }
    }
    if (!parabolic) {
      e = x >= mid ? lo - x : hi - x;
      d = GOLDEN_SECTION * e;
    }
    const u = Math.abs(d) >= tol1 ? x + d : x + (d >= 0 ? tol1 : -tol1);
    const fu = g(u);
    if (fu <= fx) {
      if (u >= x) lo = x;
      else hi = x;
      v = w;
      fv = fw;
      w = x;
      fw = fx;
      x = u;
      fx = fu;
    } else {
      if (u < x) lo = u;
      else hi = u;
      if (fu <= fw || w === x) {
        v = w;
        fv = fw;
        w = u;
        fw = fu;
      } else if (fu <= fv || v === x || v === w) {
        v = u;
        fv = fu;
      }
    }
  }
  out.t = x;
  out.value = fx;
  return out;
}

/** Reusable scratch for `lineMinimize`. */
export interface LineScratch {
  trial: Float64Array;
  bracket: Bracket;
  point: LinePoint;
}

/** Scratch buffers for line searches in n dimensions. */
export function createLineScratch(n: number): LineScratch {
  return { trial: new Float64Array(n), bracket: createBracket(), point: { t: 0, value: 0 } };
}

/**
 * Minimise f along `direction` from `origin` and move `origin` to the minimum.
 * @param ev - evaluator of f (counts the budget, keeps the best point)
 * @param origin - start point; updated in place to origin + t* · direction
 * @param direction - search direction (its length sets the first trial step, t = 1)
 * @param f0 - f(origin), already known
 * @param tolAbs - tolerance on t
 * @param maxIterations - Brent iteration limit
 * @param scratch - buffers from `createLineScratch(n)`
 * @returns the new value f(origin), never above f0
 */
export function lineMinimize(
  ev: Evaluator,
  origin: Float64Array,
  direction: Float64Array,
  f0: number,
  tolAbs: number,
  maxIterations: number,
  scratch: LineScratch,
): number {
  const n = origin.length;
  const trial = scratch.trial;
  const g = (t: number): number => {
    for (let i = 0; i < n; i++) trial[i] = origin[i] + t * direction[i];
    return ev.evaluate(trial);
  };
  const f1 = g(1);
  const br = bracketMinimum(g, 0, 1, f0, f1, scratch.bracket);
  let t: number;
  let value: number;
  if (!br.ok) {
    t = br.c;
    value = br.fc;
  } else {
    const p = brentMinimize(g, br, tolAbs, 1.5e-8, maxIterations, scratch.point);
    t = p.t;
    value = p.value;
  }
  if (!(value < f0)) return f0;
  for (let i = 0; i < n; i++) origin[i] += t * direction[i];
  return value;
}
