/**
 * Orthogonal slices of a volume through a world point, laid out for display.
 *
 * Conventions:
 * - Slices follow the volume's own VOXEL grid: the axial plane is the voxel plane whose
 *   through-plane axis points most nearly along world z (S/I), and so on (the axis assignment of
 *   `orientationCode`). For an oblique grid the plane is therefore tilted by the grid's obliquity;
 *   no resampling happens here.
 * - Display is RADIOLOGICAL: axial seen from the feet (patient right on image left, anterior up),
 *   coronal seen from the front (patient right on image left, superior up), sagittal seen from the
 *   patient's left (anterior on image left, superior up). The voxel axes are flipped as needed to
 *   get there, so the page looks the same for RAS-, LPS- or otherwise-stored images.
 * - Slice values are row-major, top row first (row r, column c at r * cols + c). Display pixel
 *   coordinates are continuous: 0 at the left/top edge, `width`/`height` at the right/bottom
 *   edge, pixel (x, y) covers [x, x + 1) x [y, y + 1), slice voxel column c has its centre at
 *   (c + 0.5) * width / cols.
 * - World = RAS+ mm; `indexToWorld` maps voxel centres (design.md).
 */
import { CoxaError } from "../common/errors.js";
import type { VoxelArray } from "../image/datatypes.js";
import { orientationCode, type Volume } from "../image/volume.js";

/** The three orthogonal display planes (normal along world z, y and x respectively). */
export type PlaneName = "axial" | "coronal" | "sagittal";

/** The three planes in report order. */
export const PLANES: readonly PlaneName[] = ["axial", "coronal", "sagittal"];

/** One sentence for the page: how the panels are oriented. */
export const DISPLAY_CONVENTION =
  "Radiological display: axial seen from the feet and coronal seen from the front, both with the patient's right on the image left; sagittal seen from the patient's left, anterior on the image left. Letters on the panel edges name the patient direction.";

/** Patient direction letters at the four panel edges. */
export interface EdgeLetters {
  left: string;
  right: string;
  top: string;
  bottom: string;
}

/**
 * Per plane: which world axis (0 = x R/L, 1 = y A/P, 2 = z S/I) runs along the display columns
 * and rows, and which world direction (+1 / -1 in RAS) a growing column or row index points to.
 */
const PLANE_AXES: Record<
  PlaneName,
  { colWorld: 0 | 1 | 2; colSign: 1 | -1; rowWorld: 0 | 1 | 2; rowSign: 1 | -1; normalWorld: 0 | 1 | 2 }
> = {
  // columns grow towards patient left (-x), rows towards posterior (-y)
  axial: { colWorld: 0, colSign: -1, rowWorld: 1, rowSign: -1, normalWorld: 2 },
  // columns towards patient left (-x), rows towards inferior (-z)
  coronal: { colWorld: 0, colSign: -1, rowWorld: 2, rowSign: -1, normalWorld: 1 },
  // columns towards posterior (-y), rows towards inferior (-z)
  sagittal: { colWorld: 1, colSign: -1, rowWorld: 2, rowSign: -1, normalWorld: 0 },
};

const LETTERS: Record<PlaneName, EdgeLetters> = {
  axial: { left: "R", right: "L", top: "A", bottom: "P" },
  coronal: { left: "R", right: "L", top: "S", bottom: "I" },
  sagittal: { left: "A", right: "P", top: "S", bottom: "I" },
};

/** How one plane of a voxel grid is laid out on screen. */
export interface PlaneLayout {
  plane: PlaneName;
  /** Voxel axis (0 = i, 1 = j, 2 = k) along the display columns. */
  colAxis: 0 | 1 | 2;
  /** True when the column index runs against the voxel index (col = n - 1 - index). */
  colFlip: boolean;
  /** Voxel axis along the display rows. */
  rowAxis: 0 | 1 | 2;
  /** True when the row index runs against the voxel index. */
  rowFlip: boolean;
  /** Voxel axis across the plane. */
  throughAxis: 0 | 1 | 2;
  /** Number of columns and rows of the slice (voxels). */
  cols: number;
  rows: number;
  /** Voxel spacing along the columns / rows / through the plane, mm. */
  colSpacingMm: number;
  rowSpacingMm: number;
  throughSpacingMm: number;
  /** Distance in mm between neighbouring slices measured along the plane normal. */
  sliceDistanceMm: number;
  /** Patient direction at each edge. */
  letters: EdgeLetters;
}

