/**
 * Two-image comparisons drawn on display rasters: checkerboards, thin edge maps and mask
 * outlines. All images here are display-sized, row-major, top row first, one value per pixel
 * (see slice.ts for the display coordinate convention).
 *
 * Edges, after Canny (1986), "A computational approach to edge detection", IEEE PAMI 8(6): a
 * binomial smoothing [1 4 6 4 1]/16 per axis (a Gaussian of sigma 1 px), the Sobel gradient
 * (Sobel & Feldman 1968), non-maximum suppression along the gradient direction quantised to
 * 0/45/90/135 degrees, a threshold at a percentile of the magnitudes, and removal of edge pixels
 * without an edge neighbour. Pixels are square in mm on a
 * display raster (slice.ts keeps the aspect ratio), so the gradient is isotropic.
 */
import { CoxaError } from "../common/errors.js";
import { percentiles } from "./window.js";

/**
 * out = checkerboard of `a` and `b`: square tiles of `tileMm` millimetres, anchored at the
 * top-left corner of the image. Pixel (x, y) has its centre at ((x + 0.5) / pxPerMmX,
 * (y + 0.5) / pxPerMmY) mm; it takes `a` when floor(xMm / tileMm) + floor(yMm / tileMm) is even,
 * `b` when odd.
 * @param out - width * height bytes (may alias `a` or `b`)
 * @param a - first image (e.g. windowed CT), width * height bytes
 * @param b - second image (e.g. windowed MR)
 * @param width - pixels per row
 * @param height - rows
 * @param pxPerMmX - display pixels per mm horizontally
 * @param pxPerMmY - display pixels per mm vertically
 * @param tileMm - tile side in mm (> 0)
 * @returns out
 * @throws CoxaError BAD_ARGUMENT on sizes or a tile that is not positive
 */
export function checkerboard(
  out: Uint8Array,
  a: Uint8Array,
  b: Uint8Array,
  width: number,
  height: number,
  pxPerMmX: number,
  pxPerMmY: number,
  tileMm: number,
): Uint8Array {
  const n = width * height;
  if (a.length !== n || b.length !== n || out.length !== n) {
    throw new CoxaError("BAD_ARGUMENT", `checkerboard images must all have ${width}x${height} pixels`);
  }
  if (!(tileMm > 0) || !(pxPerMmX > 0) || !(pxPerMmY > 0)) {
    throw new CoxaError("BAD_ARGUMENT", `checkerboard tile ${tileMm} mm or pixel size is not positive`);
  }
  for (let y = 0, q = 0; y < height; y++) {
    const rowTile = Math.floor((y + 0.5) / pxPerMmY / tileMm);
    for (let x = 0; x < width; x++, q++) {
      const colTile = Math.floor((x + 0.5) / pxPerMmX / tileMm);
      out[q] = ((rowTile + colTile) & 1) === 0 ? a[q] : b[q];
    }
  }
  return out;
}

/** Options of thinEdges. */
export interface EdgeOptions {
  /**
   * Percentile (0..100) of the non-zero gradient magnitudes that an edge pixel must reach;
   * default 85.
   */
  percentile?: number;
  /** Values treated as missing (NaN) are replaced by this before differencing; default: the minimum finite value. */
  fill?: number;
  /** Binomial smoothing passes before differencing (each: sigma 1 px); default 1, 0 = none. */
  smoothPasses?: number;
  /** Drop edge pixels that have no edge among their 8 neighbours; default true. */
  dropIsolated?: boolean;
}

/**
 * out[p] = 1 where `values` has a thin edge: the Sobel gradient magnitude is a local maximum
 * across the edge (non-maximum suppression) and at least the given percentile of the non-zero
 * magnitudes; 0 elsewhere. Border pixels are never edges.
 * @param out - width * height bytes
 * @param values - display-sized intensities (any unit)
 * @param width - pixels per row
 * @param height - rows
 * @param options - threshold percentile and NaN fill
 * @returns out
 * @throws CoxaError BAD_ARGUMENT on sizes or a percentile outside 0..100
 */
