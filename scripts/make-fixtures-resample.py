#!/usr/bin/python3
"""Reference values for test/resample: scipy.ndimage.map_coordinates on a small random volume.

Run with Debian's interpreter (python3-scipy, python3-numpy):
    /usr/bin/python3 scripts/make-fixtures-resample.py
Writes test/fixtures/resample/map-coordinates.json.

Source of every reference value: scipy.ndimage.map_coordinates (version recorded in the file)
  - order=1, mode="nearest": trilinear interpolation, edge voxels repeated beyond the centres;
  - order=3, mode="mirror", prefilter=True: cubic B-spline interpolation with whole-sample
    mirror boundaries.
The volume is random (numpy default_rng seed 20260101), stored i fastest (Fortran order) as
coxa stores voxels.
"""
import json
import os

import numpy as np
import scipy
from scipy import ndimage

rng = np.random.default_rng(20260101)
nx, ny, nz = 7, 6, 5
vol = rng.uniform(-100.0, 300.0, size=(nx, ny, nz))  # vol[i, j, k]


def points(count, rim):
    lo = np.array([-0.5 if rim else 0.0] * 3)
    hi = np.array([nx - (0.5 if rim else 1.0), ny - (0.5 if rim else 1.0), nz - (0.5 if rim else 1.0)])
    return rng.uniform(lo, hi, size=(count, 3))


def run(pts, order, mode):
    return ndimage.map_coordinates(vol, pts.T, order=order, mode=mode, prefilter=(order > 1))


inner = points(60, rim=False)
rim = points(40, rim=True)
# Points exactly on voxel centres must reproduce the data (interpolating spline).
centres = np.array([[1, 2, 3], [0, 0, 0], [6, 5, 4], [3, 1, 2]], dtype=float)
linear_pts = np.vstack([inner, rim, centres])
cubic_pts = np.vstack([inner, rim, centres])

out = {
    "source": f"scipy.ndimage.map_coordinates, scipy {scipy.__version__}, numpy {np.__version__}",
    "generator": "scripts/make-fixtures-resample.py",
    "dims": [nx, ny, nz],
    "data": vol.flatten(order="F").tolist(),
    "linear": {
        "call": "map_coordinates(vol, pts.T, order=1, mode='nearest')",
        "points": linear_pts.tolist(),
        "values": run(linear_pts, 1, "nearest").tolist(),
    },
    "cubic": {
        "call": "map_coordinates(vol, pts.T, order=3, mode='mirror', prefilter=True)",
        "points": cubic_pts.tolist(),
        "values": run(cubic_pts, 3, "mirror").tolist(),
    },
    "coefficients": {
        "call": "spline_filter(vol, order=3, mode='mirror')",
        "values": ndimage.spline_filter(vol, order=3, mode="mirror").flatten(order="F").tolist(),
    },
}
root = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..")
path = os.path.join(root, "test", "fixtures", "resample", "map-coordinates.json")
os.makedirs(os.path.dirname(path), exist_ok=True)
with open(path, "w") as f:
    json.dump(out, f, indent=1)
    f.write("\n")
print(path)