/** The geometry part of a Volume that slicing needs. */
export type GridLike = Pick<Volume, "dims" | "indexToWorld" | "worldToIndex" | "spacingMm">;

/**
 * Layout of one plane of a voxel grid in the radiological display convention.
 * @param grid - the volume (only dims and affine are used)
 * @param plane - axial, coronal or sagittal
 */
export function planeLayout(grid: GridLike, plane: PlaneName): PlaneLayout {
  const code = orientationCode(grid.indexToWorld);
  const axisOfWorld: number[] = [-1, -1, -1];
  const signOfAxis: number[] = [1, 1, 1];
  for (let c = 0; c < 3; c++) {
    const letter = code[c];
    const world = "RL".includes(letter) ? 0 : "AP".includes(letter) ? 1 : 2;
    axisOfWorld[world] = c;
    signOfAxis[c] = "RAS".includes(letter) ? 1 : -1;
  }
  const spec = PLANE_AXES[plane];
  const colAxis = axisOfWorld[spec.colWorld] as 0 | 1 | 2;
  const rowAxis = axisOfWorld[spec.rowWorld] as 0 | 1 | 2;
  const throughAxis = axisOfWorld[spec.normalWorld] as 0 | 1 | 2;
  const spacing = grid.spacingMm;
  const m = grid.indexToWorld;
  // Distance between slices along the plane normal: |det| / |c_col x c_row| (exact for oblique grids).
  const ax = [m[colAxis], m[4 + colAxis], m[8 + colAxis]];
  const bx = [m[rowAxis], m[4 + rowAxis], m[8 + rowAxis]];
  const cross = Math.hypot(
    ax[1] * bx[2] - ax[2] * bx[1],
    ax[2] * bx[0] - ax[0] * bx[2],
    ax[0] * bx[1] - ax[1] * bx[0],
  );
  const det = Math.abs(
    m[0] * (m[5] * m[10] - m[6] * m[9]) -
      m[1] * (m[4] * m[10] - m[6] * m[8]) +
      m[2] * (m[4] * m[9] - m[5] * m[8]),
  );
  return {
    plane,
    colAxis,
    colFlip: signOfAxis[colAxis] !== spec.colSign,
    rowAxis,
    rowFlip: signOfAxis[rowAxis] !== spec.rowSign,
    throughAxis,
    cols: grid.dims[colAxis],
    rows: grid.dims[rowAxis],
    colSpacingMm: spacing[colAxis],
    rowSpacingMm: spacing[rowAxis],
    throughSpacingMm: spacing[throughAxis],
    sliceDistanceMm: cross > 0 ? det / cross : spacing[throughAxis],
    letters: { ...LETTERS[plane] },
  };
}

/** Where a world point falls relative to a plane of the grid. */
export interface PlaneLocation {
  /** Continuous slice column and row (voxel units, 0 = centre of the first voxel). */
  col: number;
  row: number;
  /** Continuous index along the through-plane axis. */
  through: number;
  /** Signed distance from the slice plane in mm (along the plane normal). */
  distanceMm: number;
}

/**
 * Locate a world point on a plane layout.
 * @param grid - the sliced volume
 * @param layout - from planeLayout(grid, plane)
 * @param sliceIndex - voxel index of the displayed slice along `layout.throughAxis`
 * @param pointMm - world point, RAS mm
 */
export function locateOnPlane(
  grid: GridLike,
  layout: PlaneLayout,
  sliceIndex: number,
  pointMm: readonly number[],
): PlaneLocation {
  const m = grid.worldToIndex;
  const x = pointMm[0];
  const y = pointMm[1];
  const z = pointMm[2];
  const idx = [
    m[0] * x + m[1] * y + m[2] * z + m[3],
    m[4] * x + m[5] * y + m[6] * z + m[7],
    m[8] * x + m[9] * y + m[10] * z + m[11],
  ];
  const ci = idx[layout.colAxis];
  const ri = idx[layout.rowAxis];
  return {
    col: layout.colFlip ? layout.cols - 1 - ci : ci,
    row: layout.rowFlip ? layout.rows - 1 - ri : ri,
    through: idx[layout.throughAxis],
    distanceMm: (idx[layout.throughAxis] - sliceIndex) * layout.sliceDistanceMm,
  };
}

