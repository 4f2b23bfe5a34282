#!/usr/bin/python3
"""Reference values for test/masks from scipy.ndimage and scikit-image.

Run with Debian's interpreter (python3-scipy, python3-skimage, python3-numpy):
    /usr/bin/python3 scripts/make-fixtures-masks.py
Writes test/fixtures/masks/morphology.json.

Sources (versions recorded in the file):
  - scipy.ndimage.distance_transform_edt(~mask, sampling=spacing): Euclidean distance (mm) of
    every voxel to the nearest mask voxel, anisotropic spacing;
  - scipy.ndimage.binary_dilation / binary_erosion(border_value=0) with the ball footprint
    {(di*sx)^2 + (dj*sy)^2 + (dk*sz)^2 <= r^2};
  - scipy.ndimage.label with generate_binary_structure(3, 1) (6-connected) and (3, 3) (26);
  - scipy.ndimage.binary_fill_holes (default structure: 6-connected background);
  - skimage.filters.threshold_otsu(image, nbins=256).
The masks are random (numpy default_rng seed 20260103), stored i fastest (Fortran order).
"""
import json
import os

import numpy as np
import scipy
import skimage
from scipy import ndimage
from skimage.filters import threshold_otsu

rng = np.random.default_rng(20260103)
nx, ny, nz = 14, 12, 9
spacing = (0.8, 1.1, 2.3)
noise = ndimage.gaussian_filter(rng.normal(size=(nx, ny, nz)), 1.2)
mask = noise > -0.05
sparse = rng.uniform(size=(nx, ny, nz)) > 0.93


def ball(r):
    hi = [int(np.floor(r / s + 1e-9)) for s in spacing]
    g = np.mgrid[-hi[0]:hi[0] + 1, -hi[1]:hi[1] + 1, -hi[2]:hi[2] + 1]
    d2 = (g[0] * spacing[0]) ** 2 + (g[1] * spacing[1]) ** 2 + (g[2] * spacing[2]) ** 2
    return d2 <= r * r * (1 + 1e-12) + 1e-12


def flat(a):
    return a.astype(float).flatten(order="F").tolist()


holes = np.zeros((nx, ny, nz), bool)
holes[2:12, 2:10, 1:8] = True
holes[4:7, 4:6, 3:5] = False  # an enclosed cavity
holes[9, 5:8, 2:4] = False  # another
holes[2:4, 2:4, 1:8] = False  # a channel open at the faces (not a hole)

lab6, n6 = ndimage.label(sparse, structure=ndimage.generate_binary_structure(3, 1))
lab26, n26 = ndimage.label(sparse, structure=ndimage.generate_binary_structure(3, 3))

image = np.concatenate([rng.normal(100.0, 15.0, 3000), rng.normal(400.0, 40.0, 2000), rng.uniform(0, 600, 500)])

out = {
    "source": f"scipy {scipy.__version__} (ndimage), scikit-image {skimage.__version__}, numpy {np.__version__}",
    "generator": "scripts/make-fixtures-masks.py",
    "dims": [nx, ny, nz],
    "spacing_mm": list(spacing),
    "mask": flat(mask),
    "edt_mm": ndimage.distance_transform_edt(~mask, sampling=spacing).flatten(order="F").tolist(),
    "dilate": [{"radius_mm": r, "values": flat(ndimage.binary_dilation(mask, structure=ball(r)))} for r in (1.0, 2.5, 4.0)],
    "erode": [{"radius_mm": r, "values": flat(ndimage.binary_erosion(mask, structure=ball(r), border_value=0))} for r in (1.0, 1.9)],
    "sparse": flat(sparse),
    "label6": {"count": int(n6), "labels": flat(lab6), "sizes": np.bincount(lab6.ravel())[1:].tolist()},
    "label26": {"count": int(n26), "labels": flat(lab26), "sizes": np.bincount(lab26.ravel())[1:].tolist()},
    "holes": flat(holes),
    "filled": flat(ndimage.binary_fill_holes(holes)),
    "otsu": {"values": image.tolist(), "threshold": float(threshold_otsu(image, nbins=256))},
}
root = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..")
path = os.path.join(root, "test", "fixtures", "masks", "morphology.json")
os.makedirs(os.path.dirname(path), exist_ok=True)
with open(path, "w") as f:
    json.dump(out, f)
    f.write("\n")
print(path)