export function thinEdges(
  out: Uint8Array,
  values: Float32Array,
  width: number,
  height: number,
  options: EdgeOptions = {},
): Uint8Array {
  const n = width * height;
  if (values.length !== n || out.length !== n) {
    throw new CoxaError("BAD_ARGUMENT", `edge images must have ${width}x${height} pixels`);
  }
  const percent = options.percentile ?? 85;
  if (!(percent >= 0 && percent <= 100)) {
    throw new CoxaError("BAD_ARGUMENT", `edge percentile ${percent} is outside 0..100`);
  }
  out.fill(0);
  if (width < 3 || height < 3) return out;
  let fill = options.fill;
  if (fill === undefined) {
    fill = Infinity;
    for (let p = 0; p < n; p++) if (values[p] < fill) fill = values[p];
    if (fill === Infinity) fill = 0;
  }
  const v = new Float32Array(n);
  for (let p = 0; p < n; p++) v[p] = values[p] === values[p] ? values[p] : fill;
  const passes = Math.max(0, Math.round(options.smoothPasses ?? 1));
  if (passes > 0) {
    const scratch = new Float32Array(n);
    for (let pass = 0; pass < passes; pass++) {
      binomialRows(scratch, v, width, height);
      binomialColumns(v, scratch, width, height);
    }
  }
  const mag = new Float32Array(n);
  const dir = new Uint8Array(n); // 0: horizontal gradient, 1: 45 deg, 2: vertical, 3: 135 deg
  let nonZero = 0;
  const tan22 = Math.tan(Math.PI / 8);
  for (let y = 1; y < height - 1; y++) {
    for (let x = 1; x < width - 1; x++) {
      const p = y * width + x;
      const a00 = v[p - width - 1];
      const a01 = v[p - width];
      const a02 = v[p - width + 1];
      const a10 = v[p - 1];
      const a12 = v[p + 1];
      const a20 = v[p + width - 1];
      const a21 = v[p + width];
      const a22 = v[p + width + 1];
      const gx = a02 + 2 * a12 + a22 - (a00 + 2 * a10 + a20);
      const gy = a20 + 2 * a21 + a22 - (a00 + 2 * a01 + a02);
      const m = Math.hypot(gx, gy) / 8;
      mag[p] = m;
      if (m > 0) nonZero++;
      const ax = Math.abs(gx);
      const ay = Math.abs(gy);
      // Direction of the gradient (image y downwards); edges run across it.
      dir[p] = ay <= tan22 * ax ? 0 : ax <= tan22 * ay ? 2 : gx * gy > 0 ? 1 : 3;
    }
  }
  if (nonZero === 0) return out;
  const positive = new Float32Array(nonZero);
  for (let p = 0, q = 0; p < n; p++) if (mag[p] > 0) positive[q++] = mag[p];
  const threshold = Math.max(percentiles(positive, [percent])[0], Number.MIN_VALUE);
  for (let y = 1; y < height - 1; y++) {
    for (let x = 1; x < width - 1; x++) {
      const p = y * width + x;
      const m = mag[p];
      if (m < threshold) continue;
      const d = dir[p];
      // Neighbours along the gradient direction: 0 -> left/right, 2 -> up/down,
      // 1 -> (x+1, y+1)/(x-1, y-1), 3 -> (x+1, y-1)/(x-1, y+1).
      const step = d === 0 ? 1 : d === 2 ? width : d === 1 ? width + 1 : 1 - width;
      if (m >= mag[p + step] && m > mag[p - step]) out[p] = 1;
    }
  }
  if (options.dropIsolated ?? true) {
    for (let y = 1; y < height - 1; y++) {
      for (let x = 1; x < width - 1; x++) {
        const p = y * width + x;
        if (out[p] === 0) continue;
        const neighbours =
          out[p - width - 1] +
          out[p - width] +
          out[p - width + 1] +
          out[p - 1] +
          out[p + 1] +
          out[p + width - 1] +
          out[p + width] +
          out[p + width + 1];
        if (neighbours === 0) out[p] = 0;
      }
    }
  }
  return out;
}

/** out = src smoothed along rows with [1 4 6 4 1]/16, edges clamped. */
function binomialRows(out: Float32Array, src: Float32Array, width: number, height: number): void {
  const last = width - 1;
  for (let y = 0; y < height; y++) {
    const row = y * width;
    for (let x = 0; x < width; x++) {
      const xm2 = x - 2 < 0 ? 0 : x - 2;
      const xm1 = x - 1 < 0 ? 0 : x - 1;
      const xp1 = x + 1 > last ? last : x + 1;
      const xp2 = x + 2 > last ? last : x + 2;
      out[row + x] =
        (src[row + xm2] + 4 * src[row + xm1] + 6 * src[row + x] + 4 * src[row + xp1] + src[row + xp2]) / 16;
    }
  }
}

/** out = src smoothed along columns with [1 4 6 4 1]/16, edges clamped. */
function binomialColumns(out: Float32Array, src: Float32Array, width: number, height: number): void {
  const last = height - 1;
  for (let y = 0; y < height; y++) {
    const ym2 = (y - 2 < 0 ? 0 : y - 2) * width;
    const ym1 = (y - 1 < 0 ? 0 : y - 1) * width;
    const yp1 = (y + 1 > last ? last : y + 1) * width;
    const yp2 = (y + 2 > last ? last : y + 2) * width;
    const row = y * width;
    for (let x = 0; x < width; x++) {
      out[row + x] =
        (src[ym2 + x] + 4 * src[ym1 + x] + 6 * src[row + x] + 4 * src[yp1 + x] + src[yp2 + x]) / 16;
    }
  }
}

/**
 * out[p] = 1 on the boundary of `mask`: mask pixels with at least one of their four
 * neighbours outside the mask (or on the image border); 0 elsewhere.
 * @param out - width * height bytes (must not alias `mask`)
 * @param mask - width * height bytes, non-zero = inside
 * @param width - pixels per row
 * @param height - rows
 * @param thicknessPx - outline thickness in pixels (1..4), grown inwards
 * @returns out
 * @throws CoxaError BAD_ARGUMENT on sizes or aliasing
 */
export function maskOutline(
  out: Uint8Array,
  mask: Uint8Array,
  width: number,
  height: number,
  thicknessPx = 1,
): Uint8Array {
  const n = width * height;
  if (mask.length !== n || out.length !== n) {
    throw new CoxaError("BAD_ARGUMENT", `mask images must have ${width}x${height} pixels`);
  }
  if (out === mask) throw new CoxaError("BAD_ARGUMENT", "maskOutline output must not alias the mask");
  out.fill(0);
  let inside = mask;
  const passes = Math.min(4, Math.max(1, Math.round(thicknessPx)));
  for (let pass = 0; pass < passes; pass++) {
    const eroded = new Uint8Array(n);
    for (let y = 0, p = 0; y < height; y++) {
      for (let x = 0; x < width; x++, p++) {
        if (inside[p] === 0) continue;
        const border =
          x === 0 ||
          y === 0 ||
          x === width - 1 ||
          y === height - 1 ||
          inside[p - 1] === 0 ||
          inside[p + 1] === 0 ||
          inside[p - width] === 0 ||
          inside[p + width] === 0;
        if (border) out[p] = 1;
        else eroded[p] = 1;
      }
    }
    inside = eroded;
  }
  return out;
}