/**
 * The slice index (voxel index along the through-plane axis) nearest to a world point, clamped
 * into the grid.
 * @param grid - the volume
 * @param layout - plane layout of the volume
 * @param pointMm - world point, RAS mm
 * @returns the index and whether the point lies within the grid's extent along that axis
 */
export function sliceIndexAt(
  grid: GridLike,
  layout: PlaneLayout,
  pointMm: readonly number[],
): { index: number; inside: boolean } {
  const through = locateOnPlane(grid, layout, 0, pointMm).through;
  const n = grid.dims[layout.throughAxis];
  const rounded = Math.round(through);
  const index = Math.min(n - 1, Math.max(0, Number.isFinite(rounded) ? rounded : 0));
  return { index, inside: through >= -0.5 && through <= n - 0.5 };
}

/**
 * out = the slice `sliceIndex` of `data` (a voxel array on the grid, i fastest) in display
 * order (row-major, top row first). Works for intensities and masks alike.
 * @param out - layout.rows * layout.cols values
 * @param data - voxel array of the grid
 * @param dims - grid dimensions [nx, ny, nz]
 * @param layout - plane layout of the grid
 * @param sliceIndex - 0 .. dims[layout.throughAxis] - 1
 * @returns out
 * @throws CoxaError BAD_ARGUMENT on size mismatch or an index outside the grid
 */
export function extractPlane<T extends Float32Array | Float64Array | Uint8Array>(
  out: T,
  data: VoxelArray,
  dims: readonly [number, number, number],
  layout: PlaneLayout,
  sliceIndex: number,
): T {
  const [nx, ny, nz] = dims;
  if (data.length !== nx * ny * nz) {
    throw new CoxaError("BAD_ARGUMENT", `voxel array has ${data.length} values for a ${dims.join("x")} grid`);
  }
  const cols = dims[layout.colAxis];
  const rows = dims[layout.rowAxis];
  if (out.length !== cols * rows) {
    throw new CoxaError("BAD_ARGUMENT", `slice buffer has ${out.length} values for ${cols}x${rows}`);
  }
  if (!Number.isInteger(sliceIndex) || sliceIndex < 0 || sliceIndex >= dims[layout.throughAxis]) {
    throw new CoxaError("BAD_ARGUMENT", `slice index ${sliceIndex} is outside the grid`);
  }
  const strides = [1, nx, nx * ny];
  const colStride = strides[layout.colAxis];
  const rowStride = strides[layout.rowAxis];
  const base =
    sliceIndex * strides[layout.throughAxis] +
    (layout.colFlip ? (cols - 1) * colStride : 0) +
    (layout.rowFlip ? (rows - 1) * rowStride : 0);
  const colStep = layout.colFlip ? -colStride : colStride;
  const rowStep = layout.rowFlip ? -rowStride : rowStride;
  let q = 0;
  for (let r = 0, rowStart = base; r < rows; r++, rowStart += rowStep) {
    for (let c = 0, idx = rowStart; c < cols; c++, idx += colStep) out[q++] = data[idx];
  }
  return out;
}

/** A slice of a volume ready for display. */
export interface PlaneSlice {
  layout: PlaneLayout;
  /** Voxel index of the slice along `layout.throughAxis`. */
  sliceIndex: number;
  /** False when the requested point lies outside the grid along the through-plane axis. */
  pointInside: boolean;
  /** Values, row-major, top row first (layout.rows x layout.cols). */
  values: Float32Array;
}

/**
 * The slice of `volume` in `plane` that passes through (nearest to) a world point.
 * @param volume - image to slice
 * @param plane - axial, coronal or sagittal
 * @param pointMm - world point, RAS mm
 */
export function sliceThrough(volume: Volume, plane: PlaneName, pointMm: readonly number[]): PlaneSlice {
  const layout = planeLayout(volume, plane);
  const at = sliceIndexAt(volume, layout, pointMm);
  const values = extractPlane(
    new Float32Array(layout.cols * layout.rows),
    volume.data,
    volume.dims,
    layout,
    at.index,
  );
  return { layout, sliceIndex: at.index, pointInside: at.inside, values };
}

