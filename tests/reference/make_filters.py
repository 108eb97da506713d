#!/usr/bin/env python3
"""Reference fixtures for Pumice's neighbourhood filters and edge operators.

Reference functions (versions pinned in requirements.txt, recorded in the manifest):

* box      scipy.ndimage.uniform_filter(x, size=2r+1, mode, cval)
* sobel    scipy.ndimage.sobel(x, axis=1) (x), axis=0 (y); magnitude = numpy.hypot of both
* scharr   cv2.Scharr(x, cv2.CV_64F, 1, 0 | 0, 1, borderType), magnitude = cv2.magnitude
           (OpenCV has no wrap border for filters, so scharr is checked with four rules)
* laplace  scipy.ndimage.laplace (4 neighbours), scipy.ndimage.correlate with the
           8-neighbour stencil, scipy.ndimage.gaussian_laplace (sigma, truncate 4)
* median   scipy.ndimage.median_filter(x, size=2r+1 | footprint=disk, mode, cval) and
           cv2.medianBlur(u8, ksize) on the camera crop (OpenCV replicates the border;
           the Rust side marks that input as 8-bit, so radius 3 takes the histogram path)
* sharpen  skimage.filters.unsharp_mask(x, radius=sigma, amount) (mode reflect, output
           clipped to [0, 1]: the Rust side clamps Pumice's output before comparing)

Border rules map to scipy modes reflect, mirror, nearest, wrap, constant and to
OpenCV's BORDER_REFLECT, BORDER_REFLECT_101, BORDER_REPLICATE, BORDER_CONSTANT.
With mode constant the derivative operators use cval 0: scipy runs them as 1-D
passes one after the other and pads the intermediate result with cval again,
which is not the 2-D correlation with a constant outside (Pumice's rule) unless
cval is 0; uniform_filter and laplace (one axis per term) agree for any cval.

Inputs: seeded numpy noise (float32) and a crop of skimage.data.camera() (u8 / 255).
References are computed in float64 on the float32 inputs and cast to float32.
Each case records the Pumice step that should reproduce it, and, for the linear
ones, sum |K| and the tap and pass counts the Rust test derives its tolerance from.

    python tests/reference/make_filters.py           # write tests/reference/fixtures/filters/
    python tests/reference/make_filters.py --check   # regenerate in a temporary folder, compare
"""

import pathlib
import sys

import cv2
import numpy as np

import scipy
import scipy.ndimage as ndi
import skimage
import skimage.data
import skimage.filters

import fixture_check

HERE = pathlib.Path(__file__).resolve().parent
FIXTURES = HERE / "fixtures" / "filters"

# --check tolerance: the references are float64 results rounded to float32;
# another build may flip the last float32 bit. Outputs here reach |v| < 64
# (Scharr of [0, 1] data: sum |K| = 32, so |g| <= 32 and the magnitude <= 32*sqrt 2),
# where one float32 ulp is 2^-18 < 4e-6; 1e-5 absorbs that rounding and nothing more.
CHECK_TOLERANCE = 1e-5

MODES = [
    ("reflect", "reflect", cv2.BORDER_REFLECT),
    ("mirror", "mirror", cv2.BORDER_REFLECT_101),
    ("nearest", "replicate", cv2.BORDER_REPLICATE),
    ("wrap", "wrap", None),
    ("constant", "constant", cv2.BORDER_CONSTANT),
]
CVAL = 0.25


def make_inputs():
    camera = skimage.data.camera()[200:224, 220:252]  # 24 rows x 32 columns, u8
    return {
        "noise": np.random.default_rng(20251201).random((21, 27), dtype=np.float32),
        "row": np.random.default_rng(21).random((1, 23), dtype=np.float32),
        "column": np.random.default_rng(22).random((19, 1), dtype=np.float32),
        "tiny": np.random.default_rng(23).random((2, 2), dtype=np.float32),
        "camera": (camera.astype(np.float64) / 255).astype(np.float32),
    }


def gauss1d(sigma, order):
    """scipy.ndimage's sampled Gaussian (order 0) and its second derivative (order 2)."""
    r = int(4.0 * sigma + 0.5)
    x = np.arange(-r, r + 1, dtype=np.float64)
    phi = np.exp(-0.5 * x * x / sigma**2)
    phi /= phi.sum()
    return phi if order == 0 else (x * x / sigma**4 - 1 / sigma**2) * phi


