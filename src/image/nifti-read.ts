/**
 * NIfTI-1 and NIfTI-2 reading (single-file `.nii`, gzip-compressed `.nii.gz`), either byte order.
 *
 * Header fields are parsed by nifti-reader-js; the checks, the choice of affine and the voxel
 * conversion are ours and follow the NIfTI-1 standard (nifti1.h):
 *  - affine: sform when sform_code > 0, else qform (quaternion, qfac) when qform_code > 0, else
 *    diag(pixdim[1..3]) with no offset ("method 1"); NIfTI-2 likewise;
 *  - scl_slope = 0 (or not finite) means no scaling; otherwise value = slope * stored + inter;
 *  - 4-D (or higher) data: one 3-D volume is read, the first unless `volume` says otherwise.
 *
 * Guards: the file is checked before data are decoded (size of header, magic, dims, datatype,
 * voxel sizes, affine) and gzip input is never inflated beyond what the header declares plus a
 * margin, so a small file cannot expand into gigabytes.
 */
import { existsSync, readFileSync, statSync } from "node:fs";
import { readFile } from "node:fs/promises";
import { promisify } from "node:util";
import { gunzip, gunzipSync, constants as zlibConstants } from "node:zlib";
import { type NIFTI1, type NIFTI2, readHeader } from "nifti-reader-js";
import { CoxaError } from "../common/errors.js";
import { identity, isFiniteMat, type Mat4, relativeDeterminant } from "../geometry/mat4.js";
import { DATATYPES, type Datatype, datatypeFromCode, type VoxelArray } from "./datatypes.js";
import { inflateInWorker } from "./inflate.js";
import { quaternionToMatrix } from "./nifti-quaternion.js";
import { Volume } from "./volume.js";

/** Hard limit on voxels of one file: 2^31 (dims beyond this are refused). */
export const MAX_VOXELS_LIMIT = 2 ** 31;

export interface ReadNiftiOptions {
  /** 0-based index of the 3-D volume to read from 4-D (or higher) data; default 0. */
  volume?: number;
  /** Refuse files declaring more voxels (all volumes together) than this; default 2^31. */
  maxVoxels?: number;
  /** Keep the stored datatype when no scaling applies (default true); false always gives Float32Array. */
  keepDatatype?: boolean;
}

/** What the header said, after validation. */
export interface NiftiHeaderInfo {
  version: 1 | 2;
  littleEndian: boolean;
  /** Stored datatype. */
  datatype: Datatype;
  /** dim[1..dim[0]] */
  shape: number[];
  /** pixdim[1..3] in mm */
  pixdimMm: [number, number, number];
  /** Number of 3-D volumes (product of dim[4..]). */
  frames: number;
  sclSlope: number;
  sclInter: number;
  /** True when scl_slope/scl_inter changed the stored values. */
  scaled: boolean;
  qformCode: number;
  sformCode: number;
  /** Which rule of the standard chose the affine. */
  affineSource: "sform" | "qform" | "pixdim";
  /** The qform matrix when qform_code > 0. */
  qform: Mat4 | undefined;
  /** The sform matrix when sform_code > 0. */
  sform: Mat4 | undefined;
  xyztUnits: number;
  description: string;
  voxOffset: number;
}

export interface NiftiImage {
  volume: Volume;
  header: NiftiHeaderInfo;
}

/** readNiftiAsync's result: the image and when its voxels were in memory. */
export interface NiftiImageRead extends NiftiImage {
  /** Epoch ms (performance.timeOrigin + now) at which the voxels were ready: the end of inflation. */
  readyAtMs: number;
}

const HEADER_PROBE_BYTES = 65536;
const GZIP_MARGIN_BYTES = 1 << 20;
/** Compressed files from this size on are inflated on a worker thread of their own. */
const WORKER_INFLATE_BYTES = 4 << 20;
/** Largest single output chunk zlib is asked to fill (beyond it, more chunks are joined). */
const MAX_INFLATE_CHUNK_BYTES = 1 << 30;

