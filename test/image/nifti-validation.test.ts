/**
 * Bad input: each broken file gives a CoxaError with a stable code and a one-line message that
 * names the file. Header offsets are those of the NIfTI-1 standard (nifti1.h).
 */
import { writeFileSync } from "node:fs";
import { join } from "node:path";
import { gzipSync } from "node:zlib";
import { describe, expect, it } from "vitest";
import { CoxaError } from "../../src/common/errors.js";
import { scaling } from "../../src/geometry/mat4.js";
import { readNifti } from "../../src/image/nifti-read.js";
import { encodeNifti } from "../../src/image/nifti-write.js";
import { Volume } from "../../src/image/volume.js";
import { tempDir } from "../helpers/tmp.js";

const dir = tempDir();

function goodBytes(): Uint8Array {
  const data = new Int16Array(4 * 3 * 2).map((_, i) => i);
  return encodeNifti(new Volume([4, 3, 2], data, scaling(1, 1, 1)), { datatype: "int16" });
}

function patched(name: string, edit: (view: DataView, bytes: Uint8Array) => unknown, gz = false): string {
  const bytes = goodBytes();
  const out = (edit(new DataView(bytes.buffer), bytes) as Uint8Array | undefined) ?? bytes;
  const path = join(dir, name);
  writeFileSync(path, gz ? gzipSync(out) : out);
  return path;
}

function expectError(path: string, code: string, words: RegExp, options = {}) {
  let caught: unknown;
  try {
    readNifti(path, options);
  } catch (err) {
    caught = err;
  }
  expect(caught, `${path} should be refused`).toBeInstanceOf(CoxaError);
  const err = caught as CoxaError;
  expect(err.code).toBe(code);
  expect(err.exitCode).toBe(2);
  expect(err.message).toContain(path);
  expect(err.message).toMatch(words);
  expect(err.message).not.toContain("\n");
}

describe("readNifti refuses bad files with a clear one-line error", () => {
  it("missing file", () => expectError(join(dir, "nope.nii"), "FILE_MISSING", /does not exist/));

  it("not NIfTI: a text file", () => {
    const path = join(dir, "notes.nii");
    writeFileSync(path, "label,x,y,z\n".repeat(40));
    expectError(path, "NOT_NIFTI", /sizeof_hdr/);
  });

  it("not NIfTI: right sizeof_hdr but wrong magic (an Analyze 7.5 header)", () => {
    const path = patched("analyze.nii", (_v, b) => {
      b.set([0, 0, 0, 0], 344);
      return b;
    });
    expectError(path, "NOT_NIFTI", /magic/);
  });

  it("a .hdr/.img pair header (magic ni1) is named as such", () => {
    const path = patched("pair.nii", (_v, b) => {
      b.set([0x6e, 0x69, 0x31, 0], 344);
      return b;
    });
    expectError(path, "NOT_NIFTI", /header\/image pair/);
  });

  it("truncated data (.nii)", () =>
    expectError(
      patched("short.nii", (_v, b) => b.subarray(0, 352 + 10)),
      "TRUNCATED",
      /truncated/,
    ));

  it("truncated gzip stream (.nii.gz)", () => {
    const full = gzipSync(goodBytes());
    const path = join(dir, "short.nii.gz");
    writeFileSync(path, full.subarray(0, full.length - 12));
    expectError(path, "TRUNCATED", /truncated|ends early/);
  });

  it("a dimension <= 0", () =>
    expectError(
      patched("dim0.nii", (v) => void v.setInt16(44, 0, true)),
      "BAD_DIMS",
      /dim\[2\] is 0/,
    ));

  it("a negative dimension", () =>
    expectError(
      patched("dimneg.nii", (v) => void v.setInt16(42, -4, true)),
      "BAD_DIMS",
      /dim\[1\] is -4/,
    ));

  it("more than 2^31 voxels", () => {
    const path = patched("huge.nii", (v) => {
      v.setInt16(40, 3, true);
      v.setInt16(42, 32767, true);
      v.setInt16(44, 32767, true);
      v.setInt16(46, 32767, true);
    });
    expectError(path, "BAD_DIMS", /more than 2\^31/);
  });

  it("more voxels than the --max-voxels guard", () =>
    expectError(
      patched("guard.nii", () => undefined),
      "TOO_LARGE",
      /limit of 10/,
      { maxVoxels: 10 },
    ));

  for (const [label, value] of [
    ["zero", 0],
    ["NaN", Number.NaN],
    ["negative", -1.5],
  ] as const) {
    it(`voxel size ${label}`, () =>
      expectError(
        patched(`pix-${label}.nii`, (v) => void v.setFloat32(80 + 4, value, true)),
        "BAD_SPACING",
        /pixdim\[2\]/,
      ));
  }

  it("singular sform (a zero column)", () => {
    const path = patched("singular.nii", (v) => {
      for (const off of [280, 296, 312]) v.setFloat32(off, 0, true);
    });
    expectError(path, "BAD_AFFINE", /singular/);
  });

  it("non-finite sform", () =>
    expectError(
      patched("nan-affine.nii", (v) => void v.setFloat32(284, Number.NaN, true)),
      "BAD_AFFINE",
      /non-finite/,
    ));

  it("unsupported datatype (complex64)", () => {
    const path = patched("complex.nii", (v) => {
      v.setInt16(70, 32, true);
      v.setInt16(72, 64, true);
    });
    expectError(path, "UNSUPPORTED_DATATYPE", /datatype code 32/);
  });

  it("gzip bomb: the stream holds far more than the header declares", () => {
    // A valid 4x3x2 int16 header followed by 64 MiB of zeros: compresses to ~64 KiB.
    const head = goodBytes();
    const body = new Uint8Array(head.length + 64 * 1024 * 1024);
    body.set(head);
    const path = join(dir, "bomb.nii.gz");
    writeFileSync(path, gzipSync(body, { level: 9 }));
    expectError(path, "GZIP_BOMB", /refusing/);
  });

  it("--volume beyond the frames in the file", () =>
    expectError(
      patched("vol.nii", () => undefined),
      "BAD_ARGUMENT",
      /volume 3 requested/,
      { volume: 3 },
    ));
});
