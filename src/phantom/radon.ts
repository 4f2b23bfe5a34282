/**
 * Parallel-beam Radon transform and filtered back-projection (FBP) on a square pixel grid.
 *
 * Conventions:
 *  - An image is n x n pixels stored row-major, `image[row * n + col]`, pixel centres at integer
 *    (col, row); the rotation centre is pixel (c, c) with c = floor(n / 2).
 *  - A sinogram is angle-major, `sino[a * nDet + b]`: angle a (degrees, anglesDeg[a]), detector bin
 *    b with signed offset s = b - floor(nDet / 2) in pixel units.
 *  - The ray of (theta, s) is the set of points with (col - c) cos(theta) - (row - c) sin(theta) = s;
 *    it is sampled at unit steps t with (col, row) = (c + s cos + t sin, c - s sin + t cos), each
 *    sample bilinearly interpolated with zero outside the grid. Projections are in "pixel value x
 *    pixel length" units: multiply by the pixel size in mm for physical line integrals.
 *  - FBP filters each projection with the band-limited ramp (Ram-Lak) kernel sampled in the spatial
 *    domain, h(0) = 1/4, h(odd d) = -1/(pi d)^2, h(even d != 0) = 0 (Kak & Slaney 1988, "Principles of
 *    Computerized Tomographic Imaging", ch. 3, eq. 61), convolved directly (exact linear convolution,
 *    no wrap-around) after zero-padding the detector row to the diagonal, then back-projects with
 *    linear interpolation along s and scales by
 *    pi / (2 * number of angles) for angles spread over 180 degrees.
 *
 * The method is the textbook parallel-beam Radon transform (Radon 1917) and FBP (Ramachandran &
 * Lakshminarayanan 1971). With these conventions the results agree with scikit-image's
 * `transform.radon` / `iradon(filter_name="ramp")` for `circle=True` (see test/phantom/radon.test.ts).
 */
import { CoxaError } from "../common/errors.js";

/** Geometry of a parallel-beam scan of an n x n image. */
export interface ParallelBeamGeometry {
  /** Image side n in pixels (the image is n x n). */
  size: number;
  /** Number of detector bins per projection. */
  detectors: number;
  /** Projection angles in degrees (for FBP: spread evenly over [0, 180)). */
  anglesDeg: Float64Array;
  /** cos and sin of each angle (derived). */
  cos: Float64Array;
  sin: Float64Array;
}

/** Options of parallelBeamGeometry. */
export interface GeometryOptions {
  /** Detector bins; default `size` (enough for an object inside the inscribed circle). Use
   * `fullDetectors(size)` to cover the whole square. */
  detectors?: number;
  /** Number of angles evenly over [0, 180) degrees, or the explicit list in degrees; default ceil(pi * size / 2) capped at 720. */
  angles?: number | readonly number[];
}

/** Detector bins that cover the whole n x n square (its diagonal) plus one bin each side. */
export function fullDetectors(size: number): number {
  return Math.ceil(size * Math.SQRT2) + 2;
}

/**
 * A parallel-beam geometry.
 * @param size - image side n in pixels (>= 1)
 * @param options - detectors and angles
 * @throws CoxaError BAD_ARGUMENT for a non-positive size, detector count or angle count
 */
export function parallelBeamGeometry(size: number, options: GeometryOptions = {}): ParallelBeamGeometry {
  if (!Number.isInteger(size) || size < 1) {
    throw new CoxaError("BAD_ARGUMENT", `image size ${size} is not a positive whole number`);
  }
  const detectors = options.detectors ?? size;
  if (!Number.isInteger(detectors) || detectors < 1) {
    throw new CoxaError("BAD_ARGUMENT", `detector count ${detectors} is not a positive whole number`);
  }
  const spec = options.angles ?? Math.min(720, Math.ceil((Math.PI * size) / 2));
  let anglesDeg: Float64Array;
  if (typeof spec === "number") {
    if (!Number.isInteger(spec) || spec < 1) {
      throw new CoxaError("BAD_ARGUMENT", `angle count ${spec} is not a positive whole number`);
    }
    anglesDeg = new Float64Array(spec);
    for (let a = 0; a < spec; a++) anglesDeg[a] = (180 * a) / spec;
  } else {
    if (spec.length < 1) throw new CoxaError("BAD_ARGUMENT", "the list of projection angles is empty");
    anglesDeg = Float64Array.from(spec);
  }
  const cos = new Float64Array(anglesDeg.length);
  const sin = new Float64Array(anglesDeg.length);
  for (let a = 0; a < anglesDeg.length; a++) {
    const r = (anglesDeg[a] * Math.PI) / 180;
    cos[a] = Math.cos(r);
    sin[a] = Math.sin(r);
  }
  return { size, detectors, anglesDeg, cos, sin };
}

type Pixels = Float64Array | Float32Array;

/**
 * Line integral of `image` along one ray (theta index `a`, bin `b`), bilinear samples at unit steps.
 * Samples outside the grid count as zero, so only the part of the ray that meets the grid is walked.
 */
