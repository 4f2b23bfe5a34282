/**
 * A 3-D image in world space.
 *
 * Conventions (design.md): voxel (i, j, k) with i fastest in memory, flat index
 * i + nx * (j + ny * k); `indexToWorld` maps the voxel CENTRE (i, j, k) to RAS+ millimetres.
 * `worldToIndex` is its inverse. Intensities are in the image's own unit (HU for CT after
 * scl_slope/scl_inter).
 */
import { CoxaError } from "../common/errors.js";
import {
  columnNorms,
  inverse,
  isFiniteMat,
  type Mat4,
  relativeDeterminant,
  transformPoint,
} from "../geometry/mat4.js";
import { allocate, type Datatype, datatypeOf, type VoxelArray } from "./datatypes.js";

export type Dims = readonly [number, number, number];

/** Axis-aligned box in world mm. */
export interface BoxMm {
  min: [number, number, number];
  max: [number, number, number];
}

/** Voxels plus the geometry that places them in the world. */
export class Volume<T extends VoxelArray = VoxelArray> {
  readonly dims: Dims;
  readonly data: T;
  readonly indexToWorld: Mat4;
  readonly worldToIndex: Mat4;

  /**
   * @param dims - [nx, ny, nz], each >= 1
   * @param data - nx*ny*nz voxels, i fastest
   * @param indexToWorld - voxel centre index -> world mm (row-major 4x4)
   * @throws CoxaError BAD_DIMS when sizes disagree, BAD_AFFINE when the affine is singular
   */
  constructor(dims: Dims, data: T, indexToWorld: Mat4) {
    const [nx, ny, nz] = dims;
    if (!(nx >= 1 && ny >= 1 && nz >= 1) || !Number.isInteger(nx * ny * nz)) {
      throw new CoxaError("BAD_DIMS", `volume dimensions ${dims.join("x")} are not positive integers`);
    }
    if (data.length !== nx * ny * nz) {
      throw new CoxaError("BAD_DIMS", `volume has ${data.length} voxels but dimensions ${dims.join("x")}`);
    }
    if (!isFiniteMat(indexToWorld) || relativeDeterminant(indexToWorld) < 1e-10) {
      throw new CoxaError("BAD_AFFINE", "index-to-world affine is singular or not finite");
    }
    this.dims = [nx, ny, nz];
    this.data = data;
    this.indexToWorld = new Float64Array(indexToWorld);
    this.worldToIndex = inverse(this.indexToWorld);
  }

  /** A zero-filled volume on the given grid. */
  static zeros(dims: Dims, indexToWorld: Mat4, datatype: Datatype = "float32"): Volume {
    return new Volume(dims, allocate(datatype, dims[0] * dims[1] * dims[2]), indexToWorld);
  }

  /** Number of voxels. */
  get count(): number {
    return this.data.length;
  }

  /** Datatype of the voxel array. */
  get datatype(): Datatype {
    return datatypeOf(this.data);
  }

  /** Voxel spacing in mm along i, j, k (column norms of the affine). */
  get spacingMm(): [number, number, number] {
    return columnNorms(this.indexToWorld);
  }

  /** A volume on the same grid holding other data (same length). */
  withData<U extends VoxelArray>(data: U): Volume<U> {
    return new Volume(this.dims, data, this.indexToWorld);
  }

  /** out = world mm of voxel centre (i, j, k); fractional indices allowed. */
  indexToWorldPoint(out: Float64Array | number[], i: number, j: number, k: number): typeof out {
    return transformPoint(out, this.indexToWorld, i, j, k);
  }

  /** out = continuous voxel index of world point (x, y, z) mm. */
  worldToIndexPoint(out: Float64Array | number[], x: number, y: number, z: number): typeof out {
    return transformPoint(out, this.worldToIndex, x, y, z);
  }

  /** World mm of the grid centre. */
  centerWorld(): [number, number, number] {
    const p = [0, 0, 0];
    this.indexToWorldPoint(p, (this.dims[0] - 1) / 2, (this.dims[1] - 1) / 2, (this.dims[2] - 1) / 2);
    return [p[0], p[1], p[2]];
  }

  /**
   * World bounding box of the grid.
   * @param edges - true (default): the outer voxel faces (index -0.5 .. n-0.5); false: voxel centres
   */
  boundsWorld(edges = true): BoxMm {
    const h = edges ? 0.5 : 0;
    const min: [number, number, number] = [Infinity, Infinity, Infinity];
    const max: [number, number, number] = [-Infinity, -Infinity, -Infinity];
    const p = [0, 0, 0];
    for (let corner = 0; corner < 8; corner++) {
      const i = corner & 1 ? this.dims[0] - 1 + h : -h;
      const j = corner & 2 ? this.dims[1] - 1 + h : -h;
      const k = corner & 4 ? this.dims[2] - 1 + h : -h;
      this.indexToWorldPoint(p, i, j, k);
      for (let a = 0; a < 3; a++) {
        if (p[a] < min[a]) min[a] = p[a];
        if (p[a] > max[a]) max[a] = p[a];
      }
    }
    return { min, max };
  }

  /** Orientation code, e.g. "RAS" or "LPS": the world direction each voxel axis points to. */
  orientation(): string {
    return orientationCode(this.indexToWorld);
  }
}

/**
 * Orientation letters of an index-to-world affine: for voxel axes i, j, k the world direction
 * (R/L, A/P, S/I) they point to most, each world axis used once (largest components assigned
 * first). RAS+ world: +x = R, +y = A, +z = S.
 */
export function orientationCode(m: Mat4): string {
  const positive = ["R", "A", "S"];
  const negative = ["L", "P", "I"];
  const result = ["", "", ""];
  const usedAxis = [false, false, false];
  const usedCol = [false, false, false];
  const norms = columnNorms(m);
  for (let round = 0; round < 3; round++) {
    let best = -1;
    let bestCol = 0;
    let bestAxis = 0;
    for (let c = 0; c < 3; c++) {
      if (usedCol[c]) continue;
      for (let a = 0; a < 3; a++) {
        if (usedAxis[a]) continue;
        const v = Math.abs(m[a * 4 + c]) / (norms[c] || 1);
        if (v > best) {
          best = v;
          bestCol = c;
          bestAxis = a;
        }
      }
    }
    usedCol[bestCol] = true;
    usedAxis[bestAxis] = true;
    result[bestCol] = m[bestAxis * 4 + bestCol] >= 0 ? positive[bestAxis] : negative[bestAxis];
  }
  return result.join("");
}

/** Min, max and mean over finite voxels (mean by Neumaier-compensated summation). */
export function intensityStats(data: VoxelArray): { min: number; max: number; mean: number; finite: number } {
  let min = Infinity;
  let max = -Infinity;
  let sum = 0;
  let comp = 0;
  let finite = 0;
  for (let i = 0; i < data.length; i++) {
    const v = data[i];
    if (v !== v || v === Infinity || v === -Infinity) continue;
    if (v < min) min = v;
    if (v > max) max = v;
    const t = sum + v;
    comp += Math.abs(sum) >= Math.abs(v) ? sum - t + v : v - t + sum;
    sum = t;
    finite++;
  }
  return finite > 0
    ? { min, max, mean: (sum + comp) / finite, finite }
    : { min: NaN, max: NaN, mean: NaN, finite: 0 };
}
