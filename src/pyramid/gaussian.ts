/**
 * Separable Gaussian smoothing of a voxel grid.
 *
 * Conventions: storage i fastest (flat index i + nx * (j + ny * k)); sigmas are given in
 * VOXELS per axis (the caller converts from mm with the grid's spacing). Kernel: the sampled
 * Gaussian exp(-t^2 / (2 sigma^2)) for integer offsets |t| <= radius, radius =
 * floor(4 sigma + 0.5), normalised to sum 1; boundaries are half-sample symmetric
 * ("reflect": ... c b a | a b c ... x y z | z y x ...). Kernel, truncation and boundary follow
 * scipy.ndimage.gaussian_filter's defaults, so that its output is a reference for tests.
 * Accumulation is in float64; the result is stored as float32.
 *
 * The sampled Gaussian delivers much less than sigma^2 of variance when sigma is below about
 * one voxel (sigma = 0.3: about a tenth). Where the blur amount matters (the pyramid), the
 * "discrete" kind is used instead (varianceExactKernel): for sigma^2 <= 0.5 the 3-tap heat
 * kernel [t/2, 1 - t, t/2], t = sigma^2; above, Lindeberg's discrete analogue of the Gaussian
 * (T. Lindeberg 1990, "Scale-space for discrete signals", IEEE PAMI 12(3)),
 * T(n; t) = exp(-t) I_n(t) with I_n the modified Bessel function of integer order; both have
 * variance t (up to 0.5% lost to truncation).
 */
import { CoxaError } from "../common/errors.js";
import type { VoxelArray } from "../image/datatypes.js";
import type { Dims } from "../image/volume.js";

/** Kernel truncation in standard deviations (scipy.ndimage's default `truncate=4.0`). */
export const GAUSSIAN_TRUNCATE = 4;

/**
 * Normalised 1-D Gaussian kernel for integer offsets -radius..radius.
 * @param sigma - standard deviation in samples (> 0)
 * @param truncate - radius in standard deviations (default 4, as scipy.ndimage)
 */
export function gaussianKernel(sigma: number, truncate = GAUSSIAN_TRUNCATE): Float64Array {
  const radius = Math.floor(truncate * sigma + 0.5);
  const w = new Float64Array(2 * radius + 1);
  let sum = 0;
  for (let t = -radius; t <= radius; t++) {
    const v = Math.exp((-0.5 * t * t) / (sigma * sigma));
    w[t + radius] = v;
    sum += v;
  }
  for (let q = 0; q < w.length; q++) w[q] /= sum;
  return w;
}

/** Kernel kinds: "sampled" (scipy.ndimage's) or "discrete" (Lindeberg's, exact variance). */
export type GaussianKind = "sampled" | "discrete";

/**
 * Lindeberg's discrete Gaussian kernel exp(-t) I_n(t), t = sigma^2, for |n| <= radius
 * (radius = ceil(truncate sigma) + 1), normalised to sum 1 after truncation.
 * @param sigma - standard deviation in samples (> 0)
 * @param truncate - radius in standard deviations (default 4)
 */
export function discreteGaussianKernel(sigma: number, truncate = GAUSSIAN_TRUNCATE): Float64Array {
  const t = sigma * sigma;
  const radius = Math.ceil(truncate * sigma) + 1;
  const w = new Float64Array(2 * radius + 1);
  const half = t / 2;
  let sum = 0;
  for (let n = 0; n <= radius; n++) {
    // I_n(t) = sum_k (t/2)^(2k+n) / (k! (k+n)!), in a numerically safe running form.
    let term = 1;
    for (let q = 1; q <= n; q++) term *= half / q; // (t/2)^n / n!
    let bessel = 0;
    for (let k = 0; k < 200; k++) {
      bessel += term;
      term *= (half * half) / ((k + 1) * (k + 1 + n));
      if (term < 1e-17 * bessel) break;
    }
    const v = Math.exp(-t) * bessel;
    w[radius + n] = v;
    w[radius - n] = v;
    sum += n === 0 ? v : 2 * v;
  }
  for (let q = 0; q < w.length; q++) w[q] /= sum;
  return w;
}