export function rayIntegral(image: Pixels, geom: ParallelBeamGeometry, a: number, b: number): number {
  const n = geom.size;
  const c = Math.floor(n / 2);
  const half = Math.floor(geom.detectors / 2);
  const s = b - half;
  const cs = geom.cos[a];
  const sn = geom.sin[a];
  // (col, row) = (c + s cs + t sn, c - s sn + t cs); samples matter for col, row in (-1, n).
  const col0 = c + s * cs;
  const row0 = c - s * sn;
  let tLo = -half;
  let tHi = geom.detectors - 1 - half;
  const eps = 1e-9;
  if (Math.abs(sn) > eps) {
    const t1 = (-1 - col0) / sn;
    const t2 = (n - col0) / sn;
    tLo = Math.max(tLo, Math.ceil(Math.min(t1, t2) - eps));
    tHi = Math.min(tHi, Math.floor(Math.max(t1, t2) + eps));
  } else if (col0 <= -1 || col0 >= n) {
    return 0;
  }
  if (Math.abs(cs) > eps) {
    const t1 = (-1 - row0) / cs;
    const t2 = (n - row0) / cs;
    tLo = Math.max(tLo, Math.ceil(Math.min(t1, t2) - eps));
    tHi = Math.min(tHi, Math.floor(Math.max(t1, t2) + eps));
  } else if (row0 <= -1 || row0 >= n) {
    return 0;
  }
  let sum = 0;
  for (let t = tLo; t <= tHi; t++) {
    const x = col0 + t * sn;
    const y = row0 + t * cs;
    const x0 = Math.floor(x);
    const y0 = Math.floor(y);
    const fx = x - x0;
    const fy = y - y0;
    let v = 0;
    const inX0 = x0 >= 0 && x0 < n;
    const inX1 = x0 + 1 >= 0 && x0 + 1 < n;
    if (y0 >= 0 && y0 < n) {
      const row = y0 * n;
      if (inX0) v += (1 - fx) * (1 - fy) * image[row + x0];
      if (inX1) v += fx * (1 - fy) * image[row + x0 + 1];
    }
    if (y0 + 1 >= 0 && y0 + 1 < n) {
      const row = (y0 + 1) * n;
      if (inX0) v += (1 - fx) * fy * image[row + x0];
      if (inX1) v += fx * fy * image[row + x0 + 1];
    }
    sum += v;
  }
  return sum;
}

/**
 * Radon transform: out[a * nDet + b] = line integral of `image` along ray (a, b).
 * @param out - sinogram buffer of angles x detectors, or null to allocate
 * @param image - n x n pixels, row-major
 * @param geom - scan geometry
 * @param rays - optional mask (same layout as the sinogram): only rays with a nonzero entry are
 *   computed, the others are left untouched in `out` (zero when allocated here)
 * @throws CoxaError BAD_ARGUMENT when the image or buffers have the wrong size
 */
export function radonTransform(
  out: Float64Array | null,
  image: Pixels,
  geom: ParallelBeamGeometry,
  rays?: Uint8Array,
): Float64Array {
  const nA = geom.anglesDeg.length;
  const nDet = geom.detectors;
  if (image.length !== geom.size * geom.size) {
    throw new CoxaError("BAD_ARGUMENT", `image has ${image.length} pixels, geometry expects ${geom.size}^2`);
  }
  const sino = out ?? new Float64Array(nA * nDet);
  if (sino.length !== nA * nDet || (rays && rays.length !== nA * nDet)) {
    throw new CoxaError("BAD_ARGUMENT", `sinogram buffer must hold ${nA} x ${nDet} values`);
  }
  for (let a = 0; a < nA; a++) {
    const base = a * nDet;
    for (let b = 0; b < nDet; b++) {
      if (rays && rays[base + b] === 0) continue;
      sino[base + b] = rayIntegral(image, geom, a, b);
    }
  }
  return sino;
}

/**
 * Ramp (Ram-Lak) filtering of every projection by direct spatial convolution with
 * 2 h(d), h(0) = 1/4, h(odd d) = -1/(pi d)^2 (Kak & Slaney eq. 61; the factor 2 folds the
 * one-sided frequency ramp into the kernel). Zero input bins are skipped, so a sparse sinogram
 * (for example an error confined to rays through metal) filters quickly.
 * @param out - filtered sinogram (angles x detectors), or null to allocate; must not alias `sino`
 * @param sino - sinogram, angle-major
 * @param geom - scan geometry
 */
export function rampFilter(
  out: Float64Array | null,
  sino: Float64Array,
  geom: ParallelBeamGeometry,
): Float64Array {
  const nA = geom.anglesDeg.length;
  const nDet = geom.detectors;
  if (sino.length !== nA * nDet) {
    throw new CoxaError("BAD_ARGUMENT", `sinogram must hold ${nA} x ${nDet} values`);
  }
  const q = out ?? new Float64Array(nA * nDet);
  if (q === sino) throw new CoxaError("BAD_ARGUMENT", "rampFilter output must not alias its input");
  q.fill(0);
  const kernel = new Float64Array(nDet);
  kernel[0] = 0.5;
  for (let d = 1; d < nDet; d += 2) kernel[d] = -2 / (Math.PI * Math.PI * d * d);
  for (let a = 0; a < nA; a++) {
    const base = a * nDet;
    for (let b = 0; b < nDet; b++) {
      const v = sino[base + b];
      if (v === 0) continue;
      q[base + b] += kernel[0] * v;
      for (let m = b + 1; m < nDet; m += 2) q[base + m] += kernel[m - b] * v;
      for (let m = b - 1; m >= 0; m -= 2) q[base + m] += kernel[b - m] * v;
    }
  }
  return q;
}

