// System checks of the phantom against outside tools (Debian packages python3-nibabel,
// python3-scipy, python3-skimage, nifti-bin). Python is /usr/bin/python3 explicitly (the first
// python3 on PATH may lack these modules).
import { execFileSync } from "node:child_process";
import { mkdtempSync, readFileSync, rmSync, writeFileSync } from "node:fs";
import { tmpdir } from "node:os";
import { join } from "node:path";
import { fileURLToPath } from "node:url";
import { afterAll, beforeAll, describe, expect, test } from "vitest";
import { readNifti } from "../../src/image/nifti-read.js";
import { writePhantomCase } from "../../src/phantom/phantom.js";
import { parallelBeamGeometry, radonTransform } from "../../src/phantom/radon.js";
import { huToMu } from "../../src/phantom/tissues.js";

const root = fileURLToPath(new URL("../..", import.meta.url));
const demo = join(root, "data-synthetic");
const PY = "/usr/bin/python3";

function python(script: string, args: string[] = []): string {
  return execFileSync(PY, ["-c", script, ...args], { encoding: "utf8", maxBuffer: 64 << 20 });
}

// Independent resampler: nibabel reads the files (NIfTI-1 sform), scipy.ndimage.map_coordinates
// (order 0 = nearest) pulls labels-ct onto the MR grid through moving_to_fixed; Dice per label.
const DICE_SCRIPT = `
import json, sys
import numpy as np, nibabel as nib
from scipy.ndimage import map_coordinates
d = sys.argv[1]
truth = json.load(open(d + "/truth.json"))
ct = nib.load(d + "/labels-ct.nii.gz"); mr = nib.load(d + "/labels-mr.nii.gz")
lab_ct = np.asarray(ct.dataobj); lab_mr = np.asarray(mr.dataobj)
m2f = np.array(truth["moving_to_fixed"])
ijk = np.indices(lab_mr.shape).reshape(3, -1)
world_mr = mr.affine @ np.vstack([ijk, np.ones(ijk.shape[1])])
ct_idx = np.linalg.inv(ct.affine) @ (m2f @ world_mr)
inside = np.all((ct_idx[:3] > -0.5) & (ct_idx[:3] < np.array(lab_ct.shape)[:, None] - 0.5), axis=0)
res = map_coordinates(lab_ct, ct_idx[:3], order=0, mode="constant", cval=0)
ref = lab_mr.reshape(-1)
out = {}
for l in np.unique(ref[inside]):
    a = res[inside] == l; b = ref[inside] == l
    out[int(l)] = {"dice": float(2 * (a & b).sum() / (a.sum() + b.sum())), "voxels": int(b.sum())}
print(json.dumps(out))
`;

const HEADER_SCRIPT = `
import json, sys
import numpy as np, nibabel as nib
d = sys.argv[1]
truth = json.load(open(d + "/truth.json"))
labels = json.load(open(d + "/labels.json"))
out = {}
for name, key in (("ct", "ct"), ("mr", "mr"), ("labels-ct", "ct"), ("labels-mr", "mr")):
    img = nib.load(d + "/" + name + ".nii.gz")
    data = np.asarray(img.dataobj)
    out[name] = {
        "shape": list(img.shape), "dtype": str(img.get_data_dtype()),
        "sform_code": int(img.header["sform_code"]), "qform_code": int(img.header["qform_code"]),
        "affine_err": float(np.abs(img.affine - np.array(truth[key]["index_to_world"])).max()),
        "qform_err": float(np.abs(img.get_qform() - img.get_sform()).max()),
        "min": float(data.min()), "max": float(data.max()),
        "unknown_labels": [int(v) for v in np.unique(data) if str(int(v)) not in labels] if name.startswith("labels") else [],
    }
ct_pts = np.loadtxt(d + "/landmarks-ct.csv", delimiter=",", skiprows=1, usecols=(1, 2, 3))
mr_pts = np.loadtxt(d + "/landmarks-mr.csv", delimiter=",", skiprows=1, usecols=(1, 2, 3))
f2m = np.array(truth["fixed_to_moving"])
mapped = (f2m @ np.hstack([ct_pts, np.ones((len(ct_pts), 1))]).T).T[:, :3]
out["landmarks"] = {"count": len(ct_pts), "max_err": float(np.abs(mapped - mr_pts).max())}
print(json.dumps(out))
`;