/**
 * zlib options for inflating a file whose header says it holds `needed` bytes: refuse much more,
 * and inflate into one output chunk of that size, so the voxels land in their final buffer
 * without a second copy (zlib's default 16 KB chunks are joined at the end, doubling the memory
 * touched for a large volume).
 */
export function inflateLimits(needed: number): { maxOutputLength: number; chunkSize: number } {
  const maxOutputLength = needed + GZIP_MARGIN_BYTES;
  return { maxOutputLength, chunkSize: Math.max(64, Math.min(maxOutputLength, MAX_INFLATE_CHUNK_BYTES)) };
}
const gunzipAsync = promisify(gunzip) as (
  buf: Uint8Array,
  opts: { maxOutputLength: number; chunkSize: number },
) => Promise<Buffer>;

/**
 * Read one 3-D volume from a NIfTI file.
 * @param path - `.nii` or `.nii.gz` (compression detected from the bytes, not the name)
 * @throws CoxaError FILE_MISSING, FILE_UNREADABLE, NOT_NIFTI, TRUNCATED, BAD_DIMS, BAD_SPACING,
 *   BAD_AFFINE, UNSUPPORTED_DATATYPE, GZIP_BOMB, TOO_LARGE, BAD_ARGUMENT — each naming the file
 */
export function readNifti(path: string, options: ReadNiftiOptions = {}): NiftiImage {
  if (!existsSync(path)) throw new CoxaError("FILE_MISSING", "file does not exist", path);
  let raw: Buffer;
  try {
    if (statSync(path).isDirectory())
      throw new CoxaError("FILE_UNREADABLE", "is a directory, not an image file", path);
    raw = readFileSync(path);
  } catch (err) {
    if (err instanceof CoxaError) throw err;
    throw new CoxaError(
      "FILE_UNREADABLE",
      `cannot be read (${(err as NodeJS.ErrnoException).code ?? "error"})`,
      path,
    );
  }
  return parseNifti(raw, path, options);
}

/**
 * Parse NIfTI bytes already in memory.
 * @param bytes - the whole file, gzip-compressed or not
 * @param name - file name used in error messages
 */
export function parseNifti(bytes: Uint8Array, name: string, options: ReadNiftiOptions = {}): NiftiImage {
  const plan = planRead(bytes, name, options);
  let whole = bytes;
  if (plan.gz) {
    try {
      whole = gunzipSync(bytes, inflateLimits(plan.needed));
    } catch (err) {
      throw inflateError(err, plan.needed, name);
    }
  }
  return finishRead(whole, plan, name, options);
}

/**
 * Read one 3-D volume from a NIfTI file, inflating gzip off the main thread (a worker thread of
 * its own for large files, src/image/inflate.ts, else the libuv thread pool), so that several
 * images can be read at once and the main thread can work meanwhile. Same checks and result as
 * readNifti.
 */
export async function readNiftiAsync(path: string, options: ReadNiftiOptions = {}): Promise<NiftiImageRead> {
  if (!existsSync(path)) throw new CoxaError("FILE_MISSING", "file does not exist", path);
  let raw: Buffer;
  try {
    if (statSync(path).isDirectory())
      throw new CoxaError("FILE_UNREADABLE", "is a directory, not an image file", path);
    raw = await readFile(path);
  } catch (err) {
    if (err instanceof CoxaError) throw err;
    throw new CoxaError(
      "FILE_UNREADABLE",
      `cannot be read (${(err as NodeJS.ErrnoException).code ?? "error"})`,
      path,
    );
  }
  const plan = planRead(raw, path, options);
  let whole: Uint8Array = raw;
  let readyAtMs: number | undefined;
  if (plan.gz) {
    try {
      const limits = inflateLimits(plan.needed);
      if (raw.length >= WORKER_INFLATE_BYTES) {
        const r = await inflateInWorker(raw, limits);
        whole = r.bytes;
        readyAtMs = r.inflatedAtMs;
      } else whole = await gunzipAsync(raw, limits);
    } catch (err) {
      throw inflateError(err, plan.needed, path);
    }
  }
  const image = finishRead(whole, plan, path, options);
  return { ...image, readyAtMs: readyAtMs ?? performance.timeOrigin + performance.now() };
}