/** Options of backProject / filteredBackProjection. */
export interface BackProjectOptions {
  /** Zero pixels outside the inscribed circle of radius floor(n/2) (as skimage's circle=True); default false. */
  circle?: boolean;
}

/**
 * Back-projection of a (filtered) sinogram with linear interpolation along s (zero beyond the
 * outermost bins), scaled by pi / (2 * angles) so that FBP of the Radon transform returns the image.
 * @param out - n x n image buffer, or null to allocate; overwritten
 * @param filtered - filtered sinogram, angle-major
 * @param geom - scan geometry
 */
export function backProject(
  out: Float64Array | Float32Array | null,
  filtered: Float64Array,
  geom: ParallelBeamGeometry,
  options: BackProjectOptions = {},
): Float64Array | Float32Array {
  const n = geom.size;
  const nA = geom.anglesDeg.length;
  const nDet = geom.detectors;
  const img = out ?? new Float64Array(n * n);
  if (img.length !== n * n) throw new CoxaError("BAD_ARGUMENT", `image buffer must hold ${n}^2 pixels`);
  const c = Math.floor(n / 2);
  const half = Math.floor(nDet / 2);
  const acc = new Float64Array(n);
  const r2 = c * c;
  for (let row = 0; row < n; row++) {
    acc.fill(0);
    const dy = row - c;
    for (let a = 0; a < nA; a++) {
      const cs = geom.cos[a];
      const sn = geom.sin[a];
      const base = a * nDet;
      // u(col) = s(col) + half must lie in [0, nDet - 1] (np.interp: zero outside, endpoints exact).
      const u0 = -c * cs - dy * sn + half;
      let lo = 0;
      let hi = n - 1;
      if (cs > 1e-12) {
        lo = Math.max(0, Math.ceil(-u0 / cs) - 1);
        hi = Math.min(n - 1, Math.floor((nDet - 1 - u0) / cs) + 1);
      } else if (cs < -1e-12) {
        lo = Math.max(0, Math.ceil((nDet - 1 - u0) / cs) - 1);
        hi = Math.min(n - 1, Math.floor(-u0 / cs) + 1);
      }
      for (let col = lo; col <= hi; col++) {
        const u = u0 + col * cs;
        if (u < 0 || u > nDet - 1) continue;
        let b = u | 0;
        if (b >= nDet - 1) b = nDet - 2;
        if (b < 0) {
          acc[col] += filtered[base];
          continue;
        }
        const f = u - b;
        const v = filtered[base + b];
        acc[col] += v + f * (filtered[base + b + 1] - v);
      }
    }
    const scale = Math.PI / (2 * nA);
    const rowBase = row * n;
    for (let col = 0; col < n; col++) {
      const dx = col - c;
      img[rowBase + col] = options.circle && dx * dx + dy * dy > r2 ? 0 : acc[col] * scale;
    }
  }
  return img;
}

/**
 * The sinogram zero-padded to `detectors` bins (centred as the geometry's floor(nDet/2) rule
 * places them), with the matching geometry. Filtering a padded sinogram lets the ramp kernel's
 * tails reach rays just outside the measured fan of bins.
 */
export function padDetectors(
  sino: Float64Array,
  geom: ParallelBeamGeometry,
  detectors: number,
): { sino: Float64Array; geom: ParallelBeamGeometry } {
  const nA = geom.anglesDeg.length;
  const nOld = geom.detectors;
  if (detectors <= nOld) return { sino, geom };
  const before = Math.floor(detectors / 2) - Math.floor(nOld / 2);
  const out = new Float64Array(nA * detectors);
  for (let a = 0; a < nA; a++) out.set(sino.subarray(a * nOld, (a + 1) * nOld), a * detectors + before);
  return { sino: out, geom: { ...geom, detectors } };
}

/**
 * Filtered back-projection: pad the detector row to the diagonal ceil(sqrt(2) * nDet) with zeros,
 * rampFilter, backProject.
 * @param sino - sinogram, angle-major (angles spread evenly over 180 degrees)
 * @param geom - scan geometry
 * @returns n x n reconstruction, row-major
 */
export function filteredBackProjection(
  sino: Float64Array,
  geom: ParallelBeamGeometry,
  options: BackProjectOptions = {},
): Float64Array {
  const padded = padDetectors(sino, geom, Math.ceil(Math.SQRT2 * geom.detectors));
  return backProject(null, rampFilter(null, padded.sino, padded.geom), padded.geom, options) as Float64Array;
}
