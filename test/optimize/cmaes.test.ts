// Behaviour of cmaes() (Hansen 2016): seeding, bounds, global search. Minima closed form.
import { describe, expect, test } from "vitest";
import { CoxaError } from "../../src/common/errors.js";
import { Rng } from "../../src/common/random.js";
import { cmaes } from "../../src/optimize/cmaes.js";
import { rosenbrock } from "./mgh-functions.js";

/** Rastrigin (1974) function: many local minima on the integer grid, global minimum 0 at 0. */
const rastrigin = (x: Float64Array): number => {
  let s = 10 * x.length;
  for (let i = 0; i < x.length; i++) s += x[i] * x[i] - 10 * Math.cos(2 * Math.PI * x[i]);
  return s;
};

describe("cmaes(f, x0, options)", () => {
  test("the same seed reproduces the run exactly; another seed takes another path", () => {
    const run = (seed: number) =>
      cmaes(rosenbrock.f, rosenbrock.start, { rng: new Rng(seed), maxEvaluations: 300 });
    const a = run(11);
    const b = run(11);
    const c = run(12);
    expect(Array.from(a.x)).toEqual(Array.from(b.x));
    expect(a.trace).toEqual(b.trace);
    expect(a.evaluations).toBe(300);
    expect(c.trace).not.toEqual(a.trace);
  });

  test("with bounds the result is the box projection of an outside minimum (closed form (1, -1, 0))", () => {
    // f = (x - 3)^2 + (y + 2)^2 + z^2 on [-1, 1]^3: the constrained minimum is (1, -1, 0), f = 5.
    const f = (x: Float64Array) => (x[0] - 3) ** 2 + (x[1] + 2) ** 2 + x[2] ** 2;
    const seen: number[][] = [];
    const r = cmaes(
      (x) => {
        seen.push(Array.from(x));
        return f(x);
      },
      [0, 0, 0],
      {
        rng: new Rng(3),
        bounds: { lower: [-1, -1, -1], upper: [1, 1, 1] },
        tolerances: { x: 1e-10, fRelative: 1e-14, fAbsolute: 1e-16 },
        maxEvaluations: 20000,
      },
    );
    expect(r.x[0]).toBe(1);
    expect(r.x[1]).toBe(-1);
    expect(Math.abs(r.x[2])).toBeLessThan(1e-6);
    expect(r.value).toBeCloseTo(5, 10);
    // f is only ever evaluated inside the box.
    for (const x of seen) for (const v of x) expect(Math.abs(v)).toBeLessThanOrEqual(1);
  });

  test("a start outside the bounds is projected into them first", () => {
    const first: number[] = [];
    cmaes(
      (x) => {
        if (first.length === 0) first.push(...x);
        return x[0] ** 2 + x[1] ** 2;
      },
      [10, -10],
      { rng: new Rng(1), bounds: { lower: [-2, -2], upper: [2, 2] }, maxEvaluations: 50 },
    );
    expect(first).toEqual([2, -2]);
  });

  test("finds the global minimum of the 2-D Rastrigin function with λ = 100 in at least 9 of 10 seeds", () => {
    let solved = 0;
    for (let seed = 1; seed <= 10; seed++) {
      const r = cmaes(rastrigin, [3.3, 3.3], {
        rng: new Rng(seed),
        populationSize: 100,
        bounds: { lower: [-5.12, -5.12], upper: [5.12, 5.12] },
        tolerances: { x: 1e-9, fRelative: 1e-12, fAbsolute: 1e-14 },
        maxEvaluations: 50000,
      });
      if (r.value < 1e-8 && Math.hypot(r.x[0], r.x[1]) < 1e-4) solved++;
    }
    expect(solved).toBeGreaterThanOrEqual(9);
  });

  test("scales let one sigma cover parameters of different units", () => {
    // Minimum at (500, 0.5): a translation-like and a rotation-like coordinate.
    const f = (x: Float64Array) => ((x[0] - 500) / 100) ** 2 + ((x[1] - 0.5) / 0.01) ** 2;
    const r = cmaes(f, [0, 0], { rng: new Rng(2), scales: [100, 0.01], sigma: 2, tolerances: { x: 1e-8 } });
    expect(Math.abs(r.x[0] - 500)).toBeLessThan(1e-4);
    expect(Math.abs(r.x[1] - 0.5)).toBeLessThan(1e-8);
    expect(r.converged).toBe(true);
  });

  test("trace is the best value per generation, non-increasing", () => {
    const r = cmaes(rosenbrock.f, rosenbrock.start, { rng: new Rng(5), maxEvaluations: 2000 });
    expect(r.trace.length).toBe(r.iterations);
    for (let i = 1; i < r.trace.length; i++) expect(r.trace[i]).toBeLessThanOrEqual(r.trace[i - 1]);
    expect(r.trace[r.trace.length - 1]).toBe(r.value);
  });

  test("rejects a missing rng, inverted bounds and a population below 2", () => {
    const f = (x: Float64Array) => x[0] ** 2;
    expect(() => cmaes(f, [1], {} as never)).toThrow(CoxaError);
    expect(() => cmaes(f, [1], { rng: new Rng(1), bounds: { lower: [1], upper: [0] } })).toThrow(
      /lower < upper/,
    );
    expect(() => cmaes(f, [1], { rng: new Rng(1), populationSize: 1 })).toThrow(/population/);
  });
});
