/**
 * `.npy` writer against NumPy's documented format 1.0 and against the bytes numpy.save writes
 * (test/fixtures/export/npy.json, made by scripts/make-fixtures-export.py with Debian's numpy 1.24.2).
 */
import { readFileSync } from "node:fs";
import { join } from "node:path";
import { describe, expect, it } from "vitest";
import { encodeNpy, NPY_ALIGNMENT, npyHeader, shapeLiteral, writeNpy } from "../../src/export/npy.js";
import { tempDir } from "../helpers/tmp.js";

interface Fixture {
  numpy_version: string;
  headers: { shape: number[]; dtype: "float32" | "uint8"; header_hex: string; data_offset: number }[];
  small_array: { shape: number[]; values_c_order: number[]; file_hex: string };
}

const FIX: Fixture = JSON.parse(
  readFileSync(join(import.meta.dirname, "..", "fixtures", "export", "npy.json"), "utf8"),
);
const dir = tempDir();

function concat(parts: Uint8Array[]): Buffer {
  return Buffer.concat(parts.map((p) => Buffer.from(p.buffer, p.byteOffset, p.byteLength)));
}

describe("npyHeader", () => {
  it("lays out magic, version 1.0, little-endian header length and a 64-byte aligned dict (NumPy format 1.0)", () => {
    const h = npyHeader([3, 160, 160]);
    // NumPy's documented layout: "\x93NUMPY", major 1, minor 0, uint16 LE HEADER_LEN.
    expect([...h.subarray(0, 8)]).toEqual([0x93, 0x4e, 0x55, 0x4d, 0x50, 0x59, 1, 0]);
    const headerLen = h[8] | (h[9] << 8);
    expect(10 + headerLen).toBe(h.length);
    expect(h.length % NPY_ALIGNMENT).toBe(0);
    const text = Buffer.from(h.subarray(10)).toString("latin1");
    expect(text.endsWith("\n")).toBe(true);
    expect(text.trimEnd()).toBe("{'descr': '<f4', 'fortran_order': False, 'shape': (3, 160, 160), }");
  });

  it("shapeLiteral writes Python tuples: (7,) for one axis, () for a scalar", () => {
    expect(shapeLiteral([7])).toBe("(7,)");
    expect(shapeLiteral([])).toBe("()");
    expect(shapeLiteral([3, 5, 7])).toBe("(3, 5, 7)");
  });

  for (const c of FIX.headers) {
    it(`matches numpy.save byte for byte, shape (${c.shape.join(", ")}) ${c.dtype} (numpy ${FIX.numpy_version})`, () => {
      const h = npyHeader(c.shape, c.dtype);
      expect(Buffer.from(h).toString("hex")).toBe(c.header_hex);
      expect(h.length).toBe(c.data_offset);
    });
  }

  it("refuses negative or fractional shape entries", () => {
    expect(() => npyHeader([3, -1])).toThrow(/not a whole number/);
    expect(() => npyHeader([2.5])).toThrow(/not a whole number/);
  });
});

describe("encodeNpy / writeNpy", () => {
  it("a whole file equals numpy.save's bytes for a small float32 array", () => {
    const { shape, values_c_order, file_hex } = FIX.small_array;
    const bytes = concat(encodeNpy(Float32Array.from(values_c_order), shape));
    expect(bytes.toString("hex")).toBe(file_hex);
    const path = join(dir, "small.npy");
    writeNpy(path, Float32Array.from(values_c_order), shape);
    expect(readFileSync(path).toString("hex")).toBe(file_hex);
  });

  it("refuses a shape that does not match the data length", () => {
    expect(() => encodeNpy(new Float32Array(10), [3, 3])).toThrow(/holds 9 values, data has 10/);
  });

  it("uint8 data get the '|u1' descr and are stored as they are", () => {
    const parts = encodeNpy(Uint8Array.from([0, 1, 255, 7, 8, 9]), [2, 3]);
    expect(Buffer.from(parts[0]).toString("latin1")).toContain("'descr': '|u1'");
    expect([...parts[1]]).toEqual([0, 1, 255, 7, 8, 9]);
  });
});