/**
 * Kernel of the "discrete" kind with exactly variance sigma^2 and as few taps as reasonable:
 * for t = sigma^2 <= 0.5 the 3-tap kernel [t/2, 1 - t, t/2] (one explicit step of the discrete
 * heat equation; its variance is t), else Lindeberg's kernel cut at the smallest radius that
 * loses less than 0.5% of the variance (at most ceil(truncate sigma) + 1).
 * @param sigma - standard deviation in samples (> 0)
 * @param truncate - bound of the radius in standard deviations
 */
export function varianceExactKernel(sigma: number, truncate = GAUSSIAN_TRUNCATE): Float64Array {
  const t = sigma * sigma;
  if (t <= 0.5) return Float64Array.from([t / 2, 1 - t, t / 2]);
  const full = discreteGaussianKernel(sigma, Math.max(truncate, 6));
  const r = (full.length - 1) / 2;
  let radius = Math.min(r, Math.ceil(truncate * sigma) + 1);
  // Shrink while the dropped tails hold less than 0.5% of the variance.
  for (let cut = 1; cut < radius; cut++) {
    let lost = 0;
    for (let n = cut + 1; n <= r; n++) lost += 2 * full[r + n] * n * n;
    if (lost < 0.005 * t) {
      radius = cut;
      break;
    }
  }
  const w = full.slice(r - radius, r + radius + 1);
  let sum = 0;
  for (let q = 0; q < w.length; q++) sum += w[q];
  for (let q = 0; q < w.length; q++) w[q] /= sum;
  return w;
}

function kernelOf(sigma: number, truncate: number, kind: GaussianKind): Float64Array {
  return kind === "discrete" ? varianceExactKernel(sigma, truncate) : gaussianKernel(sigma, truncate);
}

/** Half-sample symmetric reflection of index p into [0, n-1] (period 2n). */
export function reflectIndex(p: number, n: number): number {
  const period = 2 * n;
  p %= period;
  if (p < 0) p += period;
  return p < n ? p : period - 1 - p;
}

/**
 * out = data smoothed by a separable Gaussian with per-axis sigma (voxels). A sigma of 0 (or
 * below 1e-3) leaves that axis untouched. `out` may be `data` itself when `data` is a
 * Float32Array.
 * @param out - nx*ny*nz float32 output
 * @param data - nx*ny*nz voxels (any datatype)
 * @param dims - [nx, ny, nz]
 * @param sigmaVoxels - [sx, sy, sz] standard deviations in voxels (>= 0)
 * @param truncate - kernel radius in standard deviations (default 4, scipy's default)
 * @param kind - "sampled" (default, as scipy.ndimage) or "discrete" (exact variance)
 * @returns out
 * @throws CoxaError BAD_ARGUMENT for negative or non-finite sigma, BAD_DIMS for a size mismatch
 */
