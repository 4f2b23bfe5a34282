/**
 * Files coxa writes, checked by independent readers (system suite: Debian python3-nibabel and
 * nifti-bin must be installed):
 *  - nibabel 5 reads the same affine (to 1e-5 mm) and the same voxel values;
 *  - the NIfTI reference C library's header check passes (nifti_tool -check_hdr -check_nim);
 *  - the stored nibabel/nifti_tool answers in test/fixtures/nifti/reference.json are reproduced
 *    by rerunning scripts/make-nifti-reference.py.
 */
import { execFileSync } from "node:child_process";
import { readFileSync } from "node:fs";
import { join } from "node:path";
import { describe, expect, it } from "vitest";
import { Rng } from "../../src/common/random.js";
import { compose, scaling, toRows, translation } from "../../src/geometry/mat4.js";
import { rotationFromDeg } from "../../src/geometry/rotation.js";
import { allocate, DATATYPE_NAMES, DATATYPES } from "../../src/image/datatypes.js";
import { writeNifti } from "../../src/image/nifti-write.js";
import { Volume } from "../../src/image/volume.js";
import { expectAllClose } from "../helpers/close.js";
import { tempDir } from "../helpers/tmp.js";

const PY = "/usr/bin/python3";
const ROOT = join(import.meta.dirname, "..", "..");
const dir = tempDir();

const NIBABEL_READ = `
import json, sys
import nibabel as nib, numpy as np
out = []
for p in sys.argv[1:]:
    img = nib.load(p)
    d = np.asanyarray(img.dataobj)
    flat = d.reshape(-1, order="F") if d.ndim == 3 else d.reshape(d.shape[:3] + (-1,), order="F").reshape(-1, order="F")
    out.append({"path": p, "shape": list(img.shape), "dtype": str(img.get_data_dtype().newbyteorder("=")),
                "affine": img.affine.tolist(), "qform_code": int(img.header["qform_code"]),
                "sform_code": int(img.header["sform_code"]), "data": [float(v) for v in flat]})
print(json.dumps(out))
`;

function writtenFiles(): { path: string; vol: Volume; frames: Float32Array[] }[] {
  const rng = new Rng(5);
  const files: { path: string; vol: Volume; frames: Float32Array[] }[] = [];
  for (const dt of DATATYPE_NAMES) {
    const info = DATATYPES[dt];
    const data = allocate(dt, 4 * 3 * 5);
    for (let i = 0; i < data.length; i++)
      data[i] = info.integer
        ? Math.round(rng.range(Math.max(info.min, -1e6), Math.min(info.max, 1e6)))
        : rng.range(-3e3, 3e3);
    const affine = compose(
      translation(rng.range(-150, 150), rng.range(-150, 150), rng.range(-150, 150)),
      rotationFromDeg(new Float64Array(16), rng.range(-25, 25), rng.range(-25, 25), rng.range(-25, 25)),
      scaling(0.7, 1.3, 3.5),
    );
    for (const ext of [".nii", ".nii.gz"]) {
      const path = join(dir, `w-${dt}${ext}`);
      const vol = new Volume([4, 3, 5], data, affine);
      writeNifti(path, vol, { datatype: dt });
      files.push({ path, vol, frames: [] });
    }
  }
  const frame2 = new Float32Array(60).map((_, i) => -i);
  const base = new Volume(
    [4, 3, 5],
    new Float32Array(60).map((_, i) => i * 0.5),
    scaling(-1, -1, 2),
  );
  const path4d = join(dir, "w-4d.nii.gz");
  writeNifti(path4d, base, { frames: [frame2] });
  files.push({ path: path4d, vol: base, frames: [frame2] });
  return files;
}

describe("NIfTI files written by coxa, read by independent tools", () => {
  const files = writtenFiles();

  it("nibabel 5 reads the same affine (1e-5 mm) and voxel values for every datatype and 4-D", () => {
    const out = JSON.parse(
      execFileSync(PY, ["-c", NIBABEL_READ, ...files.map((f) => f.path)], {
        encoding: "utf8",
        maxBuffer: 1 << 26,
      }),
    );
    expect(out).toHaveLength(files.length);
    for (let n = 0; n < files.length; n++) {
      const { vol, frames, path } = files[n];
      const ref = out[n];
      expect(ref.shape, path).toEqual(frames.length ? [4, 3, 5, 1 + frames.length] : [4, 3, 5]);
      expect(ref.qform_code, path).toBe(1);
      expect(ref.sform_code, path).toBe(1);
      expectAllClose(ref.affine, toRows(vol.indexToWorld), 1e-5, `${path} affine`);
      const expected = [...Array.from(vol.data), ...frames.flatMap((f) => Array.from(f))];
      const tol = vol.datatype === "float64" || vol.datatype === "float32" ? 1e-3 : 0;
      expectAllClose(ref.data, expected, tol, `${path} data`);
    }
  });

  it("nifti_tool -check_hdr -check_nim reports every file good (NIfTI reference C library)", () => {
    for (const { path } of files) {
      const out = execFileSync("nifti_tool", ["-check_hdr", "-check_nim", "-infiles", path], {
        encoding: "utf8",
      });
      expect(out, path).toMatch(/header IS GOOD/);
      expect(out, path).toMatch(/nifti_image IS GOOD/);
    }
  });

  it("rerunning scripts/make-nifti-reference.py reproduces the committed reference.json", () => {
    const fresh = join(dir, "reference.json");
    execFileSync(PY, [join(ROOT, "scripts", "make-nifti-reference.py"), fresh], { encoding: "utf8" });
    const committed = JSON.parse(
      readFileSync(join(ROOT, "test", "fixtures", "nifti", "reference.json"), "utf8"),
    );
    expect(JSON.parse(readFileSync(fresh, "utf8"))).toEqual(committed);
  });
});
