/**
 * `coxa pair` outputs read by independent readers (system suite; Debian python3-numpy and
 * python3-nibabel, run with /usr/bin/python3):
 *  - the .npy slices load with numpy.load (NumPy's documented format 1.0) with shape
 *    (3, rows, cols), dtype float32, and at known voxels hold the CT (nibabel's reading of the
 *    input CT), the MR channel of pair.nii.gz and the metal mask;
 *  - pair.nii.gz loads in nibabel as a 4-D float32 image with the CT's affine and channel 0
 *    equal to the CT; slices.csv's z_mm equals nibabel's affine applied to the slice centre.
 * Data: coxa's synthetic demo phantom (invented, not a patient) with its true transform.
 */
import { execFileSync } from "node:child_process";
import { join } from "node:path";
import { beforeAll, describe, expect, it } from "vitest";
import { tempDir } from "../helpers/tmp.js";
import { type PhantomCaseFiles, writeDemoPhantom } from "./phantom-pair.js";

const PY = "/usr/bin/python3";
const BIN = join(import.meta.dirname, "..", "..", "dist", "cli", "main.js");
const root = tempDir("coxa-pair-sys-");
let phantom: PhantomCaseFiles;

const CHECK = `
import csv, json, os, sys
import nibabel as nib, numpy as np
from nibabel.affines import apply_affine
ct_path, out = sys.argv[1], sys.argv[2]
ct = nib.load(ct_path)
ctd = np.asanyarray(ct.dataobj).astype(np.float64) * 1.0
slope, inter = ct.header.get_slope_inter()
if slope is not None: ctd = ctd * slope + (inter or 0)
pair = nib.load(os.path.join(out, "pair.nii.gz"))
pd = np.asanyarray(pair.dataobj)
metal = np.asanyarray(nib.load(os.path.join(out, "metal.nii.gz")).dataobj)
rows = list(csv.DictReader(open(os.path.join(out, "slices.csv"))))
res = {"pair_shape": list(pair.shape), "pair_dtype": str(pair.get_data_dtype()),
       "affine_diff": float(np.abs(pair.affine - ct.affine).max()),
       "ct_channel_diff": float(np.abs(pd[..., 0] - ctd).max()),
       "metal_dtype": str(metal.dtype), "metal_sum": int(metal.sum()),
       "metal_max_ct_below": float(ctd[metal == 1].min()) if metal.sum() else None,
       "n_rows": len(rows), "n_files": len(os.listdir(os.path.join(out, "slices"))), "slices": []}
nx, ny, nz = ct.shape
metal_idx = np.argwhere(metal == 1)
for r in rows[:: max(1, len(rows) // 6)] + [rows[-1]]:
    k = int(r["slice_index"])
    a = np.load(os.path.join(out, r["file"]))
    pts = [(0, 0), (nx // 2, ny // 2), (nx - 1, ny - 1), (17, 91)]
    pts += [(int(i), int(j)) for i, j, kk in metal_idx if kk == k][:3]
    vals = []
    for i, j in pts:
        vals.append([float(a[0, j, i]), float(ctd[i, j, k]), float(a[1, j, i]), float(pd[i, j, k, 1]), float(a[2, j, i]), float(metal[i, j, k])])
    z = apply_affine(ct.affine, [(nx - 1) / 2, (ny - 1) / 2, k])[2]
    res["slices"].append({"k": k, "shape": list(a.shape), "dtype": str(a.dtype), "fortran": bool(np.isfortran(a)),
                          "z_csv": float(r["z_mm"]), "z_nib": float(z), "vals": vals,
                          "metal_fraction_csv": float(r["metal_fraction"]), "metal_fraction": float(metal[:, :, k].mean())})
print(json.dumps(res))
`;

beforeAll(async () => {
  phantom = await writeDemoPhantom(join(root, "case"), 3);
});

describe("coxa pair on a demo phantom, read by numpy and nibabel", () => {
  it("npy slices, pair.nii.gz and metal.nii.gz agree with nibabel's reading of the CT", () => {
    const out = join(root, "export");
    execFileSync(
      process.execPath,
      [
        BIN,
        "pair",
        "--fixed",
        phantom.ct,
        "--moving",
        phantom.mr,
        "--transform",
        phantom.truthTransform,
        "--out",
        out,
        "--slices",
        "--quiet",
      ],
      {
        encoding: "utf8",
      },
    );
    const r = JSON.parse(execFileSync(PY, ["-c", CHECK, phantom.ct, out], { encoding: "utf8" }));
    expect(r.pair_shape).toEqual([160, 160, 96, 2]);
    expect(r.pair_dtype).toBe("float32");
    expect(r.affine_diff).toBeLessThan(1e-5);
    expect(r.ct_channel_diff).toBe(0);
    expect(r.metal_dtype).toBe("uint8");
    expect(r.metal_sum).toBeGreaterThan(0);
    expect(r.metal_max_ct_below).toBeGreaterThanOrEqual(2500); // undilated: only >= 2500 HU voxels
    expect(r.n_files).toBe(r.n_rows);
    expect(r.n_rows).toBeGreaterThan(0);
    for (const s of r.slices) {
      expect(s.shape).toEqual([3, 160, 160]);
      expect(s.dtype).toBe("float32");
      expect(s.fortran).toBe(false);
      expect(s.z_csv).toBeCloseTo(s.z_nib, 3);
      expect(s.metal_fraction_csv).toBeCloseTo(s.metal_fraction, 6);
      for (const [npyCt, nibCt, npyMr, pairMr, npyMetal, nibMetal] of s.vals) {
        expect(npyCt).toBe(nibCt);
        expect(npyMr).toBe(pairMr);
        expect(npyMetal).toBe(nibMetal);
      }
    }
    expect(r.slices.some((s: { vals: number[][] }) => s.vals.some((v) => v[4] === 1))).toBe(true);
  });

  it("--normalize window: both channels in 0..1 and the CT channel equals the clipped HU window of nibabel's CT", () => {
    const out = join(root, "export-window");
    const text = execFileSync(
      process.execPath,
      [
        BIN,
        "pair",
        "--fixed",
        phantom.ct,
        "--moving",
        phantom.mr,
        "--transform",
        phantom.truthTransform,
        "--out",
        out,
        "--normalize",
        "window",
        "--ct-level",
        "40",
        "--ct-width",
        "400",
        "--json",
      ],
      { encoding: "utf8" },
    );
    const sidecar = JSON.parse(text);
    expect(sidecar.normalize.ct).toMatchObject({ level_hu: 40, width_hu: 400, low_hu: -160, high_hu: 240 });
    const py = `
import sys, json, numpy as np, nibabel as nib
ct = nib.load(sys.argv[1]).get_fdata()
p = np.asanyarray(nib.load(sys.argv[2]).dataobj)
exp = np.clip((ct + 160.0) / 400.0, 0, 1)
print(json.dumps({"ct_diff": float(np.abs(p[..., 0] - exp).max()), "mr_min": float(p[..., 1].min()), "mr_max": float(p[..., 1].max())}))`;
    const r = JSON.parse(
      execFileSync(PY, ["-c", py, phantom.ct, join(out, "pair.nii.gz")], { encoding: "utf8" }),
    );
    expect(r.ct_diff).toBeLessThan(1e-6);
    expect(r.mr_min).toBeGreaterThanOrEqual(0);
    expect(r.mr_max).toBeLessThanOrEqual(1);
    expect(sidecar.normalize.mr.high_value).toBeGreaterThan(sidecar.normalize.mr.low_value);
  });
});
