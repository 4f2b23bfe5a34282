/**
 * Voxel datatypes: NIfTI-1 datatype codes (nifti1.h, DT_*), their byte sizes and the
 * matching JavaScript typed arrays.
 */

export type VoxelArray =
  | Uint8Array
  | Int8Array
  | Int16Array
  | Uint16Array
  | Int32Array
  | Uint32Array
  | Float32Array
  | Float64Array;

export type Datatype = "uint8" | "int8" | "int16" | "uint16" | "int32" | "uint32" | "float32" | "float64";

interface DatatypeInfo {
  code: number;
  bytes: number;
  integer: boolean;
  min: number;
  max: number;
  make: (n: number) => VoxelArray;
}

/** NIfTI-1 codes: DT_UINT8 2, DT_INT16 4, DT_INT32 8, DT_FLOAT32 16, DT_FLOAT64 64, DT_INT8 256, DT_UINT16 512, DT_UINT32 768. */
export const DATATYPES: Readonly<Record<Datatype, DatatypeInfo>> = {
  uint8: { code: 2, bytes: 1, integer: true, min: 0, max: 255, make: (n) => new Uint8Array(n) },
  int8: { code: 256, bytes: 1, integer: true, min: -128, max: 127, make: (n) => new Int8Array(n) },
  int16: { code: 4, bytes: 2, integer: true, min: -32768, max: 32767, make: (n) => new Int16Array(n) },
  uint16: { code: 512, bytes: 2, integer: true, min: 0, max: 65535, make: (n) => new Uint16Array(n) },
  int32: {
    code: 8,
    bytes: 4,
    integer: true,
    min: -2147483648,
    max: 2147483647,
    make: (n) => new Int32Array(n),
  },
  uint32: { code: 768, bytes: 4, integer: true, min: 0, max: 4294967295, make: (n) => new Uint32Array(n) },
  float32: {
    code: 16,
    bytes: 4,
    integer: false,
    min: -3.4028234663852886e38,
    max: 3.4028234663852886e38,
    make: (n) => new Float32Array(n),
  },
  float64: {
    code: 64,
    bytes: 8,
    integer: false,
    min: -Number.MAX_VALUE,
    max: Number.MAX_VALUE,
    make: (n) => new Float64Array(n),
  },
};

export const DATATYPE_NAMES = Object.keys(DATATYPES) as Datatype[];

/** Datatype name for a NIfTI datatype code, or undefined when coxa does not read it. */
export function datatypeFromCode(code: number): Datatype | undefined {
  for (const name of DATATYPE_NAMES) if (DATATYPES[name].code === code) return name;
  return undefined;
}

/** Datatype name of a typed array. */
export function datatypeOf(data: VoxelArray): Datatype {
  if (data instanceof Float32Array) return "float32";
  if (data instanceof Int16Array) return "int16";
  if (data instanceof Uint8Array) return "uint8";
  if (data instanceof Float64Array) return "float64";
  if (data instanceof Uint16Array) return "uint16";
  if (data instanceof Int8Array) return "int8";
  if (data instanceof Int32Array) return "int32";
  return "uint32";
}

/** A zeroed typed array of `n` voxels of the given datatype. */
export function allocate(datatype: Datatype, n: number): VoxelArray {
  return DATATYPES[datatype].make(n);
}
