// multiStart(): a local optimiser trapped in the wrong basin of a two-well function, rescued
// by seeded starts. The function is closed form: min(|x - a|², |x - b|² + 1) has its global
// minimum 0 at a and a local minimum 1 at b.
import { describe, expect, test } from "vitest";
import { CoxaError } from "../../src/common/errors.js";
import { Rng } from "../../src/common/random.js";
import { multiStart } from "../../src/optimize/multistart.js";
import { powell } from "../../src/optimize/powell.js";

const a = [4, -3, 2];
const b = [-5, 6, -1];
const twoWell = (x: Float64Array): number => {
  let da = 0;
  let db = 0;
  for (let i = 0; i < 3; i++) {
    da += (x[i] - a[i]) ** 2;
    db += (x[i] - b[i]) ** 2;
  }
  return Math.min(da, db + 1);
};
const local = (f: (x: Float64Array) => number, x: Float64Array) => powell(f, x, { tolerances: { x: 1e-9 } });

describe("multiStart(f, x0, local, options)", () => {
  test("Powell alone from b stays in the local well (value 1)", () => {
    expect(local(twoWell, Float64Array.from(b)).value).toBeCloseTo(1, 9);
  });

  test("20 seeded starts within b ± 10 reach the global minimum 0 at a in at least 9 of 10 seeds", () => {
    let solved = 0;
    for (let seed = 1; seed <= 10; seed++) {
      const r = multiStart(twoWell, b, local, { rng: new Rng(seed), spread: [10, 10, 10], starts: 20 });
      expect(r.runs.length).toBe(20);
      expect(r.evaluations).toBe(r.runs.reduce((s, run) => s + run.evaluations, 0));
      expect(r.runs[r.bestRun].value).toBe(r.value);
      if (r.value < 1e-12 && Math.max(...a.map((v, i) => Math.abs(r.x[i] - v))) < 1e-6) solved++;
    }
    expect(solved).toBeGreaterThanOrEqual(9);
  });

  test("screening evaluates every candidate once and starts local runs from the lowest ones", () => {
    const calls: { x: number[]; v: number }[] = [];
    const f = (x: Float64Array) => {
      const v = twoWell(x);
      calls.push({ x: Array.from(x), v });
      return v;
    };
    const starts: number[][] = [];
    const r = multiStart(
      f,
      b,
      (g, x) => {
        starts.push(Array.from(x));
        return local(g, x);
      },
      { rng: new Rng(3), spread: [10, 10, 10], starts: 3, candidates: 50 },
    );
    const screened = calls.slice(0, 50).sort((p, q) => p.v - q.v);
    expect(starts).toEqual(screened.slice(0, 3).map((c) => c.x));
    expect(r.evaluations).toBe(calls.length);
  });

  test("starts include x0 first and stay within x0 ± spread, clipped to bounds", () => {
    const starts: number[][] = [];
    multiStart(
      twoWell,
      b,
      (f, x) => {
        starts.push(Array.from(x));
        return local(f, x);
      },
      { rng: new Rng(4), spread: [2, 2, 2], starts: 6, bounds: { lower: [-6, 5, -10], upper: [10, 10, 10] } },
    );
    expect(starts.length).toBe(6);
    expect(starts[0]).toEqual(b);
    for (const s of starts) {
      for (let i = 0; i < 3; i++) expect(Math.abs(s[i] - b[i])).toBeLessThanOrEqual(2);
      expect(s[1]).toBeGreaterThanOrEqual(5);
    }
  });

  test("the same seed gives the same runs; onRun returning false stops early", () => {
    const opts = { spread: [10, 10, 10], starts: 5 };
    const x = multiStart(twoWell, b, local, { ...opts, rng: new Rng(9) });
    const y = multiStart(twoWell, b, local, { ...opts, rng: new Rng(9) });
    expect(x.runs.map((r) => Array.from(r.start))).toEqual(y.runs.map((r) => Array.from(r.start)));
    const stopped = multiStart(twoWell, b, local, {
      ...opts,
      rng: new Rng(9),
      onRun: (info) => info.run < 2,
    });
    expect(stopped.runs.length).toBe(2);
    expect(stopped.trace.length).toBe(2);
  });

  test("rejects a spread of the wrong length and zero starts", () => {
    expect(() => multiStart(twoWell, b, local, { rng: new Rng(1), spread: [1, 1] })).toThrow(CoxaError);
    expect(() => multiStart(twoWell, b, local, { rng: new Rng(1), spread: [1, 1, 1], starts: 0 })).toThrow(
      /starts/,
    );
  });
});
