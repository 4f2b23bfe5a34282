/**
 * coxa's transform file, transform.json (design.md):
 *
 *   { "format": "coxa.transform", "version": 1, "model": "rigid"|"similarity"|"affine",
 *     "maps": "fixed-to-moving", "frame": "RAS", "units": "mm",
 *     "matrix": 4 rows of 4, "inverse": 4 rows of 4,
 *     "parameters": { center_mm, rotation_deg, translation_mm, scale, shear },
 *     "fixed":  { path, sha256, shape, index_to_world }, "moving": { same },
 *     "software": { name, version } }
 *
 * Conventions: `matrix` maps a FIXED world point (RAS+ mm) to the matching MOVING world point,
 * x_moving = matrix · x_fixed; `inverse` goes the other way. Matrices are nested rows
 * (row-major, like `Mat4`). The matrix is authoritative; `parameters` describes it in the
 * layout of ./transform-model.ts. `index_to_world` is the image's voxel-centre-to-world affine.
 *
 * Canonical hash (`transformHash`): SHA-256 of the 16 matrix entries in row-major order, each
 * as an IEEE-754 binary64 little-endian number (128 bytes; -0 written as +0). In Python:
 * hashlib.sha256(struct.pack("<16d", *rows_flattened)).hexdigest().
 */
import { existsSync, readFileSync, statSync } from "node:fs";
import { writeJsonAtomic } from "../common/atomic.js";
import { CoxaError } from "../common/errors.js";
import { sha256Buffer, sha256File } from "../common/hash.js";
import { softwareInfo } from "../common/version.js";
import {
  fromRows,
  invertAffine,
  isFiniteMat,
  type Mat4,
  multiply,
  relativeDeterminant,
  toRows,
} from "./mat4.js";
import {
  describeParameters,
  isTransformModel,
  matrixToParameters,
  type ParametersBlock,
  parameterCount,
  type TransformModel,
} from "./transform-model.js";

/** Where a transform's fixed or moving image came from. */
export interface ImageRef {
  /** Path as given when the transform was made. */
  path: string;
  /** Lower-case hex SHA-256 of the image file. */
  sha256: string;
  /** Voxel dimensions [nx, ny, nz]. */
  shape: number[];
  /** Voxel-centre index to world RAS+ mm affine, 4 rows of 4. */
  index_to_world: number[][];
}

/** The transform.json record (design.md), snake_case as in the file. */
export interface TransformRecord {
  format: "coxa.transform";
  version: 1;
  model: TransformModel;
  maps: "fixed-to-moving";
  frame: "RAS";
  units: "mm";
  matrix: number[][];
  inverse: number[][];
  parameters: ParametersBlock;
  fixed: ImageRef;
  moving: ImageRef;
  software: { name: string; version: string };
}

/** A transform read from disk: the record and its matrices. */
export interface LoadedTransform {
  path: string;
  record: TransformRecord;
  /** Fixed-to-moving matrix. */
  matrix: Mat4;
  /** Moving-to-fixed matrix, recomputed from `matrix` (the stored one agrees within tolerance). */
  inverse: Mat4;
}

/** What `buildTransformRecord` needs. */
export interface TransformRecordInput {
  model: TransformModel;
  /** Fixed-to-moving matrix. */
  matrix: Mat4;
  /** Centre of the parameterisation, world mm. */
  centerMm: ArrayLike<number>;
  /** Parameter vector of `model` about `centerMm`; derived from the matrix when absent. */
  parameters?: ArrayLike<number>;
  fixed: ImageRef;
  moving: ImageRef;
}

/** Largest allowed |inverse · matrix · p - p| over the fixed image's corners, mm. */
export const INVERSE_TOLERANCE_MM = 1e-3;

const SHA256 = /^[0-9a-f]{64}$/;

/**
 * The image reference block for an image.
 * @param path - image path (recorded as given)
 * @param volume - the image's grid (dims and index-to-world affine)
 * @param sha256 - hex SHA-256 of the image file
 */