export function gaussianSmooth(
  out: Float32Array,
  data: VoxelArray,
  dims: Dims,
  sigmaVoxels: readonly [number, number, number],
  truncate = GAUSSIAN_TRUNCATE,
  kind: GaussianKind = "sampled",
): Float32Array {
  const [nx, ny, nz] = dims;
  const n = nx * ny * nz;
  if (out.length !== n || data.length !== n) {
    throw new CoxaError(
      "BAD_DIMS",
      `smoothing needs ${n} voxels, got ${data.length} in and ${out.length} out`,
    );
  }
  for (const s of sigmaVoxels) {
    if (!(s >= 0) || !Number.isFinite(s)) throw new CoxaError("BAD_ARGUMENT", `sigma ${s} is not >= 0`);
  }
  const nxy = nx * ny;
  // Each pass reads `src` and writes `out`; the first reads the input directly (no copy).
  let src: VoxelArray = data;
  // Along i: contiguous lines, reflected into a padded float64 buffer.
  if (sigmaVoxels[0] >= 1e-3 && nx > 1) {
    const w = kernelOf(sigmaVoxels[0], truncate, kind);
    const r = (w.length - 1) / 2;
    const taps = w.length;
    const line = new Float64Array(nx + 2 * r);
    const lead = new Int32Array(2 * r);
    for (let p = 0; p < r; p++) {
      lead[p] = reflectIndex(p - r, nx);
      lead[r + p] = reflectIndex(nx + p, nx);
    }
    for (let row = 0; row < ny * nz; row++) {
      const o = row * nx;
      for (let p = 0; p < r; p++) {
        line[p] = src[o + lead[p]];
        line[nx + r + p] = src[o + lead[r + p]];
      }
      for (let i = 0; i < nx; i++) line[i + r] = src[o + i];
      if (taps === 3) {
        const w0 = w[0];
        const w1 = w[1];
        for (let i = 0; i < nx; i++) out[o + i] = w0 * (line[i] + line[i + 2]) + w1 * line[i + 1];
      } else {
        for (let i = 0; i < nx; i++) {
          let acc = 0;
          for (let t = 0; t < taps; t++) acc += w[t] * line[i + t];
          out[o + i] = acc;
        }
      }
    }
    src = out;
  }
  // Along j and k: whole rows of nx voxels are weighted and added (contiguous inner loops).
  if (sigmaVoxels[1] >= 1e-3 && ny > 1) {
    const w = kernelOf(sigmaVoxels[1], truncate, kind);
    const plane = new Float32Array(nxy);
    const acc = new Float64Array(nx);
    for (let k = 0; k < nz; k++) {
      const base = k * nxy;
      plane.set(src.subarray(base, base + nxy));
      smoothRows(out, base, plane, ny, nx, w, acc);
    }
    src = out;
  }
  if (sigmaVoxels[2] >= 1e-3 && nz > 1) {
    smoothAlongK(out, src, dims, sigmaVoxels[2], truncate, kind);
    src = out;
  }
  if (src !== (out as VoxelArray)) for (let q = 0; q < n; q++) out[q] = data[q];
  return out;
}

/**
 * The k pass of gaussianSmooth on its own: out = data smoothed along k by `sigma` voxels, one
 * (i, k) sheet per j. With `claim` (a shared counter, slot 0) only the sheets it hands out are
 * done, so that two threads can share the pass (src/pyramid/parallel.ts). Each sheet is read
 * whole before it is written and sheets do not overlap, so `out` may be `data`.
 */
export function smoothAlongK(
  out: Float32Array,
  data: VoxelArray,
  dims: Dims,
  sigma: number,
  truncate: number,
  kind: GaussianKind,
  claim?: Int32Array,
): void {
  const [nx, ny, nz] = dims;
  const nxy = nx * ny;
  const w = kernelOf(sigma, truncate, kind);
  const column = new Float32Array(nx * nz);
  const acc = new Float64Array(nx);
  const rowsOut = new Float32Array(nx * nz);
  for (let j = claim ? Atomics.add(claim, 0, 1) : 0; j < ny; j = claim ? Atomics.add(claim, 0, 1) : j + 1) {
    for (let k = 0; k < nz; k++) column.set(data.subarray(nx * j + nxy * k, nx * (j + 1) + nxy * k), k * nx);
    smoothRows(rowsOut, 0, column, nz, nx, w, acc);
    for (let k = 0; k < nz; k++) out.set(rowsOut.subarray(k * nx, (k + 1) * nx), nx * j + nxy * k);
  }
}

/**
 * dst[base + r*nx + i] = sum_t w[t] * src[reflect(r + t - radius) * nx + i] for r < rows.
 */
