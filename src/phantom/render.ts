/**
 * Rasterising analytic structures onto a voxel grid: labels and CT or MR intensities.
 *
 * Conventions: the grid is dims [nx, ny, nz], flat index i + nx (j + ny k); `indexToFrame` maps a
 * voxel centre index to the frame the shapes are described in (mm). Structures are painted in
 * order ("painter's algorithm"): a later structure overrides an earlier one. Each structure has
 * layers (e.g. cortex, then the trabecular interior `inset` mm below the surface); layer l covers
 * the region d + inset_l < 0 of the structure's signed distance d.
 *
 * Partial volume: a layer's base value is blended in with weight w = clamp(1/2 - (d + inset) / h, 0, 1),
 * where h is the grid's partial-volume width in mm, so edges are anti-aliased; the label (and the
 * tissue index, when a tissue map is kept) is the layer's where d + inset < 0 (at the voxel centre).
 * Texture is a separate pass (applyTexture) over the tissue map, so each voxel's texture is
 * evaluated once however many structures were painted over it.
 *
 * Speed: voxels are visited in 4x4x4 blocks inside each structure's bounding box. A block whose
 * centre distance shows it entirely outside (or entirely inside) every layer is skipped (or filled)
 * without evaluating the shape per voxel; the test uses the block's half-diagonal with a safety
 * factor of 1.5 because the distances are estimates. Blocks are aligned to the global grid, so the
 * result does not depend on how the k range is split between worker threads.
 */
import { CoxaError } from "../common/errors.js";
import { inverse, type Mat4, transformPoint } from "../geometry/mat4.js";
import { type Bounds, compileShape, evalProgram, type Program, type Shape } from "./sdf.js";
import { valueNoise } from "./texture.js";
import { TISSUE_NAMES, TISSUES, type TissueName, tissueIndex } from "./tissues.js";

/** One layer of a structure. */
export interface Layer {
  /** Depth below the structure surface where the layer starts, mm (0 = the surface). */
  inset: number;
  tissue: TissueName;
  /** Label value written where the layer is (0..255). */
  label: number;
}

/** A named solid painted onto the grid. */
export interface Structure {
  name: string;
  shape: Shape;
  /** Outermost first, insets increasing. */
  layers: readonly Layer[];
}

/** A structure ready for rasterising (plain data: it can be posted to a worker thread). */
export interface CompiledStructure {
  name: string;
  prog: Program;
  insets: Float64Array;
  tissues: Int32Array;
  labels: Int32Array;
}

/**
 * Compile structures for renderStructures.
 * @throws CoxaError BAD_ARGUMENT for layers out of order or labels outside 0..255
 */
export function compileStructures(structures: readonly Structure[]): CompiledStructure[] {
  return structures.map((s) => {
    if (s.layers.length === 0) throw new CoxaError("BAD_ARGUMENT", `structure ${s.name} has no layers`);
    for (let l = 0; l < s.layers.length; l++) {
      const layer = s.layers[l];
      if (l > 0 && layer.inset < s.layers[l - 1].inset) {
        throw new CoxaError("BAD_ARGUMENT", `structure ${s.name}: layer insets must increase`);
      }
      if (!Number.isInteger(layer.label) || layer.label < 0 || layer.label > 255) {
        throw new CoxaError("BAD_ARGUMENT", `structure ${s.name}: label ${layer.label} is not in 0..255`);
      }
    }
    return {
      name: s.name,
      prog: compileShape(s.shape),
      insets: Float64Array.from(s.layers.map((l) => l.inset)),
      tissues: Int32Array.from(s.layers.map((l) => tissueIndex(l.tissue))),
      labels: Int32Array.from(s.layers.map((l) => l.label)),
    };
  });
}

/** What to paint and where. */
export interface RenderJob {
  structures: readonly CompiledStructure[];
  dims: readonly [number, number, number];
  /** Voxel index -> shape frame (mm), row-major 4x4. */
  indexToFrame: Mat4;
  /** Which intensity of the tissues to paint. */
  modality: "ct" | "mr";
  /** Partial-volume width h in mm (about the voxel size). */
  partialMm: number;
  /** Texture lattice (texture.ts); texture is added after painting when `texture` is true. */
  lattice?: Float32Array;
  /** Add each voxel's tissue texture after painting this slab (needs `tissueMap`). */
  texture?: boolean;
  /** Slab of slices to paint, [kStart, kEnd). */
  kStart: number;
  kEnd: number;
  /** Intensity volume (whole grid), painted in place. */
  values: Float32Array;
  /** Label volume (whole grid), painted in place; optional. */
  labels?: Uint8Array;
  /** Tissue index (TISSUE_NAMES) per voxel, painted in place; optional. */
  tissueMap?: Uint8Array;
}