export function imageRef(
  path: string,
  volume: { dims: readonly number[]; indexToWorld: Mat4 },
  sha256: string,
): ImageRef {
  return {
    path,
    sha256: sha256.toLowerCase(),
    shape: [volume.dims[0], volume.dims[1], volume.dims[2]],
    index_to_world: toRows(volume.indexToWorld),
  };
}

/**
 * The image reference block for an image file, hashing the file.
 * @param path - image file
 * @param volume - the image read from it
 */
export async function imageRefForFile(
  path: string,
  volume: { dims: readonly number[]; indexToWorld: Mat4 },
): Promise<ImageRef> {
  return imageRef(path, volume, await sha256File(path));
}

/**
 * A complete transform.json record.
 * @param input - model, fixed-to-moving matrix, centre, optional parameters, image blocks
 * @throws CoxaError BAD_TRANSFORM when the matrix is not finite, not affine or singular, or
 *   (without `parameters`) cannot be decomposed in the model
 */
export function buildTransformRecord(input: TransformRecordInput): TransformRecord {
  const { model, matrix, centerMm } = input;
  parameterCount(model);
  if (!isFiniteMat(matrix)) throw new CoxaError("BAD_TRANSFORM", "matrix has non-finite entries");
  if (matrix[12] !== 0 || matrix[13] !== 0 || matrix[14] !== 0 || matrix[15] !== 1) {
    throw new CoxaError("BAD_TRANSFORM", "matrix last row is not 0 0 0 1");
  }
  if (relativeDeterminant(matrix) < 1e-10) throw new CoxaError("BAD_TRANSFORM", "matrix is singular");
  const inverse = invertAffine(new Float64Array(16), matrix);
  const params = input.parameters ?? matrixToParameters(model, matrix, centerMm);
  return {
    format: "coxa.transform",
    version: 1,
    model,
    maps: "fixed-to-moving",
    frame: "RAS",
    units: "mm",
    matrix: toRows(matrix),
    inverse: toRows(inverse),
    parameters: describeParameters(model, params, centerMm),
    fixed: input.fixed,
    moving: input.moving,
    software: softwareInfo(),
  };
}

/**
 * Write a transform record atomically (temporary name, then rename), after validating it
 * exactly as `readTransform` would.
 * @param path - destination, e.g. OUT/transform.json
 * @param record - the record
 * @throws CoxaError BAD_TRANSFORM when the record would not read back
 */
export function writeTransform(path: string, record: TransformRecord): void {
  validateRecord(record, path);
  writeJsonAtomic(path, record);
}

/**
 * Read and validate a transform.json file.
 * @param path - file path
 * @returns the record, the fixed-to-moving matrix and its inverse
 * @throws CoxaError BAD_TRANSFORM naming the file for a missing or unreadable file, text that
 *   is not JSON, a wrong format, version, model, maps, frame or units, a matrix that is not
 *   4x4, not finite, not affine (last row 0 0 0 1) or singular, an inverse that disagrees with
 *   the matrix by more than INVERSE_TOLERANCE_MM at the fixed image's corners, or malformed
 *   parameters, image or software blocks
 */
export function readTransform(path: string): LoadedTransform {
  if (!existsSync(path)) throw new CoxaError("BAD_TRANSFORM", "transform file does not exist", path);
  let text: string;
  try {
    if (statSync(path).isDirectory())
      throw new CoxaError("BAD_TRANSFORM", "is a directory, not a transform file", path);
    text = readFileSync(path, "utf8");
  } catch (err) {
    if (err instanceof CoxaError) throw err;
    throw new CoxaError("BAD_TRANSFORM", `cannot be read (${(err as Error).message})`, path);
  }
  let value: unknown;
  try {
    value = JSON.parse(text);
  } catch (err) {
    throw new CoxaError("BAD_TRANSFORM", `is not valid JSON (${(err as Error).message})`, path);
  }
  const { matrix, inverse } = validateRecord(value, path);
  return { path, record: value as TransformRecord, matrix, inverse };
}

function fail(message: string, path: string): never {
  throw new CoxaError("BAD_TRANSFORM", message, path);
}

function isObject(v: unknown): v is Record<string, unknown> {
  return typeof v === "object" && v !== null && !Array.isArray(v);
}

