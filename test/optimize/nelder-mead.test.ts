// Behaviour of nelderMead(): coefficients, restarts, budget, invalid input. Minima closed form.
import { describe, expect, test } from "vitest";
import { CoxaError } from "../../src/common/errors.js";
import { nelderMead } from "../../src/optimize/nelder-mead.js";
import { rosenbrock } from "./mgh-functions.js";

/** f(x) = Σ (i + 1) (x_i - 0.5)²: minimum 0 at x = 0.5 (closed form). */
const weightedSphere = (x: Float64Array): number => {
  let s = 0;
  for (let i = 0; i < x.length; i++) s += (i + 1) * (x[i] - 0.5) ** 2;
  return s;
};

/**
 * McKinnon (1998), "Convergence of the Nelder-Mead simplex method to a nonstationary point",
 * SIAM J. Optim. 9(1): f(x, y) = θ φ |x|^τ + y + y² for x <= 0, θ x^τ + y + y² for x > 0 with
 * τ = 2, θ = 6, φ = 60; the paper's start simplex (0, 0), (1, 1), ((1+√33)/8, (1-√33)/8) makes
 * standard Nelder-Mead shrink onto (0, 0), which is not stationary; the minimum is
 * f(0, -0.5) = -0.25.
 */
const mckinnon = (v: Float64Array): number => {
  const [x, y] = [v[0], v[1]];
  const tau = 2;
  const theta = 6;
  const phi = 60;
  return (x <= 0 ? theta * phi * Math.abs(x) ** tau : theta * x ** tau) + y + y * y;
};

describe("nelderMead(f, x0, options)", () => {
  test("standard and adaptive coefficients both reach the 12-D weighted sphere minimum (0 at 0.5)", () => {
    for (const adaptive of [false, true]) {
      const r = nelderMead(weightedSphere, new Float64Array(12), {
        adaptive,
        tolerances: { x: 1e-8, fRelative: 1e-12, fAbsolute: 1e-16 },
        maxEvaluations: 50000,
      });
      expect(r.value).toBeLessThan(1e-12);
      for (let i = 0; i < 12; i++) expect(Math.abs(r.x[i] - 0.5)).toBeLessThan(1e-5);
    }
  });

  test("McKinnon's start collapses onto (0, 0); a restart reaches the minimum -0.25 at (0, -0.5)", () => {
    const s33 = Math.sqrt(33);
    const simplex = [
      [0, 0],
      [1, 1],
      [(1 + s33) / 8, (1 - s33) / 8],
    ];
    const options = {
      simplex,
      tolerances: { x: 1e-9, fRelative: 1e-12, fAbsolute: 1e-14 },
      maxEvaluations: 20000,
    };
    const once = nelderMead(mckinnon, [0, 0], options);
    // The failure McKinnon (1998) proves: convergence to the non-stationary point (0, 0), f = 0.
    expect(Math.hypot(once.x[0], once.x[1])).toBeLessThan(1e-6);
    expect(once.value).toBeGreaterThan(-1e-9);
    const restarted = nelderMead(mckinnon, [0, 0], { ...options, restarts: 3 });
    expect(restarted.value).toBeCloseTo(-0.25, 9);
    expect(Math.abs(restarted.x[0])).toBeLessThan(1e-4);
    expect(Math.abs(restarted.x[1] + 0.5)).toBeLessThan(1e-4);
    expect(restarted.reason).toMatch(/restart/);
  });

  test("rejects an initial simplex with the wrong number of vertices", () => {
    expect(() =>
      nelderMead(mckinnon, [0, 0], {
        simplex: [
          [0, 0],
          [1, 1],
        ],
      }),
    ).toThrow(/3 vertices/);
  });

  test("never exceeds maxEvaluations, trace non-increasing and per iteration", () => {
    let calls = 0;
    const r = nelderMead(
      (x) => {
        calls++;
        return rosenbrock.f(x);
      },
      rosenbrock.start,
      { maxEvaluations: 50 },
    );
    expect(calls).toBeLessThanOrEqual(50);
    expect(r.evaluations).toBe(calls);
    expect(r.converged).toBe(false);
    expect(r.reason).toMatch(/budget/);
    expect(r.trace.length).toBe(r.iterations);
    for (let i = 1; i < r.trace.length; i++) expect(r.trace[i]).toBeLessThanOrEqual(r.trace[i - 1]);
  });

  test("one dimension: minimum of (x + 4)^2 + 1 at x = -4", () => {
    const r = nelderMead((x) => (x[0] + 4) ** 2 + 1, [10], { tolerances: { x: 1e-9 } });
    expect(Math.abs(r.x[0] + 4)).toBeLessThan(1e-7);
    expect(r.value).toBeCloseTo(1, 12);
  });

  test("returning false from onIteration stops the run", () => {
    const r = nelderMead(rosenbrock.f, rosenbrock.start, { onIteration: (info) => info.iteration < 5 });
    expect(r.iterations).toBe(5);
    expect(r.reason).toBe("stopped by caller");
  });

  test("rejects scales of the wrong length with BAD_ARGUMENT", () => {
    expect(() => nelderMead(rosenbrock.f, [1, 2], { scales: [1, 2, 3] })).toThrow(CoxaError);
  });
});