function smoothRows(
  dst: Float32Array,
  base: number,
  src: Float32Array,
  rows: number,
  nx: number,
  w: Float64Array,
  acc: Float64Array,
): void {
  const radius = (w.length - 1) / 2;
  const taps = w.length;
  for (let r = 0; r < rows; r++) {
    const d = base + r * nx;
    if (taps === 3) {
      const w0 = w[0];
      const w1 = w[1];
      const a = reflectIndex(r - 1, rows) * nx;
      const b = r * nx;
      const c = reflectIndex(r + 1, rows) * nx;
      for (let i = 0; i < nx; i++) dst[d + i] = w0 * (src[a + i] + src[c + i]) + w1 * src[b + i];
      continue;
    }
    const o0 = reflectIndex(r - radius, rows) * nx;
    const w0 = w[0];
    for (let i = 0; i < nx; i++) acc[i] = w0 * src[o0 + i];
    for (let t = 1; t < taps; t++) {
      const weight = w[t];
      const o = reflectIndex(r + t - radius, rows) * nx;
      for (let i = 0; i < nx; i++) acc[i] += weight * src[o + i];
    }
    for (let i = 0; i < nx; i++) dst[d + i] = acc[i];
  }
}

/**
 * A smoother for single planes of nx*ny values (float64, i fastest), smoothing along i by
 * sigmaX and along j by sigmaY (voxels) with the same kernel and boundary as gaussianSmooth.
 * Scratch buffers are allocated once, here; the returned function smooths a plane in place.
 * Used to fuse the in-plane passes into the block reduction (src/pyramid/pyramid.ts).
 * @param nx - plane width
 * @param ny - plane height
 * @param sigmaX - sigma along i (voxels, >= 0)
 * @param sigmaY - sigma along j (voxels, >= 0)
 * @param truncate - kernel radius in standard deviations
 * @param kind - kernel kind (see gaussianSmooth)
 */
export function planeSmoother(
  nx: number,
  ny: number,
  sigmaX: number,
  sigmaY: number,
  truncate = GAUSSIAN_TRUNCATE,
  kind: GaussianKind = "sampled",
): (plane: Float64Array) => void {
  const wx = sigmaX >= 1e-3 && nx > 1 ? kernelOf(sigmaX, truncate, kind) : undefined;
  const wy = sigmaY >= 1e-3 && ny > 1 ? kernelOf(sigmaY, truncate, kind) : undefined;
  const rx = wx ? (wx.length - 1) / 2 : 0;
  const line = new Float64Array(nx + 2 * rx);
  const copy = new Float64Array(nx * ny);
  const rowIndex = new Int32Array(wy ? wy.length * ny : 0);
  if (wy) {
    const r = (wy.length - 1) / 2;
    for (let j = 0; j < ny; j++)
      for (let t = 0; t < wy.length; t++) rowIndex[j * wy.length + t] = reflectIndex(j + t - r, ny) * nx;
  }
  return (plane: Float64Array) => {
    if (wx) {
      const taps = wx.length;
      for (let j = 0; j < ny; j++) {
        const o = j * nx;
        for (let p = -rx; p < 0; p++) line[p + rx] = plane[o + reflectIndex(p, nx)];
        for (let p = nx; p < nx + rx; p++) line[p + rx] = plane[o + reflectIndex(p, nx)];
        for (let i = 0; i < nx; i++) line[i + rx] = plane[o + i];
        if (taps === 3) {
          const w0 = wx[0];
          const w1 = wx[1];
          for (let i = 0; i < nx; i++) plane[o + i] = w0 * (line[i] + line[i + 2]) + w1 * line[i + 1];
        } else {
          for (let i = 0; i < nx; i++) {
            let acc = 0;
            for (let t = 0; t < taps; t++) acc += wx[t] * line[i + t];
            plane[o + i] = acc;
          }
        }
      }
    }
    if (wy) {
      copy.set(plane);
      const taps = wy.length;
      for (let j = 0; j < ny; j++) {
        const d = j * nx;
        const r0 = rowIndex[j * taps];
        const w0 = wy[0];
        for (let i = 0; i < nx; i++) plane[d + i] = w0 * copy[r0 + i];
        for (let t = 1; t < taps; t++) {
          const o = rowIndex[j * taps + t];
          const w = wy[t];
          for (let i = 0; i < nx; i++) plane[d + i] += w * copy[o + i];
        }
      }
    }
  };
}
