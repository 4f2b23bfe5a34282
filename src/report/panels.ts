/**
 * Image panels of the align report: for one plane through one point, the fixed image, the moving
 * image resampled onto the fixed grid, a checkerboard of the two, and the edges of one drawn over
 * the other, with the metal mask outline, landmark markers and orientation letters.
 *
 * Each panel is an inline `<svg>` holding one PNG (data URI) and vector overlays (markers, labels,
 * letters) so text stays sharp and the page needs no script. Slices follow the fixed image's voxel
 * grid in radiological display (slice.ts). Both volumes must share the fixed grid.
 */
import { CoxaError } from "../common/errors.js";
import type { Volume } from "../image/volume.js";
import { escapeHtml, PALETTE } from "./html.js";
import { checkerboard, maskOutline, thinEdges } from "./overlay.js";
import { createRaster, greyToRgb, paintMask, pngDataUri, type RasterImage, type Rgb } from "./png.js";
import {
  displaySize,
  extractPlane,
  locateOnPlane,
  type PlaneLayout,
  type PlaneName,
  planeLayout,
  scaleSlice,
  sliceIndexAt,
  toDisplayPx,
} from "./slice.js";
import { applyWindow, type IntensityWindow } from "./window.js";

/** A landmark to mark on the panels (world RAS mm of the FIXED image). */
export interface PanelLandmark {
  label: string;
  /** Fixed landmark position. */
  fixedMm?: readonly number[];
  /** Moving landmark mapped into the fixed world with the inverse transform. */
  mappedMovingMm?: readonly number[];
}

/** Inputs of renderPlanePanels. */
export interface PlanePanelInput {
  fixed: Volume;
  /** The moving image resampled onto the fixed grid (same dims and affine). */
  movingOnFixed: Volume;
  fixedWindow: IntensityWindow;
  movingWindow: IntensityWindow;
  /** Short names of the images, e.g. "CT" and "MR". */
  fixedName: string;
  movingName: string;
  /** Which image is the base of the edge overlay (its edges come from the other); default "fixed". */
  edgeBase?: "fixed" | "moving";
  /** Metal mask on the fixed grid (non-zero = metal). */
  metalMask?: Uint8Array;
  landmarks?: readonly PanelLandmark[];
  /** Display options. */
  maxPanelPx?: number;
  checkerTileMm?: number;
  edgePercentile?: number;
  /** Landmarks within ± this distance (mm) of a plane are marked on it (default 4). */
  landmarkSlabMm?: number;
}

/** Kind of panel, in column order. */
export type PanelKind = "fixed" | "moving" | "checkerboard" | "edges";

/** One rendered panel. */
export interface Panel {
  kind: PanelKind;
  /** `<figure>` markup with the inline SVG. */
  html: string;
}

/** The four panels of one plane through one point. */
export interface PlanePanels {
  plane: PlaneName;
  layout: PlaneLayout;
  sliceIndex: number;
  /** False when the point lies outside the grid across this plane (the nearest slice is shown). */
  pointInside: boolean;
  /** World coordinate (mm) of the shown slice along the plane's world axis (z axial, y coronal, x sagittal), at the point. */
  planeWorldMm: number;
  /** Display size of every panel (pixels). */
  width: number;
  height: number;
  /** Labels of the landmarks marked on this plane. */
  markedLandmarks: string[];
  panels: Panel[];
}

const DEFAULTS = { maxPanelPx: 288, checkerTileMm: 20, edgePercentile: 88, landmarkSlabMm: 4 };

function hexToRgb(hex: string): Rgb {
  const v = Number.parseInt(hex.slice(1), 16);
  return [(v >> 16) & 255, (v >> 8) & 255, v & 255];
}

/**
 * Render the four panels of one plane through a world point.
 * @param input - volumes on the fixed grid, windows, overlays and display options
 * @param plane - axial, coronal or sagittal
 * @param pointMm - world point, RAS mm
 * @throws CoxaError BAD_ARGUMENT when the volumes or the mask do not share the fixed grid
 */