/** Parse nested rows into a Mat4, with messages naming `what`. */
function matrixField(v: unknown, what: string, path: string): Mat4 {
  if (!Array.isArray(v) || v.length !== 4) {
    fail(`${what} must be 4 rows of 4 numbers${Array.isArray(v) ? `, it has ${v.length} rows` : ""}`, path);
  }
  for (let r = 0; r < 4; r++) {
    const row = v[r];
    if (!Array.isArray(row) || row.length !== 4) {
      fail(`${what} row ${r} must hold 4 numbers`, path);
    }
    for (let c = 0; c < 4; c++) {
      if (typeof row[c] !== "number" || !Number.isFinite(row[c])) {
        fail(`${what}[${r}][${c}] is not a finite number`, path);
      }
    }
  }
  const m = fromRows(v as number[][]);
  if (m[12] !== 0 || m[13] !== 0 || m[14] !== 0 || m[15] !== 1) fail(`${what} last row is not 0 0 0 1`, path);
  if (relativeDeterminant(m) < 1e-10) fail(`${what} is singular`, path);
  return m;
}

function vec3Field(v: unknown, what: string, path: string): void {
  if (!Array.isArray(v) || v.length !== 3 || !v.every((x) => typeof x === "number" && Number.isFinite(x))) {
    fail(`${what} must be 3 finite numbers`, path);
  }
}

function imageField(v: unknown, what: string, path: string): Mat4 {
  if (!isObject(v)) fail(`"${what}" block is missing or not an object`, path);
  if (typeof v.path !== "string") fail(`${what}.path is not a string`, path);
  if (typeof v.sha256 !== "string" || !SHA256.test(v.sha256.toLowerCase())) {
    fail(`${what}.sha256 is not a 64-digit hex SHA-256`, path);
  }
  const shape = v.shape;
  if (!Array.isArray(shape) || shape.length !== 3 || !shape.every((n) => Number.isInteger(n) && n >= 1)) {
    fail(`${what}.shape must be 3 positive whole numbers`, path);
  }
  return matrixField(v.index_to_world, `${what}.index_to_world`, path);
}

/** Validate a record; returns its matrix and a freshly computed inverse. */
function validateRecord(value: unknown, path: string): { matrix: Mat4; inverse: Mat4 } {
  if (!isObject(value)) fail("is not a JSON object", path);
  if (value.format !== "coxa.transform") {
    fail(`format is ${JSON.stringify(value.format)}, expected "coxa.transform"`, path);
  }
  if (value.version !== 1)
    fail(`version ${JSON.stringify(value.version)} is not supported (expected 1)`, path);
  if (!isTransformModel(value.model)) {
    fail(`model is ${JSON.stringify(value.model)}, expected rigid, similarity or affine`, path);
  }
  if (value.maps !== "fixed-to-moving") {
    fail(`maps is ${JSON.stringify(value.maps)}, expected "fixed-to-moving"`, path);
  }
  if (value.frame !== "RAS") fail(`frame is ${JSON.stringify(value.frame)}, expected "RAS"`, path);
  if (value.units !== "mm") fail(`units is ${JSON.stringify(value.units)}, expected "mm"`, path);
  const matrix = matrixField(value.matrix, "matrix", path);
  const stored = matrixField(value.inverse, "inverse", path);
  const params = value.parameters;
  if (!isObject(params)) fail(`"parameters" block is missing or not an object`, path);
  for (const key of ["center_mm", "rotation_deg", "translation_mm", "scale", "shear"]) {
    vec3Field(params[key], `parameters.${key}`, path);
  }
  const fixedGrid = imageField(value.fixed, "fixed", path);
  const fixedShape = (value.fixed as { shape: number[] }).shape;
  imageField(value.moving, "moving", path);
  const software = value.software;
  if (!isObject(software) || typeof software.name !== "string" || typeof software.version !== "string") {
    fail(`"software" block must hold a name and a version string`, path);
  }

  // Inverse consistency, measured where it matters: at the corners of the fixed image.
  const inverse = invertAffine(new Float64Array(16), matrix);
  const roundTrip = multiply(new Float64Array(16), stored, matrix);
  let worst = 0;
  for (let corner = 0; corner < 8; corner++) {
    const i = corner & 1 ? fixedShape[0] - 1 : 0;
    const j = corner & 2 ? fixedShape[1] - 1 : 0;
    const k = corner & 4 ? fixedShape[2] - 1 : 0;
    const x = fixedGrid[0] * i + fixedGrid[1] * j + fixedGrid[2] * k + fixedGrid[3];
    const y = fixedGrid[4] * i + fixedGrid[5] * j + fixedGrid[6] * k + fixedGrid[7];
    const z = fixedGrid[8] * i + fixedGrid[9] * j + fixedGrid[10] * k + fixedGrid[11];
    const dx = roundTrip[0] * x + roundTrip[1] * y + roundTrip[2] * z + roundTrip[3] - x;
    const dy = roundTrip[4] * x + roundTrip[5] * y + roundTrip[6] * z + roundTrip[7] - y;
    const dz = roundTrip[8] * x + roundTrip[9] * y + roundTrip[10] * z + roundTrip[11] - z;
    worst = Math.max(worst, Math.hypot(dx, dy, dz));
  }
  if (!(worst <= INVERSE_TOLERANCE_MM)) {
    fail(
      `inverse does not undo matrix: a fixed-image corner comes back ${worst.toPrecision(3)} mm away (tolerance ${INVERSE_TOLERANCE_MM} mm)`,
      path,
    );
  }
  return { matrix, inverse };
}

