#!/usr/bin/python3
"""Reference values for test/export, computed by NumPy.

Run with Debian's interpreter (python3-numpy):
    /usr/bin/python3 scripts/make-fixtures-export.py
Writes test/fixtures/export/npy.json and test/fixtures/export/normalize.json.

Sources (the NumPy version is recorded in each file):
  - npy.json: numpy.save (numpy.lib.format, format version 1.0) of the arrays listed below,
    read back as bytes. The small array holds values chosen here (a ramp and a few exact
    binary fractions), not measured data.
  - normalize.json: numpy.percentile (method "linear", Hyndman & Fan definition 7), numpy.mean
    and numpy.std (ddof 0) over the voxels two masks select, on random float32 values
    (numpy default_rng seed 20260305) stored in the file.
"""
import io
import json
import os

import numpy as np


def saved(arr):
    buf = io.BytesIO()
    np.save(buf, arr, allow_pickle=False)
    return buf.getvalue()


cases = []
for shape, dtype in [((3, 160, 160), "float32"), ((3, 5, 7), "float32"), ((7,), "float32"), ((), "float32"),
                     ((2, 3), "uint8"), ((3, 512, 512), "float32"), ((1, 1, 1), "float32")]:
    arr = np.zeros(shape, dtype=dtype)
    raw = saved(arr)
    offset = len(raw) - arr.nbytes
    cases.append({"shape": list(shape), "dtype": dtype, "header_hex": raw[:offset].hex(), "data_offset": offset})

small = (np.arange(3 * 2 * 4, dtype=np.float32).reshape(3, 2, 4) * np.float32(0.25) - np.float32(1.5))
small[1, 0, 2] = np.float32(-1024.0)
small[2, 1, 3] = np.float32(3071.5)
full = {"shape": list(small.shape), "values_c_order": [float(v) for v in small.ravel(order="C")], "file_hex": saved(small).hex()}

doc = {
    "source": "scripts/make-fixtures-npy.py",
    "numpy_version": np.__version__,
    "headers": cases,
    "small_array": full,
}
out = os.path.join(os.path.dirname(__file__), "..", "test", "fixtures", "export", "npy.json")
with open(out, "w") as f:
    json.dump(doc, f, indent=1)
    f.write("\n")
print("wrote", out)

rng = np.random.default_rng(20260305)
n = 3000
values = np.concatenate([rng.normal(420.0, 90.0, n - 400), rng.uniform(0.0, 1500.0, 400)]).astype(np.float32)
body = (rng.uniform(size=n) < 0.7).astype(np.uint8)
covered = (rng.uniform(size=n) < 0.85).astype(np.uint8)
sel = values[(body == 1) & (covered == 1)].astype(np.float64)
pcts = [[1, 99], [0, 100], [5, 95], [2.5, 97.5]]
doc = {
    "source": "scripts/make-fixtures-export.py",
    "numpy_version": np.__version__,
    "values": [float(v) for v in values],
    "body": [int(v) for v in body],
    "covered": [int(v) for v in covered],
    "percentiles": [{"low": lo, "high": hi, "low_value": float(np.percentile(sel, lo, method="linear")),
                     "high_value": float(np.percentile(sel, hi, method="linear"))} for lo, hi in pcts],
    "selected_stats": {"count": int(sel.size), "min": float(sel.min()), "max": float(sel.max()),
                       "mean": float(sel.mean()), "std": float(sel.std(ddof=0))},
    "all_stats": {"count": n, "min": float(values.astype(np.float64).min()), "max": float(values.astype(np.float64).max()),
                  "mean": float(values.astype(np.float64).mean()), "std": float(values.astype(np.float64).std(ddof=0))},
}
out2 = os.path.join(os.path.dirname(__file__), "..", "test", "fixtures", "export", "normalize.json")
with open(out2, "w") as f:
    json.dump(doc, f)
    f.write("\n")
print("wrote", out2)
