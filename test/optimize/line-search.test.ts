// Bracketing and Brent's one-dimensional minimiser (Brent 1973, ch. 5) against closed-form
// minima of smooth functions.
import { describe, expect, test } from "vitest";
import {
  bracketMinimum,
  brentMinimize,
  createBracket,
  createLineScratch,
  lineMinimize,
} from "../../src/optimize/line-search.js";
import { Evaluator } from "../../src/optimize/objective.js";

describe("bracketMinimum(g, a, b)", () => {
  test("closes a bracket around the minimum of (t - 7)^2 starting at 0, 1 (closed form: t* = 7)", () => {
    const g = (t: number) => (t - 7) ** 2;
    const br = bracketMinimum(g, 0, 1, g(0), g(1), createBracket());
    expect(br.ok).toBe(true);
    expect(Math.min(br.a, br.c)).toBeLessThan(7);
    expect(Math.max(br.a, br.c)).toBeGreaterThan(7);
    expect(br.fb).toBeLessThanOrEqual(br.fa);
    expect(br.fb).toBeLessThanOrEqual(br.fc);
    expect(br.fa).toBe(g(br.a));
    expect(br.fc).toBe(g(br.c));
  });

  test("walks the other way when the first step goes uphill (minimum at t = -3)", () => {
    const g = (t: number) => (t + 3) ** 2 + 1;
    const br = bracketMinimum(g, 0, 1, g(0), g(1), createBracket());
    expect(br.ok).toBe(true);
    expect(Math.min(br.a, br.c)).toBeLessThan(-3);
    expect(Math.max(br.a, br.c)).toBeGreaterThan(-3);
  });

  test("reports ok = false on an unbounded slope (g = -t) within the step limit", () => {
    const g = (t: number) => -t;
    const br = bracketMinimum(g, 0, 1, 0, -1, createBracket(), 5);
    expect(br.ok).toBe(false);
    expect(br.fc).toBeLessThan(br.fb);
  });

  test("treats +Infinity as a wall: g = t^2 for t < 2, Infinity beyond", () => {
    const g = (t: number) => (t < 2 ? (t - 1.5) ** 2 : Number.POSITIVE_INFINITY);
    const br = bracketMinimum(g, 0, 0.5, g(0), g(0.5), createBracket());
    expect(br.ok).toBe(true);
    expect(Math.max(br.a, br.c)).toBeGreaterThan(1.5);
  });
});

describe("brentMinimize(g, bracket, tol)", () => {
  test("finds t* = 7 of (t - 7)^2 to the tolerance", () => {
    const g = (t: number) => (t - 7) ** 2;
    const br = bracketMinimum(g, 0, 1, g(0), g(1), createBracket());
    const p = brentMinimize(g, br, 1e-9);
    expect(Math.abs(p.t - 7)).toBeLessThan(1e-7);
    expect(p.value).toBeLessThan(1e-14);
  });

  test("finds the minimum of cos(t) on [2, 4] at t = π (closed form)", () => {
    const br = createBracket();
    br.a = 2;
    br.b = 3;
    br.c = 4;
    br.fa = Math.cos(2);
    br.fb = Math.cos(3);
    br.fc = Math.cos(4);
    const p = brentMinimize(Math.cos, br, 1e-10);
    expect(Math.abs(p.t - Math.PI)).toBeLessThan(1e-7);
    expect(p.value).toBeCloseTo(-1, 12);
  });

  test("finds the non-smooth minimum of |t - 0.3| + 2 to the tolerance", () => {
    const g = (t: number) => Math.abs(t - 0.3) + 2;
    const br = bracketMinimum(g, -1, 0, g(-1), g(0), createBracket());
    const p = brentMinimize(g, br, 1e-8);
    expect(Math.abs(p.t - 0.3)).toBeLessThan(1e-6);
  });
});

describe("lineMinimize(ev, origin, direction)", () => {
  test("moves the origin to the minimum along the direction and never raises the value", () => {
    // f(x, y) = (x - 2)^2 + (y + 1)^2; from (0, 5) along (1, 0) the minimum is (2, 5).
    const f = (x: Float64Array) => (x[0] - 2) ** 2 + (x[1] + 1) ** 2;
    const origin = Float64Array.from([0, 5]);
    const ev = new Evaluator(f, origin, 1000);
    const f0 = ev.evaluate(origin);
    const value = lineMinimize(ev, origin, Float64Array.from([1, 0]), f0, 1e-10, 100, createLineScratch(2));
    // With f(2, 5) = 36 the value resolves x only to about sqrt(double epsilon) relative.
    expect(origin[0]).toBeCloseTo(2, 6);
    expect(origin[1]).toBe(5);
    expect(value).toBeCloseTo(36, 12);
    expect(value).toBeLessThanOrEqual(f0);
  });

  test("stays put when every step along the direction is worse (origin at the minimum)", () => {
    const f = (x: Float64Array) => x[0] * x[0];
    const origin = Float64Array.from([0]);
    const ev = new Evaluator(f, origin, 1000);
    const value = lineMinimize(ev, origin, Float64Array.from([1]), 0, 1e-10, 100, createLineScratch(1));
    expect(value).toBe(0);
    expect(Math.abs(origin[0])).toBeLessThan(1e-9);
  });
});