/**
 * Check that a transform's recorded images are the given ones, by SHA-256.
 * @param record - the transform record
 * @param images - the images about to be used; either may be omitted
 * @param transformPath - transform file, for the message
 * @throws CoxaError HASH_MISMATCH naming the image file whose hash differs from the record
 */
export function checkTransformImages(
  record: TransformRecord,
  images: { fixed?: { path: string; sha256: string }; moving?: { path: string; sha256: string } },
  transformPath: string,
): void {
  for (const role of ["fixed", "moving"] as const) {
    const given = images[role];
    if (given === undefined) continue;
    const expected = record[role].sha256.toLowerCase();
    const actual = given.sha256.toLowerCase();
    if (actual !== expected) {
      throw new CoxaError(
        "HASH_MISMATCH",
        `sha256 ${actual.slice(0, 12)}... differs from ${expected.slice(0, 12)}..., the ${role} image recorded in ${transformPath}`,
        given.path,
      );
    }
  }
}

/**
 * `checkTransformImages` for image files, hashing them.
 * @param record - the transform record
 * @param files - fixed and/or moving image paths
 * @param transformPath - transform file, for the message
 * @throws CoxaError HASH_MISMATCH as `checkTransformImages`; FILE_MISSING for a missing image
 */
export async function checkTransformImageFiles(
  record: TransformRecord,
  files: { fixedPath?: string; movingPath?: string },
  transformPath: string,
): Promise<void> {
  const images: { fixed?: { path: string; sha256: string }; moving?: { path: string; sha256: string } } = {};
  const hashOf = async (file: string): Promise<string> => {
    if (!existsSync(file)) throw new CoxaError("FILE_MISSING", "file does not exist", file);
    return sha256File(file);
  };
  if (files.fixedPath !== undefined)
    images.fixed = { path: files.fixedPath, sha256: await hashOf(files.fixedPath) };
  if (files.movingPath !== undefined) {
    images.moving = { path: files.movingPath, sha256: await hashOf(files.movingPath) };
  }
  checkTransformImages(record, images, transformPath);
}

/**
 * Canonical SHA-256 of a transform matrix (see the module header), for sidecar files.
 * @param matrix - 4x4 row-major matrix
 * @returns lower-case hex digest
 * @throws CoxaError BAD_TRANSFORM for non-finite entries
 */
export function transformHash(matrix: Mat4): string {
  if (!isFiniteMat(matrix))
    throw new CoxaError("BAD_TRANSFORM", "cannot hash a matrix with non-finite entries");
  const bytes = new Uint8Array(128);
  const view = new DataView(bytes.buffer);
  for (let i = 0; i < 16; i++) view.setFloat64(8 * i, matrix[i] + 0, true);
  return sha256Buffer(bytes);
}
