#!/usr/bin/python3
"""Reference values for the geometry tests (test/geometry/*.test.ts).

Run with Debian's interpreter, which carries the reference libraries:
    /usr/bin/python3 scripts/make-fixtures-geometry.py
Writes test/fixtures/geometry/reference.json. Sources (Debian packages):
  - python3-scipy:   scipy.spatial.transform.Rotation (rotation convention),
                     scipy.linalg.polar (nearest rotation of a matrix)
  - python3-numpy:   numpy.linalg.eigvalsh (symmetric eigenvalues)
  - python3-skimage: skimage.transform.EuclideanTransform / SimilarityTransform .estimate
                     (least-squares point fit after Umeyama 1991)
  - Python stdlib:   hashlib + struct (canonical transform hash), csv (RFC 4180 parsing)
Inputs are random numbers from a fixed numpy seed: invented data, not patient data.
"""
import csv
import hashlib
import io
import json
import os
import struct
import sys

import numpy as np
import scipy
import scipy.linalg
import skimage
from scipy.spatial.transform import Rotation
from skimage.transform import EuclideanTransform, SimilarityTransform

rng = np.random.default_rng(20240607)
out = {
    "generator": "scripts/make-fixtures-geometry.py",
    "versions": {
        "python": sys.version.split()[0],
        "numpy": np.__version__,
        "scipy": scipy.__version__,
        "skimage": skimage.__version__,
    },
}

# 1. Rotations: extrinsic x, then y, then z (lower-case "xyz" in scipy) = Rz . Ry . Rx.
rotations = []
for angles in [[30, 0, 0], [0, 30, 0], [0, 0, 30], [10, -20, 35], [-170, 80, 120], [5.5, 44.25, -90.0]]:
    rotations.append({"angles_deg": angles, "matrix": Rotation.from_euler("xyz", angles, degrees=True).as_matrix().tolist()})
for _ in range(4):
    angles = [float(a) for a in rng.uniform(-179, 179, 3)]
    angles[1] = float(rng.uniform(-89, 89))
    rotations.append({"angles_deg": angles, "matrix": Rotation.from_euler("xyz", angles, degrees=True).as_matrix().tolist()})
out["rotations"] = {"source": "scipy.spatial.transform.Rotation.from_euler('xyz', degrees=True)", "cases": rotations}

# 2. Symmetric eigenvalues.
eigen = []
for n in [3, 6, 12]:
    a = rng.normal(size=(n, n))
    a = a + a.T
    eigen.append({"n": n, "matrix": a.flatten().tolist(), "eigenvalues": np.linalg.eigvalsh(a).tolist()})
out["eigen"] = {"source": "numpy.linalg.eigvalsh (ascending)", "cases": eigen}

# 3. Polar decomposition: A = U P, U the nearest orthogonal matrix (a rotation when det A > 0).
polar = []
while len(polar) < 4:
    a = np.eye(3) + 0.3 * rng.normal(size=(3, 3))
    if np.linalg.det(a) <= 0.2:
        continue
    u, _p = scipy.linalg.polar(a, side="right")
    polar.append({"block": a.tolist(), "rotation": u.tolist()})
out["polar"] = {"source": "scipy.linalg.polar(A, side='right')", "cases": polar}

# 4. Least-squares point fits (Umeyama 1991 as implemented by scikit-image).
def fit(kind, src, dst):
    t = EuclideanTransform(dimensionality=3) if kind == "rigid" else SimilarityTransform(dimensionality=3)
    ok = t.estimate(src, dst)
    assert ok
    mapped = t(src)
    fre = float(np.sqrt(np.mean(np.sum((mapped - dst) ** 2, axis=1))))
    return {"kind": kind, "source_mm": src.flatten().tolist(), "target_mm": dst.flatten().tolist(),
            "matrix": t.params.tolist(), "fre_mm": fre}

fits = []
src = rng.uniform(-80, 80, size=(7, 3))
rot = Rotation.from_euler("xyz", [12, -7, 25], degrees=True).as_matrix()
noisy = (1.07 * src @ rot.T) + np.array([4.0, -9.0, 13.0]) + rng.normal(scale=1.5, size=src.shape)
fits.append(dict(fit("rigid", src, noisy), case="noisy"))
fits.append(dict(fit("similarity", src, noisy), case="noisy"))
mirrored = src * np.array([1.0, 1.0, -1.0]) + np.array([2.0, 3.0, 4.0])
fits.append(dict(fit("rigid", src, mirrored), case="mirrored target (best proper rotation, not the reflection)"))
fits.append(dict(fit("similarity", src, mirrored), case="mirrored target (best proper rotation, not the reflection)"))
out["point_fits"] = {"source": "skimage.transform.EuclideanTransform / SimilarityTransform(dimensionality=3).estimate", "cases": fits}

# 5. Canonical transform hash: sha256 of 16 little-endian float64, row-major, -0 as +0.
hashes = []
for m in [np.eye(4), Rotation.from_euler("xyz", [10, 20, 30], degrees=True).as_matrix()]:
    if m.shape == (3, 3):
        full = np.eye(4)
        full[:3, :3] = m
        full[:3, 3] = [12.5, -3.25, 100.0]
        m = full
    flat = [float(v) + 0.0 for v in m.flatten()]
    hashes.append({"matrix": m.tolist(), "sha256": hashlib.sha256(struct.pack("<16d", *flat)).hexdigest()})
neg = np.eye(4)
neg[0, 1] = -0.0
hashes.append({"matrix": [[1.0, -0.0, 0.0, 0.0], [0.0, 1.0, 0.0, 0.0], [0.0, 0.0, 1.0, 0.0], [0.0, 0.0, 0.0, 1.0]],
               "sha256": hashlib.sha256(struct.pack("<16d", *[float(v) + 0.0 for v in neg.flatten()])).hexdigest(),
               "note": "matrix[0][1] is -0.0; the hash treats it as +0.0"})
out["transform_hash"] = {"source": "hashlib.sha256(struct.pack('<16d', ...))", "cases": hashes}

# 6. CSV parsing of quoted fields (RFC 4180), as Python's csv module reads them.
csv_text = (
    "label,x,y,z\r\n"
    "plain,1,2,3\r\n"
    "\"with, comma\",4.5,-6,7e1\r\n"
    "\"say \"\"hi\"\"\",0,0,0\r\n"
    "\"two\nlines\",1.25,2.5,-3.75\r\n"
    "\"  padded  \",8,9,10\r\n"
)
rows = list(csv.reader(io.StringIO(csv_text, newline="")))
out["csv"] = {"source": "Python csv.reader (default dialect)", "text": csv_text, "rows": rows}

path = os.path.join(os.path.dirname(__file__), "..", "test", "fixtures", "geometry", "reference.json")
with open(path, "w") as fh:
    json.dump(out, fh, indent=1)
    fh.write("\n")
print("wrote", os.path.normpath(path))
