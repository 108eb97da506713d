#!/usr/bin/env python3
"""Reference fixtures for Pumice's morphology and science operators.

Reference functions (versions pinned in requirements.txt, recorded in the manifest):

* erode, dilate  scipy.ndimage.grey_erosion / grey_dilation(x, size=(2r+1, 2r+1) | footprint,
                 mode, cval)
* open, close    scipy.ndimage.grey_opening / grey_closing (same arguments)
* tophat         scipy.ndimage.white_tophat / black_tophat (same arguments)
  footprints: square = size, cross = centre row and column of the square,
  disk = skimage.morphology.disk(r).
  Border rules map to scipy modes reflect, mirror, nearest (replicate), wrap and
  constant (cval = fill). Pumice's default `ignore` (outside samples take no part)
  is mode constant with cval = +inf for a minimum and -inf for a maximum; scipy's
  opening, closing and top-hats take one cval for both passes, so for `ignore`
  they are composed here from the erosion and dilation with the right cval each.
* ball apex      skimage.restoration.rolling_ball(codes, radius) / 255 on a crop of
                 skimage.data.coins() (8-bit codes; Pumice's levels = 255)
* ball opening   scipy.ndimage.grey_dilation(grey_erosion(x, footprint=disk, structure=b,
                 cval=+inf), footprint=disk, structure=b, cval=-inf), then min(., x), with
                 b(d) = (sqrt(R^2 - |d|^2) - R) / 255 — Sternberg's rolling ball as an opening
* bin            numpy reshape(h/N, N, w/N, N).sum / mean over the block axes (partial=drop);
                 partial=include by the sums over the pixels present

Morphology outputs are samples of the input (or the fill, or one float32
subtraction for the top-hats, done in float32 by scipy as by Pumice), so they are
computed in float32 and compared exactly. The ball references are computed in
float64 and rounded to float32. bin is computed in float64 from the float32 input.

    python tests/reference/make_morph.py           # write tests/reference/fixtures/morph/
    python tests/reference/make_morph.py --check   # regenerate in a temporary folder, compare
"""

import pathlib
import sys

import numpy as np

import scipy
import scipy.ndimage as ndi
import skimage
import skimage.data
import skimage.morphology
import skimage.restoration

import fixture_check

HERE = pathlib.Path(__file__).resolve().parent
FIXTURES = HERE / "fixtures" / "morph"

# --check tolerance: min, max and float32 subtraction are exact on every build;
# the ball and bin references are float64 results rounded to float32, where another
# build may flip the last float32 bit of a value below 2 (2^-23 < 1.2e-7); 1e-6
# absorbs that and nothing more.
CHECK_TOLERANCE = 1e-6

MODES = [
    ("ignore", None),
    ("reflect", "reflect"),
    ("mirror", "mirror"),
    ("replicate", "nearest"),
    ("wrap", "wrap"),
    ("constant", "constant"),
]
FILL = 0.25


def make_inputs():
    coins = skimage.data.coins()
    return {
        "noise": np.random.default_rng(20251202).random((21, 27), dtype=np.float32),
        "row": np.random.default_rng(31).random((1, 23), dtype=np.float32),
        "column": np.random.default_rng(32).random((19, 1), dtype=np.float32),
        "tiny": np.random.default_rng(33).random((2, 2), dtype=np.float32),
        "coins": (coins[60:100, 48:96].astype(np.float64) / 255).astype(np.float32),
        "coins-large": (coins[100:196, 120:248].astype(np.float64) / 255).astype(np.float32),
    }


def footprint(shape, r):
    if shape == "square":
        return np.ones((2 * r + 1, 2 * r + 1), dtype=bool)
    if shape == "cross":
        f = np.zeros((2 * r + 1, 2 * r + 1), dtype=bool)
        f[r, :] = True
        f[:, r] = True
        return f
    return skimage.morphology.disk(r).astype(bool)


