#!/usr/bin/python3
"""Reference values for test/metrics: normalized mutual information and mutual information of
small arrays.

Run with Debian's interpreter (python3-skimage, python3-scipy, python3-numpy):
    /usr/bin/python3 scripts/make-fixtures-metrics.py
Writes test/fixtures/metrics/nmi.json.

Sources (versions recorded in the file):
  - skimage.metrics.normalized_mutual_information(a, b, bins=B): (H(A) + H(B)) / H(A, B) from an
    equal-width joint histogram over each array's min..max (Studholme et al. 1999);
  - the entropies H(A), H(B), H(A, B) by scipy.stats.entropy (natural log) of
    numpy.histogramdd over the same bins, and MI = H(A) + H(B) - H(A, B) in nats.
The arrays are random (numpy default_rng seed 20260104), stored i fastest (Fortran order).
"""
import json
import os

import numpy as np
import scipy
import skimage
from scipy.stats import entropy
from skimage.metrics import normalized_mutual_information

rng = np.random.default_rng(20260104)
nx, ny, nz = 10, 9, 8
a = rng.uniform(0.0, 100.0, size=(nx, ny, nz))
# b: a nonlinear, noisy function of a (related but not identical).
b = np.sqrt(a) * 30.0 + rng.normal(0.0, 20.0, size=a.shape)
c = rng.uniform(-5.0, 5.0, size=a.shape)  # independent of a

cases = []
for name, other in (("related", b), ("independent", c)):
    for bins in (16, 32):
        hist, _ = np.histogramdd([a.ravel(), other.ravel()], bins=bins)
        h_ab = entropy(hist.ravel())
        h_a = entropy(hist.sum(axis=1))
        h_b = entropy(hist.sum(axis=0))
        cases.append(
            {
                "pair": name,
                "bins": bins,
                "nmi": float(normalized_mutual_information(a, other, bins=bins)),
                "mi_nats": float(h_a + h_b - h_ab),
                "h_fixed": float(h_a),
                "h_moving": float(h_b),
                "h_joint": float(h_ab),
            }
        )

out = {
    "source": f"skimage.metrics.normalized_mutual_information (scikit-image {skimage.__version__}), scipy.stats.entropy (scipy {scipy.__version__}), numpy {np.__version__}",
    "generator": "scripts/make-fixtures-metrics.py",
    "dims": [nx, ny, nz],
    "fixed": a.flatten(order="F").tolist(),
    "related": b.flatten(order="F").tolist(),
    "independent": c.flatten(order="F").tolist(),
    "cases": cases,
}
root = os.path.join(os.path.dirname(os.path.abspath(__file__)), "..")
path = os.path.join(root, "test", "fixtures", "metrics", "nmi.json")
os.makedirs(os.path.dirname(path), exist_ok=True)
with open(path, "w") as f:
    json.dump(out, f)
    f.write("\n")
print(path)