export function renderPlanePanels(
  input: PlanePanelInput,
  plane: PlaneName,
  pointMm: readonly number[],
): PlanePanels {
  const { fixed, movingOnFixed } = input;
  checkSameGrid(fixed, movingOnFixed);
  if (input.metalMask && input.metalMask.length !== fixed.count) {
    throw new CoxaError(
      "BAD_ARGUMENT",
      `metal mask has ${input.metalMask.length} voxels, the fixed grid ${fixed.count}`,
    );
  }
  const maxPx = input.maxPanelPx ?? DEFAULTS.maxPanelPx;
  const tileMm = input.checkerTileMm ?? DEFAULTS.checkerTileMm;
  const slab = input.landmarkSlabMm ?? DEFAULTS.landmarkSlabMm;
  const layout = planeLayout(fixed, plane);
  const at = sliceIndexAt(fixed, layout, pointMm);
  const { width, height, pxPerMmX, pxPerMmY } = displaySize(layout, maxPx);
  const n = width * height;
  const sliceLen = layout.cols * layout.rows;

  const slice = new Float32Array(sliceLen);
  const fixedDisplay = new Float32Array(n);
  extractPlane(slice, fixed.data, fixed.dims, layout, at.index);
  scaleSlice(fixedDisplay, slice, layout.cols, layout.rows, width, height, "bilinear");
  const movingDisplay = new Float32Array(n);
  extractPlane(slice, movingOnFixed.data, movingOnFixed.dims, layout, at.index);
  scaleSlice(movingDisplay, slice, layout.cols, layout.rows, width, height, "bilinear");

  const fixedGrey = createRaster(width, height, 1);
  applyWindow(fixedGrey.data, fixedDisplay, input.fixedWindow);
  const movingGrey = createRaster(width, height, 1);
  applyWindow(movingGrey.data, movingDisplay, input.movingWindow);
  const checker = createRaster(width, height, 1);
  checkerboard(checker.data, fixedGrey.data, movingGrey.data, width, height, pxPerMmX, pxPerMmY, tileMm);

  let outline: Uint8Array | undefined;
  if (input.metalMask) {
    const maskSlice = new Uint8Array(sliceLen);
    extractPlane(maskSlice, input.metalMask, fixed.dims, layout, at.index);
    const maskDisplay = new Uint8Array(n);
    scaleSlice(maskDisplay, maskSlice, layout.cols, layout.rows, width, height, "nearest");
    outline = maskOutline(
      new Uint8Array(n),
      maskDisplay,
      width,
      height,
      Math.max(1, Math.round(maxPx / 200)),
    );
  }
  const metalRgb = hexToRgb(PALETTE.metal);

  const base = input.edgeBase ?? "fixed";
  const edges = thinEdges(new Uint8Array(n), base === "fixed" ? movingDisplay : fixedDisplay, width, height, {
    percentile: input.edgePercentile ?? DEFAULTS.edgePercentile,
  });
  const edgeImage = greyToRgb(base === "fixed" ? fixedGrey : movingGrey);
  paintMask(edgeImage, edges, hexToRgb(PALETTE.edge));
  if (outline) paintMask(edgeImage, outline, metalRgb);

  let fixedImage: RasterImage = fixedGrey;
  if (outline) {
    fixedImage = greyToRgb(fixedGrey);
    paintMask(fixedImage, outline, metalRgb);
  }

  // Vector overlays shared by the four panels.
  const marked: string[] = [];
  const overlay: string[] = [];
  for (const lm of input.landmarks ?? []) {
    const f = lm.fixedMm ? locateOnPlane(fixed, layout, at.index, lm.fixedMm) : undefined;
    const m = lm.mappedMovingMm ? locateOnPlane(fixed, layout, at.index, lm.mappedMovingMm) : undefined;
    const fNear = f !== undefined && Math.abs(f.distanceMm) <= slab;
    const mNear = m !== undefined && Math.abs(m.distanceMm) <= slab;
    if (!fNear && !mNear) continue;
    marked.push(lm.label);
    const fp = f && fNear ? toDisplayPx(f, layout, width, height) : undefined;
    const mp = m && mNear ? toDisplayPx(m, layout, width, height) : undefined;
    overlay.push(`<g class="landmark" data-label="${escapeHtml(lm.label)}">`);
    if (fp && mp) {
      overlay.push(
        `<line x1="${r2(fp.x)}" y1="${r2(fp.y)}" x2="${r2(mp.x)}" y2="${r2(mp.y)}" stroke="#ffffff" stroke-width="1" stroke-dasharray="2 2"/>`,
      );
    }
    if (fp) {
      overlay.push(
        `<circle class="lm-fixed" cx="${r2(fp.x)}" cy="${r2(fp.y)}" r="5.5" fill="none" stroke="#0e1216" stroke-width="3.5"/>` +
          `<circle cx="${r2(fp.x)}" cy="${r2(fp.y)}" r="5.5" fill="none" stroke="${PALETTE.fixedLandmark}" stroke-width="1.8"/>`,
      );
    }
    if (mp) {
      const d = 4.5;
      const path = `M${r2(mp.x - d)} ${r2(mp.y - d)}L${r2(mp.x + d)} ${r2(mp.y + d)}M${r2(mp.x - d)} ${r2(mp.y + d)}L${r2(mp.x + d)} ${r2(mp.y - d)}`;
      overlay.push(
        `<path class="lm-moving" data-cx="${r2(mp.x)}" data-cy="${r2(mp.y)}" d="${path}" stroke="#0e1216" stroke-width="4" fill="none"/>` +
          `<path d="${path}" stroke="${PALETTE.movingLandmark}" stroke-width="1.8" fill="none"/>`,
      );
    }
    const anchor = fp ?? mp!;
    const right = anchor.x < width - 60;
    overlay.push(
      `<text x="${r2(anchor.x + (right ? 9 : -9))}" y="${r2(anchor.y - 7)}" text-anchor="${right ? "start" : "end"}" font-size="11" fill="#ffffff" stroke="#0e1216" stroke-width="3" paint-order="stroke">${escapeHtml(lm.label)}</text>`,
    );
    overlay.push("</g>");
  }
  // Edge ticks pointing at the point of interest.
  const poi = toDisplayPx(locateOnPlane(fixed, layout, at.index, pointMm), layout, width, height);
  const tick = 5;
  overlay.push(
    `<g class="poi" stroke="#ffffff" stroke-width="1.5" data-x="${r2(poi.x)}" data-y="${r2(poi.y)}">` +
      `<line x1="${r2(poi.x)}" y1="0" x2="${r2(poi.x)}" y2="${tick}"/><line x1="${r2(poi.x)}" y1="${height - tick}" x2="${r2(poi.x)}" y2="${height}"/>` +
      `<line x1="0" y1="${r2(poi.y)}" x2="${tick}" y2="${r2(poi.y)}"/><line x1="${width - tick}" y1="${r2(poi.y)}" x2="${width}" y2="${r2(poi.y)}"/></g>`,
  );
  const letters = layout.letters;
  const letterStyle = `font-size="13" font-weight="700" fill="#ffffff" stroke="#0e1216" stroke-width="3" paint-order="stroke"`;
  overlay.push(
    `<g class="letters" ${letterStyle}>` +
      `<text x="7" y="${r2(height / 2)}" dominant-baseline="middle">${letters.left}</text>` +
      `<text x="${width - 7}" y="${r2(height / 2)}" text-anchor="end" dominant-baseline="middle">${letters.right}</text>` +
      `<text x="${r2(width / 2)}" y="19" text-anchor="middle">${letters.top}</text>` +
      `<text x="${r2(width / 2)}" y="${height - 7}" text-anchor="middle">${letters.bottom}</text></g>`,
  );
  const overlayHtml = overlay.join("");

  const names = panelNames(input);
  const images: [PanelKind, RasterImage][] = [
    ["fixed", fixedImage],
    ["moving", movingGrey],
    ["checkerboard", checker],
    ["edges", edgeImage],
  ];
  const panels = images.map(([kind, image]) => ({
    kind,
    html: figure(kind, plane, image, `${names[kind]}, ${plane} slice ${at.index}`, overlayHtml),
  }));
  const onPlane = locateOnPlane(fixed, layout, at.index, pointMm);
  const idx = [0, 0, 0];
  idx[layout.colAxis] = layout.colFlip ? layout.cols - 1 - onPlane.col : onPlane.col;
  idx[layout.rowAxis] = layout.rowFlip ? layout.rows - 1 - onPlane.row : onPlane.row;
  idx[layout.throughAxis] = at.index;
  const world = fixed.indexToWorldPoint([0, 0, 0], idx[0], idx[1], idx[2]);
  return {
    plane,
    layout,
    sliceIndex: at.index,
    pointInside: at.inside,
    planeWorldMm: world[plane === "axial" ? 2 : plane === "coronal" ? 1 : 0],
    width,
    height,
    markedLandmarks: marked,
    panels,
  };
}

