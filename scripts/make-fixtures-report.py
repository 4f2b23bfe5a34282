#!/usr/bin/python3
"""Reference values for test/report: percentiles, bilinear scaling and Otsu thresholds.

Run with Debian's interpreter (python3-numpy, python3-skimage):
    /usr/bin/python3 scripts/make-fixtures-report.py
Writes test/fixtures/report/reference.json.

Source of every reference value (versions recorded in the file):
  - numpy.percentile, method "linear" (Hyndman & Fan definition 7), on a random sample;
  - skimage.transform.resize(order=1, mode="edge", anti_aliasing=False, preserve_range=True):
    bilinear scaling with pixel centres aligned, edge pixels repeated;
  - skimage.filters.threshold_otsu(nbins=256) on a random two-population sample.
Inputs are random (numpy default_rng seed 20260201) and stored in the file.
"""
import json
import os

import numpy as np
import skimage
from skimage.filters import threshold_otsu
from skimage.transform import resize

rng = np.random.default_rng(20260201)

sample = np.concatenate([rng.normal(300.0, 80.0, 700), rng.uniform(-50.0, 1200.0, 300)])
sample[rng.integers(0, sample.size, 20)] = np.nan
percents = [0, 1, 5, 25, 50, 75, 95, 99, 100]
finite = sample[np.isfinite(sample)]
pct = [float(np.percentile(finite, p, method="linear")) for p in percents]

scalings = []
for rows, cols, height, width in [(5, 7, 11, 16), (9, 6, 4, 3), (4, 4, 9, 5), (6, 8, 6, 8)]:
    img = rng.uniform(-100.0, 400.0, size=(rows, cols))
    out = resize(img, (height, width), order=1, mode="edge", anti_aliasing=False, preserve_range=True)
    scalings.append(
        {
            "rows": rows,
            "cols": cols,
            "height": height,
            "width": width,
            "input": [float(v) for v in img.ravel()],
            "output": [float(v) for v in out.ravel()],
        }
    )

otsu_sample = np.concatenate([rng.normal(-800.0, 60.0, 800), rng.normal(40.0, 30.0, 1200)])
otsu = float(threshold_otsu(otsu_sample, nbins=256))

doc = {
    "source": "scripts/make-fixtures-report.py",
    "numpy_version": np.__version__,
    "skimage_version": skimage.__version__,
    "percentile": {"data": [None if np.isnan(v) else float(v) for v in sample], "percents": percents, "values": pct},
    "resize_bilinear": scalings,
    "otsu": {
        "data": [float(v) for v in otsu_sample],
        "threshold": otsu,
        "bin_width": float((otsu_sample.max() - otsu_sample.min()) / 256),
    },
}
path = os.path.join(os.path.dirname(__file__), "..", "test", "fixtures", "report", "reference.json")
os.makedirs(os.path.dirname(path), exist_ok=True)
with open(path, "w") as f:
    json.dump(doc, f, separators=(",", ":"))
    f.write("\n")
print(path)