interface ReadPlan {
  gz: boolean;
  header: NIFTI1 | NIFTI2;
  info: NiftiHeaderInfo;
  nvox3: number;
  bytesPer: number;
  /** Bytes the header says the file holds (header + extensions + all voxels). */
  needed: number;
}

/** Header checks before any voxel is inflated. */
function planRead(bytes: Uint8Array, name: string, options: ReadNiftiOptions): ReadPlan {
  const maxVoxels = options.maxVoxels ?? MAX_VOXELS_LIMIT;
  const gz = bytes.length >= 2 && bytes[0] === 0x1f && bytes[1] === 0x8b;
  const head = gz ? inflateHead(bytes, name) : bytes;
  const { header, info, nvox3, bytesPer } = parseHeader(head, name, maxVoxels);
  return { gz, header, info, nvox3, bytesPer, needed: info.voxOffset + nvox3 * info.frames * bytesPer };
}

function inflateError(err: unknown, needed: number, name: string): CoxaError {
  const code = (err as NodeJS.ErrnoException).code;
  if (err instanceof RangeError || code === "ERR_BUFFER_TOO_LARGE") {
    return new CoxaError(
      "GZIP_BOMB",
      `gzip stream inflates beyond the ${needed} bytes the header declares; refusing`,
      name,
    );
  }
  if (code === "Z_BUF_ERROR")
    return new CoxaError("TRUNCATED", "gzip stream ends early (file truncated)", name);
  return new CoxaError("NOT_NIFTI", `gzip stream is corrupt (${code ?? "inflate error"})`, name);
}

function finishRead(whole: Uint8Array, plan: ReadPlan, name: string, options: ReadNiftiOptions): NiftiImage {
  const { header, info, nvox3, bytesPer, needed } = plan;
  if (whole.length < needed) {
    throw new CoxaError(
      "TRUNCATED",
      `image data truncated: header needs ${needed} bytes, file has ${whole.length}`,
      name,
    );
  }
  const volumeIndex = options.volume ?? 0;
  if (!Number.isInteger(volumeIndex) || volumeIndex < 0 || volumeIndex >= info.frames) {
    throw new CoxaError(
      "BAD_ARGUMENT",
      `volume ${volumeIndex} requested but the file holds ${info.frames} (0-based)`,
      name,
    );
  }
  const start = info.voxOffset + volumeIndex * nvox3 * bytesPer;
  const data = decodeVoxels(whole, start, nvox3, info, options.keepDatatype ?? true);
  const affine = chooseAffine(header, info, name);
  const shape3: [number, number, number] = [info.shape[0] ?? 1, info.shape[1] ?? 1, info.shape[2] ?? 1];
  return { volume: new Volume(shape3, data, affine), header: info };
}

function inflateHead(bytes: Uint8Array, name: string): Uint8Array {
  try {
    return gunzipSync(bytes.subarray(0, Math.min(bytes.length, HEADER_PROBE_BYTES)), {
      finishFlush: zlibConstants.Z_SYNC_FLUSH,
    });
  } catch {
    throw new CoxaError("NOT_NIFTI", "gzip stream is corrupt; not a readable .nii.gz", name);
  }
}

function toArrayBuffer(bytes: Uint8Array, length: number): ArrayBuffer {
  return bytes.buffer.slice(
    bytes.byteOffset,
    bytes.byteOffset + Math.min(length, bytes.length),
  ) as ArrayBuffer;
}