def linear(case, sum_abs, taps, passes):
    case.update(sum_abs=float(sum_abs), taps=int(taps), passes=int(passes))
    return case


def make_cases(inputs):
    """Yields (case, input name, float64 reference) in a fixed order."""
    for name, x32 in inputs.items():
        x = x32.astype(np.float64)
        for mode, border, cvb in MODES:
            cval = CVAL if mode == "constant" else 0.0
            for r in (1, 3):
                out = ndi.uniform_filter(x, size=2 * r + 1, mode=mode, cval=cval)
                c = {
                    "id": f"box-r{r}-{border}-{name}",
                    "operator": "box",
                    "reference": "scipy.ndimage.uniform_filter",
                    "call": f"uniform_filter(x, size={2 * r + 1}, mode={mode!r}, cval={cval!r})",
                    "step": f"box:radius={r},border={border},fill={cval}",
                }
                # running sums in f64: no tap-count growth; 1 rounding each side
                yield linear(c, 1.0, 0, 1), name, out
            out4 = ndi.laplace(x, mode=mode, cval=cval)
            c = {
                "id": f"laplace-n4-{border}-{name}",
                "operator": "laplace",
                "reference": "scipy.ndimage.laplace",
                "call": f"laplace(x, mode={mode!r}, cval={cval!r})",
                "step": f"laplace:neighbours=4,border={border},fill={cval}",
            }
            yield linear(c, 8.0, 9, 1), name, out4
            k8 = np.ones((3, 3))
            k8[1, 1] = -8.0
            out8 = ndi.correlate(x, k8, mode=mode, cval=cval)
            c = {
                "id": f"laplace-n8-{border}-{name}",
                "operator": "laplace",
                "reference": "scipy.ndimage.correlate",
                "call": f"correlate(x, [[1,1,1],[1,-8,1],[1,1,1]], mode={mode!r}, cval={cval!r})",
                "step": f"laplace:neighbours=8,border={border},fill={cval}",
            }
            yield linear(c, 16.0, 9, 1), name, out8
            # derivative operators: cval 0 (see the module docstring)
            gx = ndi.sobel(x, axis=1, mode=mode, cval=0.0)
            gy = ndi.sobel(x, axis=0, mode=mode, cval=0.0)
            for out_name, out in (("x", gx), ("y", gy), ("magnitude", np.hypot(gx, gy))):
                c = {
                    "id": f"sobel-{out_name}-{border}-{name}",
                    "operator": "sobel",
                    "reference": "scipy.ndimage.sobel",
                    "call": f"sobel(x, axis=1 / 0, mode={mode!r}, cval=0.0)"
                    + (", numpy.hypot" if out_name == "magnitude" else ""),
                    "step": f"sobel:output={out_name},border={border},fill=0",
                }
                # magnitude: both planes' errors (x2) plus the square root's rounding
                taps = 6 if out_name != "magnitude" else 14
                yield linear(c, 8.0, taps, 2), name, out
            for sigma in (1.5, 3.0):
                out = ndi.gaussian_laplace(x, sigma, mode=mode, cval=0.0)
                g0, g2 = gauss1d(sigma, 0), gauss1d(sigma, 2)
                sum_abs = 2 * np.abs(g0).sum() * np.abs(g2).sum()
                c = {
                    "id": f"laplace-log{sigma:g}-{border}-{name}",
                    "operator": "laplace",
                    "reference": "scipy.ndimage.gaussian_laplace",
                    "call": f"gaussian_laplace(x, {sigma!r}, mode={mode!r}, cval=0.0)",
                    "step": f"laplace:sigma={sigma},border={border},fill=0",
                }
                yield linear(c, sum_abs, 2 * len(g0) + 1, 2), name, out
            if cvb is not None:
                gx = cv2.Scharr(x, cv2.CV_64F, 1, 0, borderType=cvb)
                gy = cv2.Scharr(x, cv2.CV_64F, 0, 1, borderType=cvb)
                for out_name, out in (("x", gx), ("y", gy), ("magnitude", cv2.magnitude(gx, gy))):
                    c = {
                        "id": f"scharr-{out_name}-{border}-{name}",
                        "operator": "scharr",
                        "reference": "cv2.Scharr",
                        "call": f"Scharr(x, CV_64F, dx, dy, borderType={cvb})"
                        + (", cv2.magnitude" if out_name == "magnitude" else ""),
                        "step": f"scharr:output={out_name},border={border},fill=0",
                    }
                    taps = 6 if out_name != "magnitude" else 14
                    yield linear(c, 32.0, taps, 2), name, out
        for mode, border, _ in MODES:
            cval = CVAL if mode == "constant" else 0.0
            for r, shape in ((1, "square"), (2, "square"), (4, "square"), (1, "disk"), (3, "disk")):
                i, j = np.mgrid[-r : r + 1, -r : r + 1]
                foot = np.ones_like(i, dtype=bool) if shape == "square" else (i * i + j * j <= r * r)
                out = ndi.median_filter(x, footprint=foot, mode=mode, cval=cval)
                c = {
                    "id": f"median-r{r}-{shape}-{border}-{name}",
                    "operator": "median",
                    "reference": "scipy.ndimage.median_filter",
                    "call": f"median_filter(x, footprint={shape} r={r}, mode={mode!r}, cval={cval!r})",
                    "step": f"median:radius={r},shape={shape},border={border},fill={cval}",
                }
                # the median is one of the samples: exact, tolerance 0
                yield linear(c, 0.0, 0, 0), name, out
        if name == "camera":
            codes = np.round(x * 255).astype(np.uint8)
            for ksize in (3, 5, 7):
                out = cv2.medianBlur(codes, ksize).astype(np.float64) / 255
                c = {
                    "id": f"median-cv{ksize}-replicate-{name}",
                    "operator": "median",
                    "reference": "cv2.medianBlur",
                    "call": f"medianBlur(u8, {ksize})",
                    "step": f"median:radius={ksize // 2},border=replicate",
                    "levels": 255,
                }
                yield linear(c, 0.0, 0, 0), name, out
        for amount, sigma in ((1.0, 1.0), (2.5, 2.0)):
            out = skimage.filters.unsharp_mask(x, radius=sigma, amount=amount)
            r = int(4.0 * sigma + 0.5)
            c = {
                "id": f"sharpen-a{amount:g}-s{sigma:g}-reflect-{name}",
                "operator": "sharpen",
                "reference": "skimage.filters.unsharp_mask",
                "call": f"unsharp_mask(x, radius={sigma!r}, amount={amount!r})",
                "step": f"sharpen:amount={amount},sigma={sigma},border=reflect",
                "clip": True,
            }
            # blur error scaled by (1 + amount), plus the difference and sum roundings
            yield linear(c, 1.0 + amount, 2 * (2 * r + 1) + 2, 2), name, out


