#!/usr/bin/python3
"""Reference answers for coxa's NIfTI reader, from independent readers.

Run with Debian's python3 (packages python3-nibabel, nifti-bin):
    /usr/bin/python3 scripts/make-nifti-reference.py [OUT.json]

Sources:
  - nibabel (Debian python3-nibabel, version recorded in the JSON) reads each fixture: shape,
    datatype, byte order, the affine nibabel chooses, its qform and sform, codes, scl_slope/inter,
    and voxel values at fixed indices.
  - The fixture images anatomical.nii (big-endian int16), example4d.nii.gz (oblique qform and
    sform, 4-D) and example_nifti2.nii.gz (NIfTI-2) are nibabel's own test data, copied from
    /usr/lib/python3/dist-packages/nibabel/tests/data (MIT licence, see PROVENANCE.md).
  - no-xform.nii is made here with nibabel (qform_code = sform_code = 0). For it the NIfTI-1
    standard ("method 1") and its reference C library give diag(pixdim) with no offset; the
    library's answer is taken from `nifti_tool -disp_nim -field qto_xyz` (Debian nifti-bin).
    nibabel instead returns an Analyze-style centred affine; both are recorded.
  - For every file the reference C library's qform matrix (nifti_tool qto_xyz, printed to 6
    decimals) is recorded too: where the quaternion's a = sqrt(1 - b^2 - c^2 - d^2) is tiny,
    nifti1_io sets a = 0 and renormalises (b, c, d) while nibabel keeps the tiny a, so the two
    differ by about 1e-5 in rotation entries (example4d.nii.gz).
"""
import json
import os
import subprocess
import sys

import nibabel as nib
import numpy as np

HERE = os.path.dirname(os.path.abspath(__file__))
FIX = os.path.join(HERE, "..", "test", "fixtures", "nifti")
OUT = sys.argv[1] if len(sys.argv) > 1 else os.path.join(FIX, "reference.json")


def make_no_xform(path):
    data = (np.arange(2 * 3 * 4, dtype=np.int16) * 7 - 20).reshape((2, 3, 4), order="F")
    hdr = nib.Nifti1Header()
    hdr.set_data_dtype(np.int16)
    img = nib.Nifti1Image(data, None, header=hdr)
    img.header.set_zooms((1.5, 2.0, 3.0))
    img.header["qform_code"] = 0
    img.header["sform_code"] = 0
    nib.save(img, path)
    # nibabel may set codes on save; force both to 0 in the bytes (int16 at 252 and 254).
    with open(path, "r+b") as f:
        f.seek(252)
        f.write(np.array([0, 0], dtype="<i2").tobytes())


def nifti_tool_qto_xyz(path):
    try:
        out = subprocess.run(
            ["nifti_tool", "-disp_nim", "-field", "qto_xyz", "-infiles", path],
            capture_output=True, text=True, check=True).stdout
    except (OSError, subprocess.CalledProcessError):
        return None
    for line in out.splitlines():
        parts = line.split()
        if parts and parts[0] == "qto_xyz":
            vals = [float(v) for v in parts[3:19]]
            return [vals[r * 4:(r + 1) * 4] for r in range(4)]
    return None


def indices_for(shape):
    nx, ny, nz = shape[:3]
    picks = [(0, 0, 0), (nx - 1, ny - 1, nz - 1), (nx // 2, ny // 2, nz // 2),
             (nx // 3, (2 * ny) // 3, nz // 4), (1 % nx, 2 % ny, 3 % nz)]
    return [list(p) for p in picks]


def describe(name):
    path = os.path.join(FIX, name)
    img = nib.load(path)
    hdr = img.header
    data = np.asanyarray(img.dataobj)  # scaled
    shape = list(img.shape)
    vols = []
    frames = int(np.prod(shape[3:])) if len(shape) > 3 else 1
    for v in range(min(frames, 2)):
        vol = data if len(shape) == 3 else data.reshape(shape[:3] + [-1], order="F")[..., v]
        vols.append([{"ijk": ijk, "value": float(vol[tuple(ijk)])} for ijk in indices_for(shape)])
    qform, qcode = hdr.get_qform(coded=True)
    sform, scode = hdr.get_sform(coded=True)
    slope, inter = hdr.get_slope_inter()
    return {
        "file": name,
        "nifti_version": 2 if isinstance(img, nib.Nifti2Image) else 1,
        "shape": shape,
        "datatype": str(hdr.get_data_dtype().newbyteorder("=")),
        "byteorder": "big" if hdr.endianness == ">" else "little",
        "affine": img.affine.tolist(),
        "qform": None if qform is None else qform.tolist(),
        "qform_code": int(hdr["qform_code"]),
        "sform": None if sform is None else sform.tolist(),
        "sform_code": int(hdr["sform_code"]),
        "scl_slope": None if slope is None else float(slope),
        "scl_inter": None if inter is None else float(inter),
        "pixdim": [float(x) for x in hdr["pixdim"][:4]],
        "voxels": vols,
        "nifti_tool_qto_xyz": nifti_tool_qto_xyz(path),
    }


def main():
    make_no_xform(os.path.join(FIX, "no-xform.nii"))
    files = ["anatomical.nii", "example4d.nii.gz", "example_nifti2.nii.gz", "no-xform.nii"]
    ref = {
        "generator": "scripts/make-nifti-reference.py",
        "nibabel_version": nib.__version__,
        "numpy_version": np.__version__,
        "images": [describe(f) for f in files],
        "no_xform_nifti_tool_qto_xyz": nifti_tool_qto_xyz(os.path.join(FIX, "no-xform.nii")),
    }
    with open(OUT, "w") as f:
        json.dump(ref, f, indent=1)
        f.write("\n")
    print(OUT)


if __name__ == "__main__":
    main()