const BLOCK = 4;

/** Base value and texture amplitude of each tissue for one modality (additive for CT, relative for MR). */
function tissueTables(modality: "ct" | "mr", gain = 1) {
  const n = TISSUE_NAMES.length;
  const base = new Float64Array(n);
  const amp = new Float64Array(n);
  const invScale = new Float64Array(n);
  for (let t = 0; t < n; t++) {
    const tc = TISSUES[TISSUE_NAMES[t]];
    base[t] = modality === "ct" ? tc.hu : tc.mr;
    amp[t] = gain * (modality === "ct" ? tc.huTexture : tc.mr * tc.mrTexture);
    invScale[t] = 1 / tc.textureMm;
  }
  return { base, amp, invScale };
}

/**
 * Paint the structures into `job.values` / `job.labels` for slices kStart..kEnd-1.
 * @throws CoxaError BAD_ARGUMENT when buffers do not match the grid
 */
export function renderStructures(job: RenderJob): void {
  const [nx, ny, nz] = job.dims;
  const n = nx * ny * nz;
  if (
    job.values.length !== n ||
    (job.labels && job.labels.length !== n) ||
    (job.tissueMap && job.tissueMap.length !== n)
  ) {
    throw new CoxaError("BAD_ARGUMENT", `render buffers must hold ${nx}x${ny}x${nz} voxels`);
  }
  const m = job.indexToFrame;
  const h = job.partialMm;
  const invH = 1 / h;
  const { base } = tissueTables(job.modality);
  const values = job.values;
  const labels = job.labels;
  const tissueMap = job.tissueMap;
  const kStart = Math.max(0, job.kStart);
  const kEnd = Math.min(nz, job.kEnd);
  const frameToIndex = inverse(m);
  // Half-diagonal (mm) of a block, by the triangle inequality over the affine's columns.
  const colNorm = [Math.hypot(m[0], m[4], m[8]), Math.hypot(m[1], m[5], m[9]), Math.hypot(m[2], m[6], m[10])];
  const blockRadius = 0.5 * (BLOCK - 1) * (colNorm[0] + colNorm[1] + colNorm[2]);
  const margin = 1.5 * blockRadius + 0.5 * h;
  const p = [0, 0, 0];
  for (const s of job.structures) {
    const prog = s.prog;
    const stack = new Float64Array(Math.max(1, prog.depth));
    const nLayers = s.insets.length;
    const minInset = s.insets[0];
    const maxInset = s.insets[nLayers - 1];
    const lastTissue = s.tissues[nLayers - 1];
    const lastValue = base[lastTissue];
    const lastLabel = s.labels[nLayers - 1];
    const range = indexRange(prog.bounds, frameToIndex, job.dims, h);
    if (range === null) continue;
    const k0 = Math.max(range[4], kStart);
    const k1 = Math.min(range[5], kEnd - 1);
    if (k0 > k1) continue;
    const bk0 = Math.floor(k0 / BLOCK) * BLOCK;
    const bj0 = Math.floor(range[2] / BLOCK) * BLOCK;
    const bi0 = Math.floor(range[0] / BLOCK) * BLOCK;
    for (let bk = bk0; bk <= k1; bk += BLOCK) {
      const kLo = Math.max(bk, k0);
      const kHi = Math.min(bk + BLOCK - 1, k1);
      for (let bj = bj0; bj <= range[3]; bj += BLOCK) {
        const jLo = Math.max(bj, range[2]);
        const jHi = Math.min(bj + BLOCK - 1, range[3]);
        for (let bi = bi0; bi <= range[1]; bi += BLOCK) {
          const iLo = Math.max(bi, range[0]);
          const iHi = Math.min(bi + BLOCK - 1, range[1]);
          // Classify the whole block from the distance at its (global, aligned) centre.
          const c = BLOCK / 2 - 0.5;
          transformPoint(p, m, bi + c, bj + c, bk + c);
          const dc = evalProgram(prog, stack, p[0], p[1], p[2]);
          if (dc - margin > 0.5 * h - minInset) continue;
          const inside = dc + margin < -0.5 * h - maxInset;
          for (let k = kLo; k <= kHi; k++) {
            for (let j = jLo; j <= jHi; j++) {
              const row = nx * (j + ny * k);
              for (let i = iLo; i <= iHi; i++) {
                const idx = row + i;
                if (inside) {
                  values[idx] = lastValue;
                  if (labels) labels[idx] = lastLabel;
                  if (tissueMap) tissueMap[idx] = lastTissue;
                  continue;
                }
                const x = m[0] * i + m[1] * j + m[2] * k + m[3];
                const y = m[4] * i + m[5] * j + m[6] * k + m[7];
                const z = m[8] * i + m[9] * j + m[10] * k + m[11];
                const d = evalProgram(prog, stack, x, y, z);
                for (let l = 0; l < nLayers; l++) {
                  const dl = d + s.insets[l];
                  let w = 0.5 - dl * invH;
                  if (w <= 0) break;
                  if (w > 1) w = 1;
                  const old = values[idx];
                  values[idx] = old + w * (base[s.tissues[l]] - old);
                  if (dl < 0) {
                    if (labels) labels[idx] = s.labels[l];
                    if (tissueMap) tissueMap[idx] = s.tissues[l];
                  }
                }
              }
            }
          }
        }
      }
    }
  }

  if (job.texture) applyTexture(job);
}

