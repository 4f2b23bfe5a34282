/** Write -> read identity for every datatype, both extensions, 4-D frames and oblique affines. */
import { readFileSync } from "node:fs";
import { join } from "node:path";
import fc from "fast-check";
import { describe, expect, it } from "vitest";
import { Rng } from "../../src/common/random.js";
import { compose, type Mat4, scaling, translation } from "../../src/geometry/mat4.js";
import { rotationFromDeg } from "../../src/geometry/rotation.js";
import { allocate, DATATYPE_NAMES, DATATYPES } from "../../src/image/datatypes.js";
import { readNifti } from "../../src/image/nifti-read.js";
import { encodeNifti, float32Affine, writeNifti } from "../../src/image/nifti-write.js";
import { Volume } from "../../src/image/volume.js";
import { expectAllClose } from "../helpers/close.js";
import { tempDir } from "../helpers/tmp.js";

const dir = tempDir();

function obliqueAffine(rng: Rng): Mat4 {
  const r = rotationFromDeg(new Float64Array(16), rng.range(-30, 30), rng.range(-30, 30), rng.range(-30, 30));
  return compose(
    translation(rng.range(-120, 120), rng.range(-120, 120), rng.range(-120, 120)),
    r,
    scaling(0.8, 1.1, 4),
  );
}

describe("writeNifti / readNifti round trip", () => {
  for (const dt of DATATYPE_NAMES) {
    it(`${dt}: values, dims and affine survive .nii and .nii.gz`, () => {
      const rng = new Rng(DATATYPES[dt].code);
      const dims = [5, 4, 3] as const;
      const data = allocate(dt, 60);
      const info = DATATYPES[dt];
      for (let i = 0; i < data.length; i++) {
        // Include both range ends for integer types.
        if (info.integer)
          data[i] = i === 0 ? info.min : i === 1 ? info.max : Math.round(rng.range(info.min, info.max));
        else data[i] = rng.range(-1e4, 1e4);
      }
      const affine = obliqueAffine(rng);
      const vol = new Volume(dims, data, affine);
      for (const ext of [".nii", ".nii.gz"]) {
        const path = join(dir, `rt-${dt}${ext}`);
        writeNifti(path, vol, { datatype: dt });
        const back = readNifti(path);
        expect(back.header.datatype).toBe(dt);
        expect(back.volume.dims).toEqual(dims);
        expect(Array.from(back.volume.data)).toEqual(Array.from(dt === "float32" ? data : data));
        // sform stored as float32 (NIfTI-1): exact to float32 rounding.
        expectAllClose(back.volume.indexToWorld, float32Affine(affine), 0, "sform");
        expectAllClose(back.header.qform!, affine, 1e-5, "qform");
        expect(back.header.qformCode).toBe(1);
        expect(back.header.sformCode).toBe(1);
      }
    });
  }

  it("header layout: sizeof_hdr 348, vox_offset 352, magic n+1, xyzt_units mm (NIfTI-1 standard)", () => {
    const vol = new Volume([2, 2, 2], new Float32Array(8), scaling(1, 2, 3));
    const bytes = encodeNifti(vol);
    const view = new DataView(bytes.buffer);
    expect(bytes.length).toBe(352 + 8 * 4);
    expect(view.getInt32(0, true)).toBe(348);
    expect(view.getFloat32(108, true)).toBe(352);
    expect(String.fromCharCode(bytes[344], bytes[345], bytes[346])).toBe("n+1");
    expect(bytes[347]).toBe(0);
    expect(bytes[123] & 7).toBe(2);
    expect(view.getInt16(70, true)).toBe(16); // DT_FLOAT32
    expect(view.getInt16(72, true)).toBe(32);
  });

  it("an affine with shear is written with qform_code 0 and the sform only", () => {
    const m = scaling(1, 1, 1);
    m[1] = 0.3;
    const path = join(dir, "shear.nii");
    writeNifti(path, new Volume([3, 3, 3], new Float32Array(27), m));
    const back = readNifti(path);
    expect(back.header.qformCode).toBe(0);
    expect(back.header.sformCode).toBe(1);
    expectAllClose(back.volume.indexToWorld, m, 1e-7, "sform");
  });

  it("4-D: extra frames are written as dim[4] and each reads back with `volume`", () => {
    const a = new Float32Array(8).fill(1);
    const b = new Float32Array(8).fill(2);
    const path = join(dir, "frames.nii.gz");
    writeNifti(path, new Volume([2, 2, 2], a, scaling(1, 1, 1)), { frames: [b] });
    const first = readNifti(path);
    expect(first.header.shape).toEqual([2, 2, 2, 2]);
    expect(Array.from(first.volume.data)).toEqual(Array.from(a));
    expect(Array.from(readNifti(path, { volume: 1 }).volume.data)).toEqual(Array.from(b));
  });

  it("integer output rounds to nearest and clamps to the type's range", () => {
    const path = join(dir, "clamp.nii");
    const src = Float32Array.from([-40000, -1.6, -0.4, 0.4, 2.5, 40000, Number.NaN, 3.49]);
    writeNifti(path, new Volume([8, 1, 1], src, scaling(1, 1, 1)), { datatype: "int16" });
    expect(Array.from(readNifti(path).volume.data)).toEqual([-32768, -2, 0, 0, 3, 32767, 0, 3]);
  });

  it("scl_slope / scl_inter are applied on read (value = slope * stored + inter)", () => {
    const path = join(dir, "scaled.nii");
    const src = Float32Array.from([-1000, 0, 1000, 2500]);
    writeNifti(path, new Volume([4, 1, 1], src, scaling(1, 1, 1)), {
      datatype: "int16",
      sclSlope: 0.5,
      sclInter: -1024,
    });
    const raw = readFileSync(path);
    // stored = (value - inter) / slope
    expect(new Int16Array(raw.buffer.slice(raw.byteOffset + 352, raw.byteOffset + 360))[0]).toBe(48);
    const back = readNifti(path);
    expect(back.header.scaled).toBe(true);
    expect(back.volume.data).toBeInstanceOf(Float32Array);
    expect(Array.from(back.volume.data)).toEqual([-1000, 0, 1000, 2500]);
  });

  it("index -> world -> index is the identity (property, 200 random grids and points)", () => {
    fc.assert(
      fc.property(fc.integer({ min: 1, max: 1e9 }), (seed) => {
        const rng = new Rng(seed);
        const vol = new Volume([4, 5, 6], new Float32Array(120), obliqueAffine(rng));
        const p = [0, 0, 0];
        const q = [0, 0, 0];
        const i = rng.range(-10, 10);
        const j = rng.range(-10, 10);
        const k = rng.range(-10, 10);
        vol.indexToWorldPoint(p, i, j, k);
        vol.worldToIndexPoint(q, p[0], p[1], p[2]);
        return Math.abs(q[0] - i) < 1e-9 && Math.abs(q[1] - j) < 1e-9 && Math.abs(q[2] - k) < 1e-9;
      }),
      { numRuns: 200 },
    );
  });
});