/**
 * Column headings of the four panels, e.g. "CT (fixed)", "MR on the CT grid", "checkerboard",
 * "MR edges over CT".
 * @param input - the image names and the edge base
 */
export function panelNames(
  input: Pick<PlanePanelInput, "fixedName" | "movingName" | "edgeBase" | "checkerTileMm">,
): Record<PanelKind, string> {
  const base = input.edgeBase ?? "fixed";
  const baseName = base === "fixed" ? input.fixedName : input.movingName;
  const edgeName = base === "fixed" ? input.movingName : input.fixedName;
  return {
    fixed: `${input.fixedName} (fixed)`,
    moving: `${input.movingName} on the ${input.fixedName} grid`,
    checkerboard: `checkerboard, ${input.checkerTileMm ?? DEFAULTS.checkerTileMm} mm tiles`,
    edges: `${edgeName} edges over ${baseName}`,
  };
}

function figure(
  kind: PanelKind,
  plane: PlaneName,
  image: RasterImage,
  label: string,
  overlay: string,
): string {
  const { width, height } = image;
  return (
    `<figure class="panel" data-kind="${kind}" data-plane="${plane}">` +
    `<svg xmlns="http://www.w3.org/2000/svg" viewBox="0 0 ${width} ${height}" width="${width}" height="${height}" role="img" aria-label="${escapeHtml(label)}" font-family="system-ui, sans-serif">` +
    `<image href="${pngDataUri(image)}" x="0" y="0" width="${width}" height="${height}" preserveAspectRatio="none"/>` +
    `${overlay}</svg></figure>`
  );
}

function r2(v: number): string {
  return (Math.round(v * 100) / 100).toString();
}

function checkSameGrid(a: Volume, b: Volume): void {
  if (a.dims[0] !== b.dims[0] || a.dims[1] !== b.dims[1] || a.dims[2] !== b.dims[2]) {
    throw new CoxaError(
      "BAD_ARGUMENT",
      `the resampled moving image (${b.dims.join("x")}) is not on the fixed grid (${a.dims.join("x")})`,
    );
  }
  let d = 0;
  for (let i = 0; i < 16; i++) d = Math.max(d, Math.abs(a.indexToWorld[i] - b.indexToWorld[i]));
  const scale = Math.max(1, ...a.spacingMm);
  if (d > 1e-3 * scale) {
    throw new CoxaError(
      "BAD_ARGUMENT",
      "the resampled moving image has a different index-to-world affine than the fixed image",
    );
  }
}