describe.each([
  ["committed demo case (seed 1)", () => demo],
  ["fresh case, seed 7, both implants", () => fresh],
])("%s", (_name, dirOf) => {
  test("nibabel reads int16 CT/MR and uint8 labels whose sform equals truth's index_to_world; landmarks map by the truth", () => {
    const h = JSON.parse(python(HEADER_SCRIPT, [dirOf()]));
    expect(h.ct.dtype).toBe("int16");
    expect(h.mr.dtype).toBe("int16");
    expect(h["labels-ct"].dtype).toBe("uint8");
    expect(h["labels-mr"].dtype).toBe("uint8");
    for (const k of ["ct", "mr", "labels-ct", "labels-mr"]) {
      expect(h[k].sform_code).toBe(1);
      expect(h[k].affine_err, k).toBeLessThan(1e-3); // float32 header fields
      expect(h[k].qform_err, k).toBeLessThan(1e-3);
      expect(h[k].unknown_labels).toEqual([]);
    }
    expect(h.ct.min).toBeGreaterThanOrEqual(-1024);
    expect(h.ct.max).toBe(3071);
    expect(h.landmarks.count).toBeGreaterThanOrEqual(10);
    expect(h.landmarks.max_err).toBeLessThan(1e-5); // 6 decimals in the CSV
  });

  test("scipy resampling of labels-ct through the truth matches labels-mr: Dice > 0.9 for large structures", () => {
    const dice = JSON.parse(python(DICE_SCRIPT, [dirOf()])) as Record<
      string,
      { dice: number; voxels: number }
    >;
    // Large (thick) structures: subcutaneous fat, soft tissue, bladder, hip bones, sacrum, femora,
    // gluteus maximus, adductors, quadriceps. Thin shells such as the 2 mm skin are not "large".
    const large = [2, 3, 5, 10, 11, 12, 13, 14, 20, 21, 28, 29, 30, 31];
    for (const label of large) {
      expect(dice[label]?.voxels ?? 0, `label ${label} present`).toBeGreaterThan(1000);
      expect(dice[label].dice, `label ${label}`).toBeGreaterThan(0.9);
    }
  });
});

let fresh: string;
let scratch: string;
beforeAll(async () => {
  scratch = mkdtempSync(join(tmpdir(), "coxa-phantom-system-"));
  fresh = join(scratch, "seed7");
  await writePhantomCase({ outDir: fresh, seed: 7, implant: "both", poseDeg: 10 });
}, 300_000);
afterAll(() => rmSync(scratch, { recursive: true, force: true }));

describe("outside tools", () => {
  test("nifti_tool (NIfTI reference C tools) reads the CT header: datatype 4 (int16), dims, sform_code 1", () => {
    const out = execFileSync(
      "nifti_tool",
      [
        "-disp_hdr",
        "-field",
        "datatype",
        "-field",
        "dim",
        "-field",
        "sform_code",
        "-infiles",
        join(demo, "ct.nii.gz"),
      ],
      { encoding: "utf8" },
    );
    expect(out).toMatch(/datatype\s+\d+\s+\d+\s+4\b/);
    expect(out).toMatch(/dim\s+\d+\s+\d+\s+3 160 160 96 1 1 1 1/);
    expect(out).toMatch(/sform_code\s+\d+\s+\d+\s+1\b/);
  });

  test("radonTransform of a real phantom slice (attenuation) equals skimage.transform.radon run live", () => {
    // Axial CT slice through the implant, 2 x 2 binned to 80 x 80, converted to mu, zeroed outside the circle.
    const { volume } = readNifti(join(demo, "ct.nii.gz"));
    const truth = JSON.parse(readFileSync(join(demo, "truth.json"), "utf8"));
    const c = truth.implant_center_mm;
    const q = volume.worldToIndexPoint([0, 0, 0], c[0], c[1], c[2]);
    const k = Math.round(q[2]);
    const [nx, ny] = volume.dims;
    const n = 80;
    const img = new Float64Array(n * n);
    for (let row = 0; row < n; row++)
      for (let col = 0; col < n; col++) {
        let s = 0;
        for (let dj = 0; dj < 2; dj++)
          for (let di = 0; di < 2; di++)
            s += huToMu(volume.data[2 * col + di + nx * (2 * row + dj + ny * k)]);
        const inCircle = (col - n / 2) ** 2 + (row - n / 2) ** 2 <= (n / 2) ** 2;
        img[row * n + col] = inCircle ? s / 4 : 0;
      }
    const angles = Array.from({ length: 45 }, (_, a) => a * 4);
    const input = join(scratch, "slice.json");
    writeFileSync(input, JSON.stringify({ n, angles, image: Array.from(img) }));
    const ref = JSON.parse(
      python(
        `
import json, sys
import numpy as np
from skimage.transform import radon
d = json.load(open(sys.argv[1]))
img = np.array(d["image"]).reshape(d["n"], d["n"])
print(json.dumps(radon(img, theta=d["angles"], circle=True).T.ravel().tolist()))
`,
        [input],
      ),
    ) as number[];
    const ours = radonTransform(null, img, parallelBeamGeometry(n, { angles }));
    let diff = 0;
    let peak = 0;
    for (let i = 0; i < ours.length; i++) {
      diff = Math.max(diff, Math.abs(ours[i] - ref[i]));
      peak = Math.max(peak, Math.abs(ref[i]));
    }
    expect(peak).toBeGreaterThan(0.5);
    expect(diff).toBeLessThan(1e-9 * peak);
  });

  test("scripts/make-demo-data.mjs --check regenerates data-synthetic byte for byte", () => {
    const out = execFileSync("node", [join(root, "scripts", "make-demo-data.mjs"), "--check"], {
      encoding: "utf8",
    });
    expect(out).toMatch(/byte-identical/);
  }, 120_000);
});
