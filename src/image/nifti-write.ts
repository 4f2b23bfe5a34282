/**
 * NIfTI-1 writing: one 348-byte header, 4 zero extension bytes, voxels from byte 352
 * (vox_offset 352, magic "n+1"), little-endian; gzip when the name ends in `.gz`.
 *
 * Geometry: sform (code 1, scanner anatomical, or as given) holds the exact affine; the qform is
 * derived from its rotation part by the standard's method (nifti-quaternion.ts) and set with
 * the same code, so the two agree. An affine with shear has no qform: qform_code 0, sform only.
 * xyzt_units = 2 (mm). The file appears atomically (temporary name, then rename).
 */
import { gzipSync } from "node:zlib";
import { writeFileAtomic } from "../common/atomic.js";
import { CoxaError } from "../common/errors.js";
import { gzipMembers } from "../common/gzip.js";
import { columnNorms, isFiniteMat, type Mat4, relativeDeterminant } from "../geometry/mat4.js";
import { DATATYPES, type Datatype, type VoxelArray } from "./datatypes.js";
import { matrixToQuaternion, shearOf } from "./nifti-quaternion.js";
import type { Volume } from "./volume.js";

export interface WriteNiftiOptions {
  /** Stored datatype; default float32. Integer types round to nearest and clamp to range. */
  datatype?: Datatype;
  /** Extra frames (same grid) written after the volume's own data as dim[4]. */
  frames?: readonly VoxelArray[];
  /** sform_code / qform_code; default 1 (scanner anatomical). */
  xformCode?: number;
  /** Header description (at most 79 characters kept). */
  description?: string;
  /** gzip level 0-9 for `.gz` output; default 6. */
  gzipLevel?: number;
  /** scl_slope / scl_inter written to the header (data are stored as (value - inter) / slope). */
  sclSlope?: number;
  sclInter?: number;
}

/** NIfTI files here are little-endian; a typed array's own bytes are that only on such a host. */
const LITTLE_ENDIAN_HOST = new Uint8Array(new Uint16Array([1]).buffer)[0] === 1;

/** Columns deviating from orthogonality by more than this count as shear (no qform). */
const SHEAR_TOLERANCE = 1e-6;

/**
 * Encode a volume as NIfTI-1 bytes (uncompressed).
 * @throws CoxaError BAD_AFFINE for a singular or non-finite affine, BAD_DIMS when frames differ in size
 */
export function encodeNifti(volume: Volume, options: WriteNiftiOptions = {}): Uint8Array {
  const parts = encodeNiftiParts(volume, options);
  if (parts.length === 1) return parts[0];
  const out = new Uint8Array(parts.reduce((s, p) => s + p.length, 0));
  for (let i = 0, at = 0; i < parts.length; at += parts[i++].length) out.set(parts[i], at);
  return out;
}

/**
 * The bytes of encodeNifti in pieces to be written in order: the header with the voxels, or,
 * when one volume is stored as its own datatype without scaling, the header and then a view of
 * the volume's own voxel memory (no copy of a large volume just to write it).
 */