/**
 * Display size of a plane honouring the physical aspect ratio: the longer physical side gets
 * `maxPx` pixels, the other side is scaled by the same mm-per-pixel.
 * @param layout - plane layout (spacing per display axis)
 * @param maxPx - pixels for the longer side (>= 1)
 * @returns width and height in pixels and the pixels per mm along each display axis
 */
export function displaySize(
  layout: PlaneLayout,
  maxPx: number,
): { width: number; height: number; pxPerMmX: number; pxPerMmY: number } {
  const widthMm = layout.cols * layout.colSpacingMm;
  const heightMm = layout.rows * layout.rowSpacingMm;
  const scale = maxPx / Math.max(widthMm, heightMm);
  const width = Math.max(1, Math.round(widthMm * scale));
  const height = Math.max(1, Math.round(heightMm * scale));
  return { width, height, pxPerMmX: width / widthMm, pxPerMmY: height / heightMm };
}

/** Interpolation for scaling a slice to display size. */
export type ScaleMode = "nearest" | "bilinear";

/**
 * out = `src` (cols x rows, row-major) scaled to width x height. Display pixel (x, y) samples the
 * slice at column (x + 0.5) * cols / width - 0.5 and row (y + 0.5) * rows / height - 0.5, clamped
 * to the slice (edge voxels extend to the border). Use "nearest" for masks and labels.
 * NaN samples propagate under bilinear interpolation.
 * @param out - width * height values
 * @param src - slice values
 * @param cols - slice columns
 * @param rows - slice rows
 * @param width - output pixels per row
 * @param height - output rows
 * @param mode - nearest or bilinear
 * @returns out
 * @throws CoxaError BAD_ARGUMENT on size mismatch
 */
export function scaleSlice<T extends Float32Array | Uint8Array>(
  out: T,
  src: ArrayLike<number>,
  cols: number,
  rows: number,
  width: number,
  height: number,
  mode: ScaleMode,
): T {
  if (src.length !== cols * rows) {
    throw new CoxaError("BAD_ARGUMENT", `slice has ${src.length} values for ${cols}x${rows}`);
  }
  if (out.length !== width * height) {
    throw new CoxaError("BAD_ARGUMENT", `output has ${out.length} values for ${width}x${height}`);
  }
  const sx = cols / width;
  const sy = rows / height;
  let q = 0;
  if (mode === "nearest") {
    for (let y = 0; y < height; y++) {
      let r = Math.floor((y + 0.5) * sy);
      if (r > rows - 1) r = rows - 1;
      const rowBase = r * cols;
      for (let x = 0; x < width; x++) {
        let c = Math.floor((x + 0.5) * sx);
        if (c > cols - 1) c = cols - 1;
        out[q++] = src[rowBase + c];
      }
    }
    return out;
  }
  for (let y = 0; y < height; y++) {
    let fy = (y + 0.5) * sy - 0.5;
    if (fy < 0) fy = 0;
    if (fy > rows - 1) fy = rows - 1;
    const r0 = Math.floor(fy);
    const r1 = r0 + 1 < rows ? r0 + 1 : r0;
    const wy = fy - r0;
    const base0 = r0 * cols;
    const base1 = r1 * cols;
    for (let x = 0; x < width; x++) {
      let fx = (x + 0.5) * sx - 0.5;
      if (fx < 0) fx = 0;
      if (fx > cols - 1) fx = cols - 1;
      const c0 = Math.floor(fx);
      const c1 = c0 + 1 < cols ? c0 + 1 : c0;
      const wx = fx - c0;
      const top = src[base0 + c0] + wx * (src[base0 + c1] - src[base0 + c0]);
      const bottom = src[base1 + c0] + wx * (src[base1 + c1] - src[base1 + c0]);
      out[q++] = top + wy * (bottom - top);
    }
  }
  return out;
}

/**
 * Display pixel coordinates (continuous, see module header) of a slice position.
 * @param location - from locateOnPlane
 * @param layout - the plane layout
 * @param width - display width in pixels
 * @param height - display height in pixels
 */
export function toDisplayPx(
  location: Pick<PlaneLocation, "col" | "row">,
  layout: PlaneLayout,
  width: number,
  height: number,
): { x: number; y: number } {
  return {
    x: ((location.col + 0.5) * width) / layout.cols,
    y: ((location.row + 0.5) * height) / layout.rows,
  };
}
