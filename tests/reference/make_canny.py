#!/usr/bin/env python3
"""Reference edge maps for Pumice's `canny` operator.

Reference function (version pinned in requirements.txt, recorded in the manifest):

* skimage.feature.canny(x, sigma, low_threshold, high_threshold, use_quantiles, mode)
  on float32 inputs in [0, 1] (so scikit-image works in float32, as Pumice does,
  and its thresholds are in gradient-magnitude units: dtype_limits of a float
  image is 1).

Border: scikit-image smooths with scipy.ndimage.gaussian_filter(mode, truncate 4)
and always takes its Sobel gradient with scipy's mode 'reflect'. Pumice applies
one rule to both; 'reflect' and 'nearest' (Pumice's reflect and replicate) have
the same one-sample halo, so the gradients agree for those. scikit-image's
default mode 'constant' divides the zero-padded blur by the blur of a mask of
ones, which no Pumice border rule reproduces; that case is compared against
Pumice's reflect away from the border only (the manifest records the margin).

Inputs: 128 x 128 crops of skimage.data.camera() and skimage.data.coins()
(u8 / 255) and invented shapes (a disk, a diamond, a triangle) with seeded
noise. Each case stores the edge map (0/1, float32) and the Pumice step that
should reproduce it.

    python tests/reference/make_canny.py           # write tests/reference/fixtures/canny/
    python tests/reference/make_canny.py --check   # regenerate in a temporary folder, compare
"""

import pathlib
import sys

import numpy as np

import scipy
import skimage
import skimage.data
import skimage.feature

import fixture_check

HERE = pathlib.Path(__file__).resolve().parent
FIXTURES = HERE / "fixtures" / "canny"

# --check: edge maps are 0/1; a fresh run on another build may flip a pixel whose
# magnitude ties its neighbour to the last float32 bit. At most 0.1 % of a map's
# pixels may differ (16 of 16384); inputs must be identical.
CHECK_FRACTION = 1e-3

MODES = {"reflect": "reflect", "nearest": "replicate"}


def u8_crop(img, y, x):
    return (img[y : y + 128, x : x + 128].astype(np.float64) / 255).astype(np.float32)


def shapes():
    y, x = np.mgrid[0:128, 0:128].astype(np.float64)
    img = np.full((128, 128), 0.2)
    img[(x - 40) ** 2 + (y - 44) ** 2 <= 26**2] = 0.8
    img[np.abs(x - 92) + np.abs(y - 36) <= 22] = 0.55
    img[(y >= 70) & (y <= 112) & (np.abs(x - 86) <= (y - 70) * 0.8)] = 0.05
    img += 0.03 * np.random.default_rng(20251202).standard_normal(img.shape)
    return img.astype(np.float32)


def make_inputs():
    return {
        "camera": u8_crop(skimage.data.camera(), 100, 180),
        "coins": u8_crop(skimage.data.coins(), 40, 60),
        "shapes": shapes(),
    }


# (input, sigma, low, high, use_quantiles, scikit-image mode)
CASES = [
    ("camera", 1.0, 0.1, 0.2, False, "reflect"),
    ("camera", 2.0, 0.05, 0.15, False, "reflect"),
    ("camera", 1.0, 0.1, 0.2, False, "nearest"),
    ("camera", 1.5, 0.7, 0.9, True, "reflect"),
    ("camera", 1.0, 0.1, 0.2, False, "constant"),
    ("coins", 1.0, 0.1, 0.2, False, "reflect"),
    ("coins", 3.0, 0.02, 0.08, False, "nearest"),
    ("shapes", 1.0, 0.1, 0.3, False, "reflect"),
    ("shapes", 2.0, 0.8, 0.95, True, "nearest"),
]


def make_cases(inputs):
    for name, sigma, low, high, quantile, mode in CASES:
        out = skimage.feature.canny(
            inputs[name], sigma=sigma, low_threshold=low, high_threshold=high, use_quantiles=quantile, mode=mode
        )
        border = MODES.get(mode, "reflect")
        step = f"canny:sigma={sigma},low={low},high={high},quantile={'true' if quantile else 'false'},border={border}"
        # mode 'constant': compare beyond the Gaussian's radius plus the gradient's
        # and the thinning's sample each, where the two smoothings are equal
        margin = int(4.0 * sigma + 0.5) + 2 if mode == "constant" else 0
        case = {
            "id": f"canny-{name}-s{sigma:g}-{'q' if quantile else 'm'}{low:g}-{high:g}-{mode}",
            "call": f"canny(x, sigma={sigma!r}, low_threshold={low!r}, high_threshold={high!r}, "
            f"use_quantiles={quantile!r}, mode={mode!r})",
            "step": step,
            "margin": margin,
        }
        yield case, name, out


def generate(folder):
    folder.mkdir(parents=True, exist_ok=True)
    inputs = make_inputs()
    for name, x in inputs.items():
        fixture_check.save(folder / f"input-{name}.npy", x)
    cases = []
    for case, name, out in make_cases(inputs):
        case["input"] = f"input-{name}.npy"
        case["output"] = f"{case['id']}.npy"
        case["edges"] = int(out.sum())
        fixture_check.save(folder / case["output"], out.astype(np.float32))
        cases.append(case)
    manifest = {
        "generator": "tests/reference/make_canny.py",
        "numpy_version": np.__version__,
        "scipy_version": scipy.__version__,
        "skimage_version": skimage.__version__,
        "case": cases,
    }
    return fixture_check.write_manifest(folder, manifest)


VERSION_KEYS = ("numpy_version", "scipy_version", "skimage_version")



def differing_pixels(name, a, b):
    """Edge maps may differ in a few pixels where f32/f64 rounding ties flip."""
    if np.mean(a != b) > CHECK_FRACTION:
        return f"{name}: {int(np.sum(a != b))} pixels differ (at most {CHECK_FRACTION:g} of them may)"
    return None


def check():
    return fixture_check.check(
        FIXTURES,
        generate,
        label="canny",
        version_keys=VERSION_KEYS,
        is_input=lambda name, m: name.startswith("input-"),
        compare=differing_pixels,
        # edge counts may move with a flipped pixel; the maps are compared
        free_keys=("edges",),
    )


def main():
    return fixture_check.main(__doc__, FIXTURES, generate, check)


if __name__ == "__main__":
    sys.exit(main())
