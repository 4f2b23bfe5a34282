/**
 * Eigen-decomposition of small real symmetric matrices (n up to a few dozen) by the cyclic
 * Jacobi method (Jacobi 1846; the threshold and stable-rotation formulas of Rutishauser 1966,
 * "The Jacobi method for real symmetric matrices", Numer. Math. 9).
 *
 * Used where n is tiny and the call is frequent: the covariance of CMA-ES (n = 6..12, every
 * generation) and the 3x3 inertia of a fiducial configuration. Allocation-free when the caller
 * passes its buffers.
 *
 * Storage: matrices are flat Float64Arrays of n*n numbers in ROW-MAJOR order, a[r * n + c].
 * Eigenvector k is COLUMN k of `vectors`: vectors[i * n + k]. Eigenvalues are not sorted.
 */

/**
 * Eigenvalues and orthonormal eigenvectors of the symmetric matrix `a`: a · v_k = values[k] · v_k.
 * @param a - n*n symmetric matrix, row-major; only read (copied into `work`)
 * @param n - order of the matrix (>= 1)
 * @param values - out: n eigenvalues, in no particular order
 * @param vectors - out: n*n, column k is the unit eigenvector of values[k]
 * @param work - optional scratch of n*n numbers (allocated when absent); may be `a` itself to
 *   decompose in place (then `a` is destroyed)
 * @returns the number of Jacobi sweeps used (at most 60)
 */
export function symmetricEigen(
  a: ArrayLike<number>,
  n: number,
  values: Float64Array,
  vectors: Float64Array,
  work?: Float64Array,
): number {
  const m = work ?? new Float64Array(n * n);
  if (m !== a) for (let i = 0; i < n * n; i++) m[i] = a[i];
  // Symmetrise (guards against round-off asymmetry in the caller's accumulations).
  for (let r = 0; r < n; r++) {
    for (let c = r + 1; c < n; c++) {
      const v = 0.5 * (m[r * n + c] + m[c * n + r]);
      m[r * n + c] = v;
      m[c * n + r] = v;
    }
  }
  vectors.fill(0);
  for (let i = 0; i < n; i++) vectors[i * n + i] = 1;

  let scale = 0;
  for (let i = 0; i < n * n; i++) scale += m[i] * m[i];
  let sweeps = 0;
  for (; sweeps < 60; sweeps++) {
    let off = 0;
    for (let p = 0; p < n; p++) for (let q = p + 1; q < n; q++) off += m[p * n + q] * m[p * n + q];
    if (off <= 1e-30 * scale || off === 0) break;
    // Rutishauser: in the first sweeps skip rotations for elements already small.
    const threshold = sweeps < 3 ? (0.2 * Math.sqrt(off)) / (n * n) : 0;
    for (let p = 0; p < n - 1; p++) {
      for (let q = p + 1; q < n; q++) {
        const apq = m[p * n + q];
        if (Math.abs(apq) <= threshold || apq === 0) continue;
        const app = m[p * n + p];
        const aqq = m[q * n + q];
        const theta = (aqq - app) / (2 * apq);
        // Smaller root of t^2 + 2 theta t - 1 = 0, written to avoid cancellation.
        const t = (theta >= 0 ? 1 : -1) / (Math.abs(theta) + Math.sqrt(theta * theta + 1));
        const c = 1 / Math.sqrt(t * t + 1);
        const s = t * c;
        // m <- J^T m J with J = identity except J_pp = J_qq = c, J_pq = s, J_qp = -s.
        for (let k = 0; k < n; k++) {
          const mkp = m[k * n + p];
          const mkq = m[k * n + q];
          m[k * n + p] = c * mkp - s * mkq;
          m[k * n + q] = s * mkp + c * mkq;
        }
        for (let k = 0; k < n; k++) {
          const mpk = m[p * n + k];
          const mqk = m[q * n + k];
          m[p * n + k] = c * mpk - s * mqk;
          m[q * n + k] = s * mpk + c * mqk;
        }
        m[p * n + q] = 0;
        m[q * n + p] = 0;
        for (let k = 0; k < n; k++) {
          const vkp = vectors[k * n + p];
          const vkq = vectors[k * n + q];
          vectors[k * n + p] = c * vkp - s * vkq;
          vectors[k * n + q] = s * vkp + c * vkq;
        }
      }
    }
  }
  for (let i = 0; i < n; i++) values[i] = m[i * n + i];
  return sweeps;
}
