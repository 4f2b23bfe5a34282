/**
 * PNG previews of a CT + MR pair on common planes, for looking at phantoms (and the README).
 *
 * Planes are defined in the FIXED (CT) world: an axial plane (constant z) and a coronal plane
 * (constant y) through a chosen point, spanning the CT's field of view with square pixels. The CT is
 * sampled at each plane point x, the MR at fixed_to_moving x (design.md: x_moving = T x_fixed), so
 * with the true transform both panels show the same anatomy. Sampling is trilinear; outside a grid
 * is black. Grey levels: linear window [lo, hi] -> 0..255.
 */
import { PNG } from "pngjs";
import { type Mat4, transformPoint } from "../geometry/mat4.js";
import type { Volume } from "../image/volume.js";

/** Options of previewPair. */
export interface PreviewOptions {
  /** Plane point in CT world, mm. */
  centerMm: readonly number[];
  /** CT to MR world (x_mr = T x_ct). */
  fixedToMoving: Mat4;
  /** Pixel size, mm; default 1.5. */
  pixelMm?: number;
  /** CT window, HU; default [-350, 1400]. */
  ctWindow?: readonly [number, number];
  /** MR window; default [0, 1000]. */
  mrWindow?: readonly [number, number];
}

/** Trilinear sample of a volume at world point (x, y, z); NaN outside. */
export function sampleWorld(
  vol: Volume,
  x: number,
  y: number,
  z: number,
  scratch: number[] = [0, 0, 0],
): number {
  vol.worldToIndexPoint(scratch, x, y, z);
  const [nx, ny, nz] = vol.dims;
  const i = scratch[0];
  const j = scratch[1];
  const k = scratch[2];
  if (i < -0.5 || j < -0.5 || k < -0.5 || i > nx - 0.5 || j > ny - 0.5 || k > nz - 0.5) return Number.NaN;
  const i0 = Math.max(0, Math.min(nx - 2, Math.floor(i)));
  const j0 = Math.max(0, Math.min(ny - 2, Math.floor(j)));
  const k0 = Math.max(0, Math.min(nz - 2, Math.floor(k)));
  const fi = Math.max(0, Math.min(1, i - i0));
  const fj = Math.max(0, Math.min(1, j - j0));
  const fk = Math.max(0, Math.min(1, k - k0));
  const d = vol.data;
  const i1 = Math.min(nx - 1, i0 + 1);
  const j1 = Math.min(ny - 1, j0 + 1);
  const k1 = Math.min(nz - 1, k0 + 1);
  const r00 = nx * (j0 + ny * k0);
  const r10 = nx * (j1 + ny * k0);
  const r01 = nx * (j0 + ny * k1);
  const r11 = nx * (j1 + ny * k1);
  const c00 = d[r00 + i0] * (1 - fi) + d[r00 + i1] * fi;
  const c10 = d[r10 + i0] * (1 - fi) + d[r10 + i1] * fi;
  const c01 = d[r01 + i0] * (1 - fi) + d[r01 + i1] * fi;
  const c11 = d[r11 + i0] * (1 - fi) + d[r11 + i1] * fi;
  return (c00 * (1 - fj) + c10 * fj) * (1 - fk) + (c01 * (1 - fj) + c11 * fj) * fk;
}

/** Write grey level of `v` (window lo..hi) at pixel (x, y); NaN stays black. */
function putGrey(png: PNG, x: number, y: number, v: number, lo: number, hi: number): void {
  if (Number.isNaN(v)) return;
  const g = Math.max(0, Math.min(255, Math.round((255 * (v - lo)) / (hi - lo))));
  const o = 4 * (y * png.width + x);
  png.data[o] = png.data[o + 1] = png.data[o + 2] = g;
}

/**
 * A 2 x 2 preview PNG: CT axial | MR axial on top, CT coronal | MR coronal below.
 * Images are shown in radiological display (patient right on the left of the picture, anterior up
 * in axial, superior up in coronal).
 * @returns PNG file bytes
 */
export function previewPair(ct: Volume, mr: Volume, options: PreviewOptions): Buffer {
  const px = options.pixelMm ?? 1.5;
  const b = ct.boundsWorld();
  const width = Math.round((b.max[0] - b.min[0]) / px);
  const depth = Math.round((b.max[1] - b.min[1]) / px);
  const height = Math.round((b.max[2] - b.min[2]) / px);
  const png = new PNG({ width: 2 * width, height: depth + height });
  png.data.fill(0);
  for (let i = 3; i < png.data.length; i += 4) png.data[i] = 255;
  const [ctLo, ctHi] = options.ctWindow ?? [-350, 1400];
  const [mrLo, mrHi] = options.mrWindow ?? [0, 1000];
  const q = [0, 0, 0];
  const s = [0, 0, 0];
  const c = options.centerMm;
  for (let row = 0; row < depth; row++) {
    const yw = b.max[1] - (row + 0.5) * px; // anterior at the top
    for (let col = 0; col < width; col++) {
      const xw = b.max[0] - (col + 0.5) * px; // patient right (+x) at the left
      putGrey(png, col, row, sampleWorld(ct, xw, yw, c[2], s), ctLo, ctHi);
      transformPoint(q, options.fixedToMoving, xw, yw, c[2]);
      putGrey(png, width + col, row, sampleWorld(mr, q[0], q[1], q[2], s), mrLo, mrHi);
    }
  }
  for (let row = 0; row < height; row++) {
    const zw = b.max[2] - (row + 0.5) * px; // superior at the top
    for (let col = 0; col < width; col++) {
      const xw = b.max[0] - (col + 0.5) * px;
      putGrey(png, col, depth + row, sampleWorld(ct, xw, c[1], zw, s), ctLo, ctHi);
      transformPoint(q, options.fixedToMoving, xw, c[1], zw);
      putGrey(png, width + col, depth + row, sampleWorld(mr, q[0], q[1], q[2], s), mrLo, mrHi);
    }
  }
  return PNG.sync.write(png);
}
