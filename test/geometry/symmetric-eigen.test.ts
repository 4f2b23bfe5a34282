// symmetricEigen (cyclic Jacobi) against numpy.linalg.eigvalsh (fixture from
// scripts/make-fixtures-geometry.py, numpy 1.24) and the defining identity A v = λ v.
import { readFileSync } from "node:fs";
import { describe, expect, test } from "vitest";
import { symmetricEigen } from "../../src/geometry/symmetric-eigen.js";
import { expectAllClose } from "../helpers/close.js";

const ref = JSON.parse(readFileSync(new URL("../fixtures/geometry/reference.json", import.meta.url), "utf8"));

describe("symmetricEigen(a, n, values, vectors)", () => {
  for (const c of ref.eigen.cases as { n: number; matrix: number[]; eigenvalues: number[] }[]) {
    test(`n = ${c.n}: eigenvalues match numpy eigvalsh, A v = λ v, V orthonormal`, () => {
      const { n } = c;
      const values = new Float64Array(n);
      const vectors = new Float64Array(n * n);
      const sweeps = symmetricEigen(c.matrix, n, values, vectors);
      expect(sweeps).toBeLessThan(60);
      const sorted = Array.from(values).sort((x, y) => x - y);
      expectAllClose(sorted, c.eigenvalues, 1e-10, "eigenvalue");
      for (let k = 0; k < n; k++) {
        const av = new Float64Array(n);
        const lv = new Float64Array(n);
        for (let i = 0; i < n; i++) {
          let s = 0;
          for (let j = 0; j < n; j++) s += c.matrix[i * n + j] * vectors[j * n + k];
          av[i] = s;
          lv[i] = values[k] * vectors[i * n + k];
        }
        expectAllClose(av, lv, 1e-10, `A v_${k}`);
        for (let l = 0; l < n; l++) {
          let dot = 0;
          for (let i = 0; i < n; i++) dot += vectors[i * n + k] * vectors[i * n + l];
          expect(Math.abs(dot - (k === l ? 1 : 0))).toBeLessThan(1e-12);
        }
      }
    });
  }

  test("a diagonal matrix is returned unchanged with the identity as eigenvectors", () => {
    const values = new Float64Array(3);
    const vectors = new Float64Array(9);
    expect(symmetricEigen([3, 0, 0, 0, -1, 0, 0, 0, 2], 3, values, vectors)).toBe(0);
    expect(Array.from(values)).toEqual([3, -1, 2]);
    expect(Array.from(vectors)).toEqual([1, 0, 0, 0, 1, 0, 0, 0, 1]);
  });

  test("in place (work = a) gives the same eigenvalues, and a 1x1 matrix is its own eigenvalue", () => {
    const a = Float64Array.from([2, 1, 1, 2]);
    const values = new Float64Array(2);
    symmetricEigen(a, 2, values, new Float64Array(4), a);
    // Closed form: eigenvalues of [[2, 1], [1, 2]] are 1 and 3.
    expectAllClose(Array.from(values).sort(), [1, 3], 1e-14, "eigenvalue");
    const one = new Float64Array(1);
    symmetricEigen([-7], 1, one, new Float64Array(1));
    expect(one[0]).toBe(-7);
  });
});