def flat_cases(x, name, shapes, radii, modes):
    for shape in shapes:
        for r in radii:
            fp = footprint(shape, r)
            for border, mode in modes:
                def erode(a, m=mode):
                    if m is None:
                        return ndi.grey_erosion(a, footprint=fp, mode="constant", cval=np.inf)
                    return ndi.grey_erosion(a, footprint=fp, mode=m, cval=FILL)

                def dilate(a, m=mode):
                    if m is None:
                        return ndi.grey_dilation(a, footprint=fp, mode="constant", cval=-np.inf)
                    return ndi.grey_dilation(a, footprint=fp, mode=m, cval=FILL)

                if mode is None:
                    refs = {
                        "erode": (erode(x), "grey_erosion(cval=+inf)"),
                        "dilate": (dilate(x), "grey_dilation(cval=-inf)"),
                        "open": (dilate(erode(x)), "grey_dilation(grey_erosion(cval=+inf), cval=-inf)"),
                        "close": (erode(dilate(x)), "grey_erosion(grey_dilation(cval=-inf), cval=+inf)"),
                        "tophat-white": (x - dilate(erode(x)), "x - opening (composed, cval = +-inf)"),
                        "tophat-black": (erode(dilate(x)) - x, "closing (composed, cval = -+inf) - x"),
                    }
                else:
                    kw = dict(footprint=fp, mode=mode, cval=FILL)
                    call = f"(x, footprint={shape} r={r}, mode={mode!r}, cval={FILL})"
                    refs = {
                        "erode": (ndi.grey_erosion(x, **kw), "grey_erosion" + call),
                        "dilate": (ndi.grey_dilation(x, **kw), "grey_dilation" + call),
                        "open": (ndi.grey_opening(x, **kw), "grey_opening" + call),
                        "close": (ndi.grey_closing(x, **kw), "grey_closing" + call),
                        "tophat-white": (ndi.white_tophat(x, **kw), "white_tophat" + call),
                        "tophat-black": (ndi.black_tophat(x, **kw), "black_tophat" + call),
                    }
                for op, (out, call) in refs.items():
                    if op.startswith("tophat"):
                        step = f"tophat:radius={r},shape={shape},kind={op[7:]},border={border},fill={FILL}"
                    else:
                        step = f"{op}:radius={r},shape={shape},border={border},fill={FILL}"
                    case = {
                        "id": f"{op}-{shape}-r{r}-{border}-{name}",
                        "operator": op.split("-")[0],
                        "reference": "scipy.ndimage",
                        "call": call,
                        "step": step,
                        "tolerance": 0.0,
                    }
                    yield case, name, out.astype(np.float32)


def ball_structure(radius):
    r = int(np.floor(radius))
    yy, xx = np.mgrid[-r : r + 1, -r : r + 1]
    d2 = (xx * xx + yy * yy).astype(np.float64)
    fp = d2 <= radius * radius
    b = np.where(fp, np.sqrt(np.clip(radius * radius - d2, 0, None)) - radius, 0.0) / 255.0
    return fp, b


def ball_cases(inputs):
    # Tolerance of the exact ball: Pumice rounds the ball height b to float32 and
    # each of the erosion's subtraction and the dilation's addition once, on values
    # below 1 + R/255 < 1.25 (2^-24 relative each): 4 roundings of at most 1.5e-7,
    # so 1e-6 (from the error model, not fitted).
    for name, radii in (("coins", (3, 7, 12)), ("coins-large", (50,))):
        x = inputs[name].astype(np.float64)
        codes = np.round(x * 255)
        for radius in radii:
            apex = skimage.restoration.rolling_ball(codes, radius=radius) / 255.0
            yield {
                "id": f"ball-apex-r{radius}-{name}",
                "operator": "ball-apex",
                "reference": "skimage.restoration.rolling_ball",
                "call": f"rolling_ball(codes, radius={radius}) / 255",
                "step": f"ball_apex(x, radius={radius}, height={radius}/255)",
                "tolerance": 1e-6,
            }, name, apex.astype(np.float32)
            fp, b = ball_structure(radius)
            er = ndi.grey_erosion(x, footprint=fp, structure=b, mode="constant", cval=np.inf)
            op = np.minimum(ndi.grey_dilation(er, footprint=fp, structure=b, mode="constant", cval=-np.inf), x)
            call = f"grey_dilation(grey_erosion(x, footprint=disk, structure=ball R={radius}))"
            yield {
                "id": f"ball-exact-r{radius}-{name}",
                "operator": "ball",
                "reference": "scipy.ndimage.grey_erosion + grey_dilation",
                "call": call,
                "step": f"illumination:method=ball,radius={radius},output=background,shrink=1",
                "tolerance": 1e-6,
            }, name, op.astype(np.float32)
            if radius > 10:
                # The shrunk ball against the exact one: empirical bounds (largest
                # and mean difference) with about 15 % margin over the measured
                # 0.106 / 0.0110 (R = 12, s = 2) and 0.0106 / 0.0024 (R = 50, s = 4);
                # see tests/integration/morph.rs.
                worst, mean = {12: (0.12, 0.0125), 50: (0.0125, 0.003)}[radius]
                yield {
                    "id": f"ball-fast-r{radius}-{name}",
                    "operator": "ball-fast",
                    "reference": "scipy.ndimage.grey_erosion + grey_dilation",
                    "call": call,
                    "step": f"illumination:method=ball,radius={radius},output=background",
                    "tolerance": worst,
                    "mean_tolerance": mean,
                }, name, op.astype(np.float32)