const NOISE_OFFSET = 7.31; // lattice cells between tissues, decorrelates their textures

/**
 * Add each voxel's tissue texture (two octaves of value noise in the shape frame) for slices
 * kStart..kEnd-1: CT adds amplitude * noise HU, MR multiplies by 1 + relative amplitude * noise.
 * @throws CoxaError BAD_ARGUMENT without a tissue map or lattice
 */
export function applyTexture(job: RenderJob): void {
  const tissueMap = job.tissueMap;
  const lattice = job.lattice;
  if (!tissueMap || !lattice) throw new CoxaError("BAD_ARGUMENT", "texture needs a tissue map and a lattice");
  const [nx, ny, nz] = job.dims;
  const { amp, invScale } = tissueTables(job.modality);
  const m = job.indexToFrame;
  const values = job.values;
  const kStart = Math.max(0, job.kStart);
  const kEnd = Math.min(nz, job.kEnd);
  for (let k = kStart; k < kEnd; k++) {
    for (let j = 0; j < ny; j++) {
      const row = nx * (j + ny * k);
      for (let i = 0; i < nx; i++) {
        const idx = row + i;
        const t = tissueMap[idx];
        const a = amp[t];
        if (a === 0) continue;
        const sc = invScale[t];
        const off = t * NOISE_OFFSET;
        const x = (m[0] * i + m[1] * j + m[2] * k + m[3]) * sc;
        const y = (m[4] * i + m[5] * j + m[6] * k + m[7]) * sc;
        const z = (m[8] * i + m[9] * j + m[10] * k + m[11]) * sc;
        const n1 = valueNoise(lattice, x + off, y + off, z + off);
        const n2 = valueNoise(lattice, 2.03 * x - off, 2.03 * y + off, 2.03 * z - off);
        values[idx] += a * (0.7 * n1 + 0.45 * n2);
      }
    }
  }
}

/** Inclusive voxel index ranges [i0, i1, j0, j1, k0, k1] covering `bounds` (padded by h), or null. */
function indexRange(
  bounds: Bounds,
  frameToIndex: Mat4,
  dims: readonly [number, number, number],
  h: number,
): [number, number, number, number, number, number] | null {
  const lo = [Infinity, Infinity, Infinity];
  const hi = [-Infinity, -Infinity, -Infinity];
  const q = [0, 0, 0];
  for (let corner = 0; corner < 8; corner++) {
    const x = corner & 1 ? bounds.max[0] + h : bounds.min[0] - h;
    const y = corner & 2 ? bounds.max[1] + h : bounds.min[1] - h;
    const z = corner & 4 ? bounds.max[2] + h : bounds.min[2] - h;
    transformPoint(q, frameToIndex, x, y, z);
    for (let a = 0; a < 3; a++) {
      lo[a] = Math.min(lo[a], q[a]);
      hi[a] = Math.max(hi[a], q[a]);
    }
  }
  const out: [number, number, number, number, number, number] = [0, 0, 0, 0, 0, 0];
  for (let a = 0; a < 3; a++) {
    const a0 = Math.max(0, Math.floor(lo[a]));
    const a1 = Math.min(dims[a] - 1, Math.ceil(hi[a]));
    if (a0 > a1) return null;
    out[2 * a] = a0;
    out[2 * a + 1] = a1;
  }
  return out;
}
