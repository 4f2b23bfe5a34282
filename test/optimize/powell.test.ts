// Behaviour of powell(): scaling, budget, caller stop, invalid input. Minima are closed form.
import { describe, expect, test } from "vitest";
import { CoxaError } from "../../src/common/errors.js";
import { Rng } from "../../src/common/random.js";
import { powell } from "../../src/optimize/powell.js";
import { rosenbrock } from "./mgh-functions.js";

/** f(x) = Σ λ_i (q_i · (x - 1))², a rotated ellipsoid with condition number 1e4 (minimum 0 at x = 1). */
function rotatedEllipsoid(n: number, seed: number): (x: Float64Array) => number {
  const rng = new Rng(seed);
  const q: number[][] = [];
  for (let i = 0; i < n; i++) {
    let v = Array.from({ length: n }, () => rng.normal());
    for (const u of q) {
      const d = v.reduce((s, x, k) => s + x * u[k], 0);
      v = v.map((x, k) => x - d * u[k]);
    }
    const norm = Math.hypot(...v);
    q.push(v.map((x) => x / norm));
  }
  const lambda = Array.from({ length: n }, (_, i) => 10 ** ((4 * i) / (n - 1)));
  return (x) => {
    let s = 0;
    for (let i = 0; i < n; i++) {
      let d = 0;
      for (let k = 0; k < n; k++) d += q[i][k] * (x[k] - 1);
      s += lambda[i] * d * d;
    }
    return s;
  };
}

describe("powell(f, x0, options)", () => {
  test("minimises a rotated 6-D ellipsoid of condition 1e4 (closed form: 0 at x = 1)", () => {
    const f = rotatedEllipsoid(6, 5);
    const r = powell(f, new Float64Array(6), {
      tolerances: { fRelative: 1e-14, fAbsolute: 1e-20, x: 1e-10 },
    });
    expect(r.value).toBeLessThan(1e-12);
    for (let i = 0; i < 6; i++) expect(Math.abs(r.x[i] - 1)).toBeLessThan(1e-5);
    expect(r.converged).toBe(true);
  });

  test("scales make a badly scaled problem cheap: f = ((x - 3000)/1000)^2 + (y - 2)^2", () => {
    const f = (x: Float64Array) => ((x[0] - 3000) / 1000) ** 2 + (x[1] - 2) ** 2;
    const scaled = powell(f, [0, 0], { scales: [1000, 1], tolerances: { x: 1e-9 } });
    expect(Math.abs(scaled.x[0] - 3000)).toBeLessThan(1e-5);
    expect(Math.abs(scaled.x[1] - 2)).toBeLessThan(1e-8);
    expect(scaled.evaluations).toBeLessThan(60);
  });

  test("never exceeds maxEvaluations and says so", () => {
    let calls = 0;
    const f = (x: Float64Array) => {
      calls++;
      return rosenbrock.f(x);
    };
    const r = powell(f, rosenbrock.start, { maxEvaluations: 37 });
    expect(calls).toBe(37);
    expect(r.evaluations).toBe(37);
    expect(r.converged).toBe(false);
    expect(r.reason).toMatch(/budget/);
    expect(r.value).toBe(rosenbrock.f(r.x));
  });

  test("trace is non-increasing, one entry per iteration, ending at the result", () => {
    const r = powell(rosenbrock.f, rosenbrock.start, { tolerances: { x: 1e-9 } });
    expect(r.trace.length).toBe(r.iterations);
    for (let i = 1; i < r.trace.length; i++) expect(r.trace[i]).toBeLessThanOrEqual(r.trace[i - 1]);
    expect(r.trace[r.trace.length - 1]).toBe(r.value);
    expect(r.value).toBeLessThan(rosenbrock.startValue);
  });

  test("onIteration sees counts and best value, and returning false stops the run", () => {
    const seen: number[] = [];
    const r = powell(rosenbrock.f, rosenbrock.start, {
      onIteration: (info) => {
        seen.push(info.bestValue);
        expect(info.evaluations).toBeGreaterThan(0);
        expect(rosenbrock.f(Float64Array.from(info.bestX))).toBe(info.bestValue);
        return info.iteration < 2;
      },
    });
    expect(seen.length).toBe(2);
    expect(r.iterations).toBe(2);
    expect(r.reason).toBe("stopped by caller");
    expect(r.converged).toBe(false);
  });

  test("NaN and Infinity count as +Infinity: minimum of (x - 1)^2 where x < 0 gives NaN", () => {
    const f = (x: Float64Array) => (x[0] < 0 ? Number.NaN : (x[0] - 1) ** 2 + (x[1] + 2) ** 2);
    const r = powell(f, [5, 5], { tolerances: { x: 1e-10 } });
    expect(Math.abs(r.x[0] - 1)).toBeLessThan(1e-7);
    expect(Math.abs(r.x[1] + 2)).toBeLessThan(1e-7);
  });

  test("rejects an empty start, a non-finite start and non-positive scales with BAD_ARGUMENT", () => {
    const f = (x: Float64Array) => x[0];
    for (const bad of [
      () => powell(f, []),
      () => powell(f, [Number.NaN]),
      () => powell(f, [1, 2], { scales: [1, 0] }),
      () => powell(f, [1, 2], { scales: [1] }),
      () => powell(f, [1], { maxEvaluations: 0 }),
      () => powell(f, [1], { tolerances: { x: -1 } }),
    ]) {
      expect(bad).toThrow(CoxaError);
      try {
        bad();
      } catch (err) {
        expect((err as CoxaError).code).toBe("BAD_ARGUMENT");
      }
    }
  });

  test("returns a copy: changing the result does not change a later run", () => {
    const x0 = [-1.2, 1];
    const a = powell(rosenbrock.f, x0, { maxEvaluations: 200 });
    a.x[0] = 99;
    const b = powell(rosenbrock.f, x0, { maxEvaluations: 200 });
    expect(b.x[0]).not.toBe(99);
    expect(x0).toEqual([-1.2, 1]);
  });
});