function parseHeader(head: Uint8Array, name: string, maxVoxels: number) {
  if (head.length < 348)
    throw new CoxaError("NOT_NIFTI", `too short for a NIfTI header (${head.length} bytes)`, name);
  const view = new DataView(head.buffer, head.byteOffset, head.length);
  const sizeLE = view.getInt32(0, true);
  const sizeBE = view.getInt32(0, false);
  let version: 1 | 2;
  if (sizeLE === 348 || sizeBE === 348) version = 1;
  else if (sizeLE === 540 || sizeBE === 540) version = 2;
  else
    throw new CoxaError("NOT_NIFTI", `not a NIfTI file (sizeof_hdr is ${sizeLE}, expected 348 or 540)`, name);
  const magicAt = version === 1 ? 344 : 4;
  if (version === 2 && head.length < 540) throw new CoxaError("TRUNCATED", "NIfTI-2 header truncated", name);
  const magic = String.fromCharCode(head[magicAt], head[magicAt + 1], head[magicAt + 2]);
  if (magic === "ni1" || magic === "ni2") {
    throw new CoxaError(
      "NOT_NIFTI",
      "is a NIfTI header/image pair (.hdr/.img); coxa reads single-file .nii / .nii.gz",
      name,
    );
  }
  if (magic !== (version === 1 ? "n+1" : "n+2") || head[magicAt + 3] !== 0) {
    throw new CoxaError("NOT_NIFTI", `not a NIfTI-${version} file (magic is not "n+${version}")`, name);
  }
  let header: NIFTI1 | NIFTI2;
  try {
    header = readHeader(toArrayBuffer(head, 4096));
  } catch (err) {
    throw new CoxaError("NOT_NIFTI", `header cannot be parsed (${(err as Error).message})`, name);
  }
  const ndim = header.dims[0];
  if (!Number.isInteger(ndim) || ndim < 1 || ndim > 7) {
    throw new CoxaError("BAD_DIMS", `dim[0] is ${ndim}; it must be 1 to 7`, name);
  }
  const shape: number[] = [];
  for (let a = 1; a <= ndim; a++) {
    const n = header.dims[a];
    if (!Number.isInteger(n) || n <= 0)
      throw new CoxaError("BAD_DIMS", `dim[${a}] is ${n}; dimensions must be >= 1`, name);
    shape.push(n);
  }
  const nvox3 = (shape[0] ?? 1) * (shape[1] ?? 1) * (shape[2] ?? 1);
  let frames = 1;
  for (let a = 3; a < shape.length; a++) frames *= shape[a];
  const total = nvox3 * frames;
  if (total > MAX_VOXELS_LIMIT)
    throw new CoxaError("BAD_DIMS", `declares ${total} voxels, more than 2^31`, name);
  if (total > maxVoxels)
    throw new CoxaError("TOO_LARGE", `declares ${total} voxels, more than the limit of ${maxVoxels}`, name);
  const datatype = datatypeFromCode(header.datatypeCode);
  if (!datatype) {
    throw new CoxaError(
      "UNSUPPORTED_DATATYPE",
      `datatype code ${header.datatypeCode} (${header.getDatatypeCodeString(header.datatypeCode)}) is not supported; use uint8, int8, int16, uint16, int32, uint32, float32 or float64`,
      name,
    );
  }
  const bytesPer = DATATYPES[datatype].bytes;
  if (header.numBitsPerVoxel !== bytesPer * 8) {
    throw new CoxaError(
      "NOT_NIFTI",
      `bitpix ${header.numBitsPerVoxel} does not match datatype ${datatype}`,
      name,
    );
  }
  const pixdimMm: [number, number, number] = [1, 1, 1];
  for (let a = 1; a <= 3; a++) {
    const p = header.pixDims[a];
    if (a <= ndim) {
      if (!(Number.isFinite(p) && p > 0))
        throw new CoxaError(
          "BAD_SPACING",
          `voxel size pixdim[${a}] is ${p}; it must be a positive number`,
          name,
        );
      pixdimMm[a - 1] = p;
    } else if (Number.isFinite(p) && p > 0) {
      pixdimMm[a - 1] = p;
    }
  }
  const voxOffset = Math.max(header.vox_offset, version === 1 ? 348 : 540);
  if (!Number.isInteger(voxOffset))
    throw new CoxaError("NOT_NIFTI", `vox_offset ${header.vox_offset} is not an integer`, name);
  let sclSlope = header.scl_slope;
  let sclInter = header.scl_inter;
  if (!Number.isFinite(sclSlope) || sclSlope === 0) {
    sclSlope = 0;
    sclInter = 0;
  } else if (!Number.isFinite(sclInter)) {
    sclInter = 0;
  }
  const scaled = sclSlope !== 0 && !(sclSlope === 1 && sclInter === 0);
  const info: NiftiHeaderInfo = {
    version,
    littleEndian: header.littleEndian,
    datatype,
    shape,
    pixdimMm,
    frames,
    sclSlope,
    sclInter,
    scaled,
    qformCode: header.qform_code,
    sformCode: header.sform_code,
    affineSource: header.sform_code > 0 ? "sform" : header.qform_code > 0 ? "qform" : "pixdim",
    qform: undefined,
    sform: undefined,
    xyztUnits: header.xyzt_units,
    description: header.description,
    voxOffset,
  };
  const dv = view;
  if (header.sform_code > 0) {
    const s = identity();
    for (let r = 0; r < 3; r++) {
      for (let c = 0; c < 4; c++) {
        s[r * 4 + c] =
          version === 1 ? dv.getFloat32(280 + (r * 4 + c) * 4, header.littleEndian) : header.affine[r][c];
      }
    }
    info.sform = s;
  }
  if (header.qform_code > 0) {
    info.qform = quaternionToMatrix({
      quaternB: header.quatern_b,
      quaternC: header.quatern_c,
      quaternD: header.quatern_d,
      qoffset: [header.qoffset_x, header.qoffset_y, header.qoffset_z],
      pixdim: pixdimMm,
      qfac: header.pixDims[0] < 0 ? -1 : 1,
    });
  }
  return { header, info, nvox3, bytesPer };
}

