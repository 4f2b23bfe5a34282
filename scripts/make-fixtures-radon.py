#!/usr/bin/python3
"""Reference values for test/phantom/radon.test.ts.

Source: scikit-image (Debian package python3-skimage), `skimage.transform.radon` and
`skimage.transform.iradon(filter_name="ramp")` with circle=True, applied to the Shepp-Logan head
phantom (Shepp & Logan 1974) as shipped by `skimage.data.shepp_logan_phantom()` and shrunk to
64 x 64 with `skimage.transform.rescale(..., anti_aliasing=True)`.

Layout in the JSON: image row-major (image[row][col] flattened), sinogram angle-major
(sinogram[angle][bin] flattened, i.e. the transpose of skimage's (bins, angles) array).
Numbers are rounded to 12 significant digits.

Run: /usr/bin/python3 scripts/make-fixtures-radon.py  (writes test/fixtures/phantom/radon-shepp-logan.json)
"""
import json
import pathlib

import numpy as np
import skimage
from skimage.data import shepp_logan_phantom
from skimage.transform import iradon, radon, rescale

N = 64
ANGLES = 60


def rounded(a):
    return [float(f"{v:.12g}") for v in np.asarray(a, dtype=np.float64).ravel()]


def main():
    image = rescale(shepp_logan_phantom(), N / 400.0, mode="reflect", anti_aliasing=True, channel_axis=None)
    assert image.shape == (N, N), image.shape
    # radon(circle=True) requires zero outside the inscribed circle; the phantom is (nearly) zero
    # there, so clear the remainder exactly.
    yy, xx = np.mgrid[:N, :N]
    image[(yy - N // 2) ** 2 + (xx - N // 2) ** 2 > (N // 2) ** 2] = 0.0
    # Round the input first so that the TypeScript side sees exactly the image skimage projected.
    image = np.array(rounded(image)).reshape(N, N)
    theta = np.arange(ANGLES) * (180.0 / ANGLES)
    sino = radon(image, theta=theta, circle=True)
    recon = iradon(sino, theta=theta, filter_name="ramp", circle=True, interpolation="linear")
    out = {
        "source": "scikit-image %s: skimage.transform.radon / iradon(filter_name='ramp', circle=True), "
        "numpy %s; Shepp-Logan phantom (Shepp & Logan 1974) from skimage.data, rescaled to %dx%d"
        % (skimage.__version__, np.__version__, N, N),
        "generator": "scripts/make-fixtures-radon.py",
        "size": N,
        "angles_deg": [float(t) for t in theta],
        "image": rounded(image),
        "sinogram": rounded(sino.T),
        "fbp": rounded(recon),
    }
    path = pathlib.Path(__file__).resolve().parent.parent / "test" / "fixtures" / "phantom" / "radon-shepp-logan.json"
    path.write_text(json.dumps(out) + "\n")
    print(f"wrote {path}")


if __name__ == "__main__":
    main()
