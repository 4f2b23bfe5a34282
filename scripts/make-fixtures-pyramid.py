#!/usr/bin/python3
"""Reference values for test/pyramid: scipy.ndimage.gaussian_filter on a small random volume.

Run with Debian's interpreter (python3-scipy, python3-numpy):
    /usr/bin/python3 scripts/make-fixtures-pyramid.py
Writes test/fixtures/pyramid/gaussian-filter.json.

Source of every reference value: scipy.ndimage.gaussian_filter(vol, sigma, mode="reflect",
truncate=4.0) (scipy's defaults; version recorded in the file), per-axis sigma in voxels,
including a sigma wider than the volume (repeated reflection) and a zero sigma (axis left alone).
The volume is random (numpy default_rng seed 20260102), stored i fastest (Fortran order).
"""
import json
import os

import numpy as np
import scipy
from scipy import ndimage

rng = np.random.default_rng(20260102)
nx, ny, nz = 9, 8, 6
vol = rng.uniform(-50.0, 250.0, size=(nx, ny, nz))  # vol[i, j, k]
cases = []
for sigma in [(1.0, 1.0, 1.0), (0.6, 1.7, 0.0), (2.5, 0.4, 3.0), (0.0, 1.2, 0.9), (0.0, 0.0, 1.4)]:
    smoothed = ndimage.gaussian_filter(vol, sigma=sigma, mode="reflect", truncate=4.0)
    cases.append({"sigma": list(sigma), "values": smoothed.flatten(order="F").tolist()})

out = {
    "source": f"scipy.ndimage.gaussian_filter(mode='reflect', truncate=4.0), scipy {scipy.__version__}, numpy {np.__version__}",
    "generator": "scripts/make-fixtures-pyramid.py",
    "dims": [nx, ny, nz],
    "data": vol.flatten(order="F").tolist(),
    "cases": cases,
}
root = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..")
path = os.path.join(root, "test", "fixtures", "pyramid", "gaussian-filter.json")
os.makedirs(os.path.dirname(path), exist_ok=True)
with open(path, "w") as f:
    json.dump(out, f)
    f.write("\n")
print(path)