function chooseAffine(_header: NIFTI1 | NIFTI2, info: NiftiHeaderInfo, name: string): Mat4 {
  let m: Mat4;
  if (info.sform) m = info.sform;
  else if (info.qform) m = info.qform;
  else {
    m = identity();
    m[0] = info.pixdimMm[0];
    m[5] = info.pixdimMm[1];
    m[10] = info.pixdimMm[2];
  }
  if (!isFiniteMat(m))
    throw new CoxaError("BAD_AFFINE", `${info.affineSource} affine has non-finite entries`, name);
  if (relativeDeterminant(m) < 1e-6)
    throw new CoxaError("BAD_AFFINE", `${info.affineSource} affine is singular`, name);
  return m;
}

function decodeVoxels(
  whole: Uint8Array,
  start: number,
  n: number,
  info: NiftiHeaderInfo,
  keep: boolean,
): VoxelArray {
  const { datatype, littleEndian, sclSlope, sclInter, scaled } = info;
  const bytesPer = DATATYPES[datatype].bytes;
  let src: Uint8Array = whole.subarray(start, start + n * bytesPer);
  if (!littleEndian && bytesPer > 1) {
    const swapped = new Uint8Array(src.length);
    for (let i = 0; i < src.length; i += bytesPer) {
      for (let b = 0; b < bytesPer; b++) swapped[i + b] = src[i + bytesPer - 1 - b];
    }
    src = swapped;
  } else if (src.byteOffset % bytesPer !== 0) {
    src = src.slice();
  }
  const Ctor = DATATYPES[datatype].make(0).constructor as new (
    buf: ArrayBufferLike,
    off: number,
    len: number,
  ) => VoxelArray;
  const stored = new Ctor(src.buffer, src.byteOffset, n);
  if (!scaled && keep) return stored;
  const out = datatype === "float64" ? new Float64Array(n) : new Float32Array(n);
  if (scaled) {
    for (let i = 0; i < n; i++) out[i] = stored[i] * sclSlope + sclInter;
  } else {
    for (let i = 0; i < n; i++) out[i] = stored[i];
  }
  return out;
}
