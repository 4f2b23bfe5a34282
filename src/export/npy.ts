/**
 * NumPy `.npy` files, format version 1.0, as NumPy documents it (numpy.lib.format, "A Simple
 * File Format for NumPy Arrays", NEP 1):
 *
 *   bytes 0-5   magic "\x93NUMPY"
 *   byte  6-7   format version 1, 0
 *   byte  8-9   HEADER_LEN, little-endian uint16
 *   then        HEADER_LEN bytes of ASCII: a Python dict literal
 *               {'descr': '<f4', 'fortran_order': False, 'shape': (3, R, C), }
 *               padded with spaces and ended by "\n" so that 10 + HEADER_LEN is a multiple of 64
 *   then        the array data, C order (last index fastest), in the byte order of `descr`.
 *
 * Only little-endian float32 ('<f4') and uint8 ('|u1') arrays are written (what the training
 * export needs). Files appear atomically (temporary name, then rename).
 */
import { writeFileAtomic } from "../common/atomic.js";
import { CoxaError } from "../common/errors.js";

/** Element types the writer supports, with their NumPy `descr` strings. */
export const NPY_DESCR = { float32: "<f4", uint8: "|u1" } as const;

/** An element type of `encodeNpy`. */
export type NpyDtype = keyof typeof NPY_DESCR;

/** Alignment of the data start, bytes (NumPy's documented choice for version 1.0 files). */
export const NPY_ALIGNMENT = 64;

const MAGIC = [0x93, 0x4e, 0x55, 0x4d, 0x50, 0x59]; // \x93 N U M P Y

/**
 * The Python tuple literal NumPy writes for a shape: "(3, 4, 5)", "(7,)" or "()".
 * @param shape - array dimensions (whole numbers >= 0)
 */
export function shapeLiteral(shape: readonly number[]): string {
  if (shape.length === 1) return `(${shape[0]},)`;
  return `(${shape.join(", ")})`;
}

/**
 * The complete preamble of a version 1.0 `.npy` file: magic, version, header length and the
 * padded header dict; its length is a multiple of 64.
 * @param shape - array dimensions in C order
 * @param dtype - element type
 * @throws CoxaError BAD_ARGUMENT for a shape entry that is not a whole number >= 0, or a header
 *   longer than version 1.0 allows (65535 bytes)
 */
export function npyHeader(shape: readonly number[], dtype: NpyDtype = "float32"): Uint8Array {
  for (const n of shape) {
    if (!Number.isSafeInteger(n) || n < 0) {
      throw new CoxaError("BAD_ARGUMENT", `npy shape entry ${n} is not a whole number >= 0`);
    }
  }
  const dict = `{'descr': '${NPY_DESCR[dtype]}', 'fortran_order': False, 'shape': ${shapeLiteral(shape)}, }`;
  const unpadded = 10 + dict.length + 1; // preamble + dict + "\n"
  const total = Math.ceil(unpadded / NPY_ALIGNMENT) * NPY_ALIGNMENT;
  const headerLen = total - 10;
  if (headerLen > 0xffff) throw new CoxaError("BAD_ARGUMENT", "npy header is too long for format 1.0");
  const out = new Uint8Array(total);
  out.set(MAGIC, 0);
  out[6] = 1;
  out[7] = 0;
  out[8] = headerLen & 0xff;
  out[9] = headerLen >>> 8;
  for (let i = 0; i < dict.length; i++) out[10 + i] = dict.charCodeAt(i);
  out.fill(0x20, 10 + dict.length, total - 1);
  out[total - 1] = 0x0a;
  return out;
}

/**
 * Encode an array as `.npy` bytes (header + little-endian data).
 * @param data - values in C order (last index fastest); Float32Array for float32, Uint8Array for uint8
 * @param shape - dimensions; their product must equal `data.length`
 * @returns [header, data bytes] (two parts, no copy of the data on little-endian machines)
 * @throws CoxaError BAD_ARGUMENT when the shape does not match the data or the element type
 */
export function encodeNpy(data: Float32Array | Uint8Array, shape: readonly number[]): Uint8Array[] {
  const dtype: NpyDtype = data instanceof Float32Array ? "float32" : "uint8";
  const header = npyHeader(shape, dtype);
  let count = 1;
  for (const n of shape) count *= n;
  if (count !== data.length) {
    throw new CoxaError(
      "BAD_ARGUMENT",
      `npy shape ${shapeLiteral(shape)} holds ${count} values, data has ${data.length}`,
    );
  }
  let body = new Uint8Array(data.buffer, data.byteOffset, data.byteLength);
  if (dtype === "float32" && !LITTLE_ENDIAN) {
    body = new Uint8Array(data.byteLength);
    const view = new DataView(body.buffer);
    for (let i = 0; i < data.length; i++) view.setFloat32(4 * i, data[i], true);
  }
  return [header, body];
}

/**
 * Write an array as a `.npy` file atomically.
 * @param path - destination file
 * @param data - values in C order
 * @param shape - dimensions
 * @throws CoxaError BAD_ARGUMENT as encodeNpy
 */
export function writeNpy(path: string, data: Float32Array | Uint8Array, shape: readonly number[]): void {
  writeFileAtomic(path, encodeNpy(data, shape));
}

const LITTLE_ENDIAN = new Uint8Array(new Uint16Array([1]).buffer)[0] === 1;