def generate(folder):
    folder.mkdir(parents=True, exist_ok=True)
    inputs = make_inputs()
    for name, x in inputs.items():
        fixture_check.save(folder / f"input-{name}.npy", x)
    cases = []
    for case, name, out in make_cases(inputs):
        case.setdefault("clip", False)
        case.setdefault("levels", 0)
        case["input"] = f"input-{name}.npy"
        case["output"] = f"{case['id']}.npy"
        case["shape"] = list(inputs[name].shape)
        fixture_check.save(folder / case["output"], out.astype(np.float32))
        cases.append(case)
    manifest = {
        "generator": "tests/reference/make_filters.py",
        "numpy_version": np.__version__,
        "scipy_version": scipy.__version__,
        "opencv_version": cv2.__version__,
        "skimage_version": skimage.__version__,
        "case": cases,
    }
    return fixture_check.write_manifest(folder, manifest)


VERSION_KEYS = ("numpy_version", "scipy_version", "opencv_version", "skimage_version")



def check():
    return fixture_check.check(
        FIXTURES,
        generate,
        label="filter",
        version_keys=VERSION_KEYS,
        is_input=lambda name, m: name in {c["input"] for c in m["case"]},
        compare=fixture_check.max_difference(CHECK_TOLERANCE),
    )


def main():
    return fixture_check.main(__doc__, FIXTURES, generate, check)


if __name__ == "__main__":
    sys.exit(main())