def bin_cases(inputs):
    for name in ("noise", "coins"):
        x = inputs[name].astype(np.float64)
        h, w = x.shape
        for n in (2, 3, 4):
            hb, wb = h // n, w // n
            blocks = x[: hb * n, : wb * n].reshape(hb, n, wb, n)
            for mode in ("sum", "mean"):
                out = getattr(blocks, mode)(axis=(1, 3))
                yield {
                    "id": f"bin-{mode}-n{n}-drop-{name}",
                    "operator": "bin",
                    "reference": "numpy reshape + " + mode,
                    "call": f"x[:{hb * n}, :{wb * n}].reshape({hb}, {n}, {wb}, {n}).{mode}(axis=(1, 3))",
                    "step": f"bin:size={n},mode={mode},partial=drop",
                    "tolerance": 0.0,
                }, name, out.astype(np.float32)
            hc, wc = -(-h // n), -(-w // n)
            sums = np.zeros((hc, wc))
            counts = np.zeros((hc, wc))
            np.add.at(sums, (np.arange(h)[:, None] // n, np.arange(w)[None, :] // n), x)
            np.add.at(counts, (np.arange(h)[:, None] // n, np.arange(w)[None, :] // n), 1)
            yield {
                "id": f"bin-mean-n{n}-include-{name}",
                "operator": "bin",
                "reference": "numpy.add.at block sums / counts",
                "call": "sums over the pixels present / their count",
                "step": f"bin:size={n},mode=mean,partial=include",
                "tolerance": 0.0,
            }, name, (sums / counts).astype(np.float32)


def make_cases(inputs):
    """Yields (case, input name, float32 reference) in a fixed order."""
    shapes = ("square", "cross", "disk")
    yield from flat_cases(inputs["noise"], "noise", shapes, (1, 3), MODES)
    for name in ("row", "column", "tiny"):
        yield from flat_cases(inputs[name], name, shapes, (2,), [MODES[0], MODES[1], MODES[4]])
    yield from flat_cases(inputs["coins"], "coins", shapes, (4,), MODES[:1])
    yield from ball_cases(inputs)
    yield from bin_cases(inputs)


def generate(folder):
    folder.mkdir(parents=True, exist_ok=True)
    inputs = make_inputs()
    for name, x in inputs.items():
        fixture_check.save(folder / f"input-{name}.npy", x)
    cases = []
    for case, name, out in make_cases(inputs):
        case["input"] = f"input-{name}.npy"
        case["output"] = f"{case['id']}.npy"
        case["shape"] = list(inputs[name].shape)
        fixture_check.save(folder / case["output"], out)
        cases.append(case)
    manifest = {
        "generator": "tests/reference/make_morph.py",
        "numpy_version": np.__version__,
        "scipy_version": scipy.__version__,
        "skimage_version": skimage.__version__,
        "case": cases,
    }
    return fixture_check.write_manifest(folder, manifest)


VERSION_KEYS = ("numpy_version", "scipy_version", "skimage_version")



def check():
    return fixture_check.check(
        FIXTURES,
        generate,
        label="morph",
        version_keys=VERSION_KEYS,
        is_input=lambda name, m: name in {c["input"] for c in m["case"]},
        compare=fixture_check.max_difference(CHECK_TOLERANCE),
    )


def main():
    return fixture_check.main(__doc__, FIXTURES, generate, check)


if __name__ == "__main__":
    sys.exit(main())
