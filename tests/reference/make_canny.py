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

import argparse
import json
import pathlib
import sys
import tempfile
import tomllib

import numpy as np
import scipy
import skimage
import skimage.data
import skimage.feature

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


def save(path, a):
    np.save(path, np.ascontiguousarray(a, dtype="<f4"), allow_pickle=False)


def toml_value(v):
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, (int, float)):
        return repr(v)
    if isinstance(v, str):
        return json.dumps(v)
    if isinstance(v, list):
        return "[" + ", ".join(toml_value(i) for i in v) + "]"
    raise TypeError(f"no TOML form for {v!r}")


def generate(folder):
    folder.mkdir(parents=True, exist_ok=True)
    inputs = make_inputs()
    for name, x in inputs.items():
        save(folder / f"input-{name}.npy", x)
    cases = []
    for case, name, out in make_cases(inputs):
        case["input"] = f"input-{name}.npy"
        case["output"] = f"{case['id']}.npy"
        case["edges"] = int(out.sum())
        save(folder / case["output"], out.astype(np.float32))
        cases.append(case)
    manifest = {
        "generator": "tests/reference/make_canny.py",
        "numpy_version": np.__version__,
        "scipy_version": scipy.__version__,
        "skimage_version": skimage.__version__,
        "case": cases,
    }
    lines = ["# Generated by tests/reference/make_canny.py; do not edit."]
    lines += [f"{k} = {toml_value(v)}" for k, v in manifest.items() if k != "case"]
    for c in cases:
        lines += ["", "[[case]]"] + [f"{k} = {toml_value(v)}" for k, v in c.items()]
    (folder / "manifest.toml").write_text("\n".join(lines) + "\n")
    return manifest


VERSION_KEYS = ("numpy_version", "scipy_version", "skimage_version")


def check():
    problems = []
    with tempfile.TemporaryDirectory() as tmp:
        fresh_dir = pathlib.Path(tmp)
        fresh = generate(fresh_dir)
        try:
            committed = tomllib.loads((FIXTURES / "manifest.toml").read_text())
        except FileNotFoundError:
            print(f"no committed manifest in {FIXTURES}", file=sys.stderr)
            return 1
        for key in VERSION_KEYS:
            if committed.get(key) != fresh[key]:
                print(f"note: fixtures made with {key} {committed.get(key)}, checking with {fresh[key]}",
                      file=sys.stderr)
        # edge counts may move with a flipped pixel; the maps are compared below
        strip = lambda m: [{k: v for k, v in c.items() if k != "edges"} for c in m["case"]]
        if strip(committed) != strip(fresh):
            problems.append("manifest.toml: the list of cases or their parameters differ")
        fresh_files = {p.name for p in fresh_dir.glob("*.npy")}
        old_files = {p.name for p in FIXTURES.glob("*.npy")}
        problems += [f"{n}: committed but no longer generated" for n in sorted(old_files - fresh_files)]
        problems += [f"{n}: generated but not committed" for n in sorted(fresh_files - old_files)]
        for name in sorted(fresh_files & old_files):
            a = np.load(FIXTURES / name, allow_pickle=False)
            b = np.load(fresh_dir / name, allow_pickle=False)
            if a.dtype != np.dtype("<f4") or a.shape != b.shape:
                problems.append(f"{name}: committed {a.dtype} {a.shape}, generated {b.dtype} {b.shape}")
            elif name.startswith("input-"):
                if not np.array_equal(a, b):
                    problems.append(f"{name}: input differs from a fresh draw")
            elif np.mean(a != b) > CHECK_FRACTION:
                problems.append(f"{name}: {int(np.sum(a != b))} pixels differ (at most {CHECK_FRACTION:g} of them may)")
    if problems:
        print(f"{len(problems)} mismatch(es) against {FIXTURES}:", file=sys.stderr)
        for p in problems:
            print(f"  {p}", file=sys.stderr)
        return 1
    print(f"canny fixtures match: {len(fresh['case'])} cases")
    return 0


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument("--check", action="store_true", help="regenerate in a temporary folder and compare")
    if parser.parse_args().check:
        return check()
    for old in FIXTURES.glob("*.npy"):
        old.unlink()
    manifest = generate(FIXTURES)
    size = sum(p.stat().st_size for p in FIXTURES.iterdir())
    print(f"wrote {len(manifest['case'])} cases to {FIXTURES} ({size / 1024:.0f} KiB)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
