/**
 * Typed arrays backed by SharedArrayBuffer, for handing voxel data to worker threads without
 * copying (src/common/workers.ts). A typed array travels to a worker as its buffer plus its
 * datatype name; `sharedView` rebuilds the view on the other side.
 */
import type { Datatype, VoxelArray } from "../image/datatypes.js";

type VoxelArrayConstructor = {
  new (buffer: ArrayBufferLike, byteOffset?: number, length?: number): VoxelArray;
  readonly BYTES_PER_ELEMENT: number;
};

const CONSTRUCTORS: Readonly<Record<Datatype, VoxelArrayConstructor>> = {
  uint8: Uint8Array,
  int8: Int8Array,
  int16: Int16Array,
  uint16: Uint16Array,
  int32: Int32Array,
  uint32: Uint32Array,
  float32: Float32Array,
  float64: Float64Array,
};

/**
 * A zero-filled typed array of `length` elements on a new SharedArrayBuffer.
 * @param datatype - element type
 * @param length - number of elements (>= 0)
 */
export function sharedArray(datatype: Datatype, length: number): VoxelArray {
  const ctor = CONSTRUCTORS[datatype];
  return new ctor(new SharedArrayBuffer(Math.max(1, length) * ctor.BYTES_PER_ELEMENT), 0, length);
}

/** True when `data` lives on a SharedArrayBuffer. */
export function isShared(data: VoxelArray): boolean {
  return typeof SharedArrayBuffer !== "undefined" && data.buffer instanceof SharedArrayBuffer;
}

/**
 * `data` itself when it is already shared, else a shared copy of the same datatype.
 * @param data - voxel array
 * @param datatype - its datatype name
 */
export function toShared<T extends VoxelArray>(data: T, datatype: Datatype): T {
  if (isShared(data)) return data;
  const copy = sharedArray(datatype, data.length) as T;
  copy.set(data as never);
  return copy;
}

/**
 * A typed-array view of a shared buffer.
 * @param datatype - element type
 * @param buffer - the SharedArrayBuffer (or ArrayBuffer)
 * @param byteOffset - offset in bytes
 * @param length - number of elements
 */
export function sharedView(
  datatype: Datatype,
  buffer: ArrayBufferLike,
  byteOffset: number,
  length: number,
): VoxelArray {
  return new CONSTRUCTORS[datatype](buffer, byteOffset, length);
}

/** True when two arrays share any byte of memory (aliasing check). */
export function overlaps(a: ArrayBufferView, b: ArrayBufferView): boolean {
  if (a.buffer !== b.buffer) return false;
  const a0 = a.byteOffset;
  const a1 = a0 + a.byteLength;
  const b0 = b.byteOffset;
  const b1 = b0 + b.byteLength;
  return a0 < b1 && b0 < a1;
}