export function encodeNiftiParts(volume: Volume, options: WriteNiftiOptions = {}): Uint8Array[] {
  const datatype = options.datatype ?? "float32";
  const info = DATATYPES[datatype];
  const frames = [volume.data, ...(options.frames ?? [])];
  const n = volume.count;
  for (const f of frames) {
    if (f.length !== n) throw new CoxaError("BAD_DIMS", `frame has ${f.length} voxels, volume has ${n}`);
  }
  const m = volume.indexToWorld;
  if (!isFiniteMat(m) || relativeDeterminant(m) < 1e-10)
    throw new CoxaError("BAD_AFFINE", "affine is singular or not finite");
  const slope = options.sclSlope ?? 1;
  const inter = options.sclInter ?? 0;
  const asStored =
    frames.length === 1 &&
    slope === 1 &&
    inter === 0 &&
    volume.data.constructor === info.make(0).constructor &&
    LITTLE_ENDIAN_HOST;
  const buffer = new ArrayBuffer(352 + (asStored ? 0 : n * frames.length * info.bytes));
  const view = new DataView(buffer);
  const le = true;
  view.setInt32(0, 348, le);
  // dim
  const dims = [
    frames.length > 1 ? 4 : 3,
    volume.dims[0],
    volume.dims[1],
    volume.dims[2],
    frames.length,
    1,
    1,
    1,
  ];
  for (let a = 0; a < 8; a++) view.setInt16(40 + a * 2, dims[a], le);
  view.setUint8(38, 0x72); // regular = "r"
  view.setInt16(70, info.code, le);
  view.setInt16(72, info.bytes * 8, le);
  const spacing = columnNorms(m);
  const sheared = shearOf(m) > SHEAR_TOLERANCE;
  const q = matrixToQuaternion(m);
  const pixdim = [
    sheared ? 1 : q.qfac,
    spacing[0],
    spacing[1],
    spacing[2],
    frames.length > 1 ? 1 : 0,
    0,
    0,
    0,
  ];
  for (let a = 0; a < 8; a++) view.setFloat32(76 + a * 4, pixdim[a], le);
  view.setFloat32(108, 352, le); // vox_offset
  view.setFloat32(112, slope, le);
  view.setFloat32(116, inter, le);
  view.setUint8(123, 2); // xyzt_units: NIFTI_UNITS_MM
  const desc = (options.description ?? "coxa").slice(0, 79);
  for (let i = 0; i < desc.length; i++) view.setUint8(148 + i, desc.charCodeAt(i) & 0x7f);
  const code = options.xformCode ?? 1;
  view.setInt16(252, sheared ? 0 : code, le); // qform_code
  view.setInt16(254, code, le); // sform_code
  if (!sheared) {
    view.setFloat32(256, q.quaternB, le);
    view.setFloat32(260, q.quaternC, le);
    view.setFloat32(264, q.quaternD, le);
    view.setFloat32(268, q.qoffset[0], le);
    view.setFloat32(272, q.qoffset[1], le);
    view.setFloat32(276, q.qoffset[2], le);
  }
  for (let r = 0; r < 3; r++)
    for (let c = 0; c < 4; c++) view.setFloat32(280 + (r * 4 + c) * 4, m[r * 4 + c], le);
  const magic = [0x6e, 0x2b, 0x31, 0]; // "n+1\0"
  for (let i = 0; i < 4; i++) view.setUint8(344 + i, magic[i]);
  // bytes 348..351: extension flag, all zero
  if (asStored) {
    const d = volume.data;
    return [new Uint8Array(buffer), new Uint8Array(d.buffer, d.byteOffset, d.byteLength)];
  }
  for (let f = 0; f < frames.length; f++) {
    const out = info.make(0).constructor as new (b: ArrayBuffer, o: number, l: number) => VoxelArray;
    storeFrame(
      new out(buffer, 352 + f * n * info.bytes, n),
      frames[f],
      info.integer,
      info.min,
      info.max,
      slope,
      inter,
    );
  }
  return [new Uint8Array(buffer)];
}

function storeFrame(
  out: VoxelArray,
  src: VoxelArray,
  integer: boolean,
  lo: number,
  hi: number,
  slope: number,
  inter: number,
): void {
  const n = out.length;
  const unit = slope === 1 && inter === 0;
  if (unit && src.constructor === out.constructor) {
    // Same datatype, no scaling: a plain copy (every value fits).
    out.set(src as never);
    return;
  }
  if (!integer) {
    if (unit) for (let i = 0; i < n; i++) out[i] = src[i];
    else for (let i = 0; i < n; i++) out[i] = (src[i] - inter) / slope;
    return;
  }
  for (let i = 0; i < n; i++) {
    let v = unit ? src[i] : (src[i] - inter) / slope;
    v = Math.round(v);
    if (v !== v) v = 0;
    out[i] = v < lo ? lo : v > hi ? hi : v;
  }
}

/**
 * Write a volume as NIfTI-1 to `path` (`.nii` or `.nii.gz` by extension), atomically.
 * @throws CoxaError as encodeNifti
 */
export function writeNifti(path: string, volume: Volume, options: WriteNiftiOptions = {}): void {
  if (!path.endsWith(".gz")) writeFileAtomic(path, encodeNiftiParts(volume, options));
  else writeFileAtomic(path, gzipSync(encodeNifti(volume, options), { level: options.gzipLevel ?? 6 }));
}

/**
 * As writeNifti, compressing `.gz` output in parallel chunks off the main thread (several gzip
 * members, src/common/gzip.ts): for large volumes such as a full-resolution CT grid.
 */
export async function writeNiftiAsync(
  path: string,
  volume: Volume,
  options: WriteNiftiOptions = {},
): Promise<void> {
  const parts = encodeNiftiParts(volume, options);
  writeFileAtomic(path, path.endsWith(".gz") ? await gzipMembers(parts, options.gzipLevel ?? 6) : parts);
}

/** Affine as stored in the header for comparison in tests: the sform, rounded to float32. */
export function float32Affine(m: Mat4): Mat4 {
  const out = new Float64Array(m);
  for (let i = 0; i < 12; i++) out[i] = Math.fround(m[i]);
  return out;
}
