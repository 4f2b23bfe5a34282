/**
 * The reference transform of a stress run: the accepted alignment of the pair, from a coxa
 * transform file (checked against the images by SHA-256) or from a phantom's truth.json
 * (`fixed_to_moving`, checked against the images' shapes and voxel-to-world affines).
 *
 * Conventions: the returned matrix maps FIXED world to MOVING world (RAS+ mm), x_moving = T x_fixed.
 */
import { existsSync, readFileSync, statSync } from "node:fs";
import { CoxaError } from "../common/errors.js";
import { fromRows, isFiniteMat, type Mat4, relativeDeterminant } from "../geometry/mat4.js";
import { checkTransformImages, readTransform } from "../geometry/transform-file.js";
import type { Volume } from "../image/volume.js";

/** A reference transform and where it came from. */
export interface StressReference {
  kind: "transform" | "truth";
  path: string;
  /** Fixed -> moving. */
  matrix: Mat4;
}

/** Largest difference (mm, per affine entry) between truth.json's grids and the images' (float32 headers). */
const GRID_TOLERANCE = 1e-3;

/**
 * Read a coxa transform file as the reference and check it was made for these images.
 * @param path - transform.json
 * @param fixed - fixed image path and SHA-256
 * @param moving - moving image path and SHA-256
 * @throws CoxaError BAD_TRANSFORM for an unreadable or invalid file; HASH_MISMATCH naming the
 *   image whose SHA-256 differs from the one recorded in the transform
 */
export function readReferenceTransform(
  path: string,
  fixed: { path: string; sha256: string },
  moving: { path: string; sha256: string },
): StressReference {
  const t = readTransform(path);
  checkTransformImages(t.record, { fixed, moving }, path);
  return { kind: "transform", path, matrix: t.matrix };
}

/**
 * Read a phantom's truth.json as the reference and check it describes these images.
 * @param path - truth.json written by `coxa phantom`
 * @param fixed - the fixed image (its grid must match truth.ct)
 * @param moving - the moving image (its grid must match truth.mr)
 * @throws CoxaError BAD_TRANSFORM naming the file when it is missing, not JSON, not a phantom
 *   truth or holds no usable fixed_to_moving; BAD_INPUT when its grids are not the images'
 */
export function readReferenceTruth(path: string, fixed: Volume, moving: Volume): StressReference {
  if (!existsSync(path)) throw new CoxaError("BAD_TRANSFORM", "truth file does not exist", path);
  if (statSync(path).isDirectory())
    throw new CoxaError("BAD_TRANSFORM", "is a directory, not a truth file", path);
  let value: unknown;
  try {
    value = JSON.parse(readFileSync(path, "utf8"));
  } catch (err) {
    throw new CoxaError("BAD_TRANSFORM", `is not valid JSON (${(err as Error).message})`, path);
  }
  const doc = value as Record<string, unknown> | null;
  if (!doc || typeof doc !== "object" || doc.format !== "coxa.phantom-truth") {
    throw new CoxaError("BAD_TRANSFORM", 'is not a phantom truth file (format "coxa.phantom-truth")', path);
  }
  const matrix = rowsMatrix(doc.fixed_to_moving, "fixed_to_moving", path);
  checkGrid(doc.ct, fixed, "ct", "fixed", path);
  checkGrid(doc.mr, moving, "mr", "moving", path);
  return { kind: "truth", path, matrix };
}

function rowsMatrix(v: unknown, what: string, path: string): Mat4 {
  const ok =
    Array.isArray(v) &&
    v.length === 4 &&
    v.every((row) => Array.isArray(row) && row.length === 4 && row.every((x) => typeof x === "number"));
  if (!ok) throw new CoxaError("BAD_TRANSFORM", `${what} must be 4 rows of 4 numbers`, path);
  const m = fromRows(v as number[][]);
  if (!isFiniteMat(m) || m[12] !== 0 || m[13] !== 0 || m[14] !== 0 || m[15] !== 1) {
    throw new CoxaError("BAD_TRANSFORM", `${what} is not a finite affine matrix (last row 0 0 0 1)`, path);
  }
  if (relativeDeterminant(m) < 1e-10) throw new CoxaError("BAD_TRANSFORM", `${what} is singular`, path);
  return m;
}

function checkGrid(block: unknown, image: Volume, key: string, role: string, path: string): void {
  const b = block as { shape?: unknown; index_to_world?: unknown } | undefined;
  if (!b || typeof b !== "object") {
    throw new CoxaError(
      "BAD_TRANSFORM",
      `has no "${key}" grid block to check the ${role} image against`,
      path,
    );
  }
  const shape = b.shape as number[];
  if (!Array.isArray(shape) || shape.length !== 3 || shape.some((n, a) => n !== image.dims[a])) {
    throw new CoxaError(
      "BAD_INPUT",
      `describes a ${key.toUpperCase()} of shape ${Array.isArray(shape) ? shape.join(" x ") : "?"}, but the ${role} image is ${image.dims.join(" x ")}; it belongs to other images`,
      path,
    );
  }
  const affine = rowsMatrix(b.index_to_world, `${key}.index_to_world`, path);
  let worst = 0;
  for (let i = 0; i < 12; i++) worst = Math.max(worst, Math.abs(affine[i] - image.indexToWorld[i]));
  if (!(worst <= GRID_TOLERANCE)) {
    throw new CoxaError(
      "BAD_INPUT",
      `${key}.index_to_world differs from the ${role} image's affine by ${worst.toPrecision(3)}; it belongs to other images`,
      path,
    );
  }
}
