/**
 * Tolerance checks that report the first failing index and both values (as gl-matrix's do),
 * instead of a bare boolean.
 */
import { expect } from "vitest";

type Numeric = ArrayLike<number> | readonly (readonly number[])[];

function flatten(a: Numeric): number[] {
  const out: number[] = [];
  for (let i = 0; i < a.length; i++) {
    const v = (a as ArrayLike<unknown>)[i];
    if (typeof v === "number") out.push(v);
    else out.push(...(v as number[]));
  }
  return out;
}

/** Assert |actual[i] - expected[i]| <= tol for all i (arrays or nested rows). */
export function expectAllClose(actual: Numeric, expected: Numeric, tol: number, what = "value"): void {
  const a = flatten(actual);
  const e = flatten(expected);
  expect(a.length, `${what}: length`).toBe(e.length);
  for (let i = 0; i < a.length; i++) {
    const ok = Math.abs(a[i] - e[i]) <= tol || (Number.isNaN(a[i]) && Number.isNaN(e[i]));
    if (!ok) {
      expect.fail(`${what}[${i}]: got ${a[i]}, expected ${e[i]} (tolerance ${tol})`);
    }
  }
}

/** Largest absolute difference between two numeric arrays. */
export function maxAbsDifference(a: Numeric, b: Numeric): number {
  const x = flatten(a);
  const y = flatten(b);
  let d = 0;
  for (let i = 0; i < x.length; i++) d = Math.max(d, Math.abs(x[i] - y[i]));
  return d;
}

/** Flatten nested rows into one list. */
export function flat(rows: readonly (readonly number[])[]): number[] {
  return rows.flatMap((r) => [...r]);
}
