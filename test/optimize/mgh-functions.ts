/**
 * Test problems of Moré, Garbow & Hillstrom (1981), "Testing unconstrained optimization
 * software", ACM TOMS 7(1):17-41, written as sums of squares of their residuals f_i exactly as
 * the paper states them, with the paper's standard starting points, the value there, and the
 * known minimiser and minimum.
 */

export interface TestProblem {
  /** Name and number in Moré, Garbow & Hillstrom (1981). */
  name: string;
  f: (x: Float64Array) => number;
  start: number[];
  /** f at the start point as given in the paper. */
  startValue: number;
  minimizer: number[];
  minimum: number;
}

/** (1) Rosenbrock: f1 = 10 (x2 - x1²), f2 = 1 - x1; x0 = (-1.2, 1); f = 0 at (1, 1). */
export const rosenbrock: TestProblem = {
  name: "Rosenbrock (MGH 1)",
  f: (x) => {
    const f1 = 10 * (x[1] - x[0] * x[0]);
    const f2 = 1 - x[0];
    return f1 * f1 + f2 * f2;
  },
  start: [-1.2, 1],
  startValue: 24.2,
  minimizer: [1, 1],
  minimum: 0,
};

/**
 * (7) Helical valley: f1 = 10 (x3 - 10 θ), f2 = 10 (sqrt(x1² + x2²) - 1), f3 = x3, with
 * 2π θ = arctan(x2 / x1) for x1 > 0 and arctan(x2 / x1) + π for x1 < 0 (the limit ±π/2 at
 * x1 = 0); x0 = (-1, 0, 0) where f = 2500; f = 0 at (1, 0, 0).
 */
export const helicalValley: TestProblem = {
  name: "helical valley (MGH 7)",
  f: (x) => {
    let theta: number;
    if (x[0] > 0) theta = Math.atan(x[1] / x[0]) / (2 * Math.PI);
    else if (x[0] < 0) theta = Math.atan(x[1] / x[0]) / (2 * Math.PI) + 0.5;
    else theta = x[1] >= 0 ? 0.25 : -0.25;
    const f1 = 10 * (x[2] - 10 * theta);
    const f2 = 10 * (Math.sqrt(x[0] * x[0] + x[1] * x[1]) - 1);
    const f3 = x[2];
    return f1 * f1 + f2 * f2 + f3 * f3;
  },
  start: [-1, 0, 0],
  startValue: 2500,
  minimizer: [1, 0, 0],
  minimum: 0,
};

/**
 * (13) Powell singular: f1 = x1 + 10 x2, f2 = sqrt(5) (x3 - x4), f3 = (x2 - 2 x3)²,
 * f4 = sqrt(10) (x1 - x4)²; x0 = (3, -1, 0, 1) where f = 215; f = 0 at the origin (the
 * Hessian there is singular, so convergence is slow by design).
 */
export const powellSingular: TestProblem = {
  name: "Powell singular (MGH 13)",
  f: (x) => {
    const f1 = x[0] + 10 * x[1];
    const f2 = Math.sqrt(5) * (x[2] - x[3]);
    const f3 = (x[1] - 2 * x[2]) ** 2;
    const f4 = Math.sqrt(10) * (x[0] - x[3]) ** 2;
    return f1 * f1 + f2 * f2 + f3 * f3 + f4 * f4;
  },
  start: [3, -1, 0, 1],
  startValue: 215,
  minimizer: [0, 0, 0, 0],
  minimum: 0,
};

/**
 * (5) Beale: f_i = y_i - x1 (1 - x2^i), y = (1.5, 2.25, 2.625); x0 = (1, 1) where
 * f = 14.203125; f = 0 at (3, 0.5).
 */
export const beale: TestProblem = {
  name: "Beale (MGH 5)",
  f: (x) => {
    const y = [1.5, 2.25, 2.625];
    let s = 0;
    for (let i = 1; i <= 3; i++) {
      const r = y[i - 1] - x[0] * (1 - x[1] ** i);
      s += r * r;
    }
    return s;
  },
  start: [1, 1],
  startValue: 14.203125,
  minimizer: [3, 0.5],
  minimum: 0,
};

/**
 * (14) Wood: f1 = 10 (x2 - x1²), f2 = 1 - x1, f3 = sqrt(90) (x4 - x3²), f4 = 1 - x3,
 * f5 = sqrt(10) (x2 + x4 - 2), f6 = (x2 - x4) / sqrt(10); x0 = (-3, -1, -3, -1) where
 * f = 19192; f = 0 at (1, 1, 1, 1).
 */
export const wood: TestProblem = {
  name: "Wood (MGH 14)",
  f: (x) => {
    const f1 = 10 * (x[1] - x[0] * x[0]);
    const f2 = 1 - x[0];
    const f3 = Math.sqrt(90) * (x[3] - x[2] * x[2]);
    const f4 = 1 - x[2];
    const f5 = Math.sqrt(10) * (x[1] + x[3] - 2);
    const f6 = (x[1] - x[3]) / Math.sqrt(10);
    return f1 * f1 + f2 * f2 + f3 * f3 + f4 * f4 + f5 * f5 + f6 * f6;
  },
  start: [-3, -1, -3, -1],
  startValue: 19192,
  minimizer: [1, 1, 1, 1],
  minimum: 0,
};

/** Largest |x_i - y_i|. */
export function maxDistance(x: ArrayLike<number>, y: ArrayLike<number>): number {
  let d = 0;
  for (let i = 0; i < x.length; i++) d = Math.max(d, Math.abs(x[i] - y[i]));
  return d;
}
