#!/usr/bin/env python3
"""Reference fixtures for `pumice inspect` and `pumice diff` (src/measure/),
computed with numpy, scikit-image and PyWavelets (versions pinned in
requirements.txt and recorded in the manifest).

Reference functions and how they map to Pumice:

* statistics per channel of x = code / full scale (float64):
  numpy.min, max, mean, std (ddof=0), numpy.percentile(x, [1, 5, 50, 95, 99])
  with the default 'linear' method; counts of x <= 0 and x >= 1.
  Pumice: measure::channel_stats.
* noise: skimage.restoration.estimate_sigma(x) per channel (db2 finest
  diagonal subband via pywt.dwtn, median |d| of non-zero d over
  scipy.stats.norm.ppf(0.75)). Pumice: measure::noise_sigma.
* PSNR: skimage.metrics.peak_signal_noise_ratio(a, b, data_range=full scale)
  on the integer codes, over all channels and per channel. Pumice:
  measure::compare, which uses L = 1 on the [0, 1] scale.
* SSIM: skimage.metrics.structural_similarity(ya, yb, gaussian_weights=True,
  sigma=1.5, use_sample_covariance=False, data_range=full scale) on the BT.709
  luma y = 0.2126 R + 0.7152 G + 0.0722 B of the codes (float64), and with
  channel_axis=-1 on the codes for the per-channel form (its mean is what
  skimage returns; the per-channel values are computed one channel at a time).
  scikit-image 0.26.0 truncates its Gaussian at 3.5 sigma (11 taps), filters
  with mode 'reflect' and averages S after cropping (win - 1) / 2 = 5 pixels
  from every edge.
* ICC profile description: the profile embedded in skimage's astronaut.png
  (a version 2 profile, textDescriptionType), saved as astronaut.icc, and
  PIL.ImageCms.ImageCmsProfile(...).profile.profile_description (Pillow's
  LittleCMS binding). Pumice: measure::metadata::icc_summary.
* largest |a - b| (numpy.argmax over the channel, row, column order: the
  first of equal maxima) and the number of pixels where any channel differs.

Inputs are crops of scikit-image's bundled samples (skimage.data.camera,
skimage.data.astronaut) and the same crops with seeded Gaussian noise added
(numpy.random.default_rng), rounded and clipped to the codes, written as PNG
with Pillow (8-bit, and a 16-bit gray one made as code * 257 + noise).
manifest.toml lists the images and pairs with the expected values.

    python tests/reference/make_measure.py           # write tests/reference/fixtures/measure/
    python tests/reference/make_measure.py --check   # regenerate in a temporary folder
                                                     # and compare; exit 1 on mismatch
"""

import argparse
import importlib.metadata
import json
import pathlib
import sys
import tempfile
import tomllib

import io
import os

import numpy as np
import PIL
import skimage
from PIL import Image, ImageCms
from skimage import data
from skimage.metrics import peak_signal_noise_ratio, structural_similarity
from skimage.restoration import estimate_sigma

HERE = pathlib.Path(__file__).resolve().parent
FIXTURES = HERE / "fixtures" / "measure"

# --check tolerance between library versions for the float results (SSIM,
# PSNR in dB, statistics on the 0-1 scale); common practice, no published source.
CHECK_ATOL = 1e-9

BT709 = np.array([0.2126, 0.7152, 0.0722])  # ITU-R BT.709-6, item 3.3


def images():
    """(id, codes array H x W or H x W x 3, full scale)."""
    rng = np.random.default_rng(20261202)
    camera = data.camera()[200:328, 180:308]  # 128 x 128: the coat, the tripod, the sky
    astro = data.astronaut()[40:136, 180:276]  # 96 x 96 RGB: the face and the suit
    noisy = lambda a, s, full: np.clip(np.rint(a + rng.normal(0.0, s, a.shape)), 0, full).astype(
        np.uint8 if full == 255 else np.uint16
    )
    camera16 = camera.astype(np.uint16) * 257
    return [
        ("camera", camera, 255),
        ("camera-noisy", noisy(camera.astype(np.float64), 8.0, 255), 255),
        ("astronaut", astro, 255),
        ("astronaut-noisy", noisy(astro.astype(np.float64), 12.0, 255), 255),
        ("camera16", camera16, 65535),
        ("camera16-noisy", noisy(camera16.astype(np.float64), 900.0, 65535), 65535),
    ]


PAIRS = [("camera", "camera-noisy"), ("astronaut", "astronaut-noisy"), ("camera16", "camera16-noisy")]


def save_png(folder, name, a):
    # uint16 gray arrays become Pillow's "I;16" mode, a 16-bit gray PNG.
    Image.fromarray(a).save(folder / name)


def channels(a):
    return [a] if a.ndim == 2 else [a[:, :, c] for c in range(a.shape[2])]


def luma(a):
    a = a.astype(np.float64)
    return a if a.ndim == 2 else a @ BT709


def generate(folder):
    folder.mkdir(parents=True, exist_ok=True)
    found = {}
    cases = []
    for name, a, full in images():
        save_png(folder, f"{name}.png", a)
        # Read back: the fixture is what the file holds.
        a = np.asarray(Image.open(folder / f"{name}.png"))
        found[name] = (a, full)
        xs = [c.astype(np.float64) / full for c in channels(a)]
        case = {"id": name, "file": f"{name}.png", "full_scale": full}
        case["min"] = [float(x.min()) for x in xs]
        case["max"] = [float(x.max()) for x in xs]
        case["mean"] = [float(x.mean()) for x in xs]
        case["std"] = [float(x.std(ddof=0)) for x in xs]
        for p in (1, 5, 50, 95, 99):
            case[f"p{p}"] = [float(np.percentile(x, p)) for x in xs]
        case["at_zero"] = [int((x <= 0).sum()) for x in xs]
        case["at_full"] = [int((x >= 1).sum()) for x in xs]
        case["noise_sigma"] = [float(estimate_sigma(x, channel_axis=None)) for x in xs]
        cases.append(case)
    pairs = []
    for ia, ib in PAIRS:
        (a, full), (b, _) = found[ia], found[ib]
        pair = {"a": f"{ia}.png", "b": f"{ib}.png", "data_range": full}
        pair["psnr"] = float(peak_signal_noise_ratio(a, b, data_range=full))
        pair["psnr_channels"] = [
            float(peak_signal_noise_ratio(p, q, data_range=full)) for p, q in zip(channels(a), channels(b))
        ]
        ssim_args = dict(gaussian_weights=True, sigma=1.5, use_sample_covariance=False, data_range=full)
        pair["ssim_luma"] = float(structural_similarity(luma(a), luma(b), **ssim_args))
        pair["ssim_channels"] = [
            float(structural_similarity(p.astype(np.float64), q.astype(np.float64), **ssim_args))
            for p, q in zip(channels(a), channels(b))
        ]
        if a.ndim == 3:
            pair["ssim_channel_axis"] = float(
                structural_similarity(a.astype(np.float64), b.astype(np.float64), channel_axis=-1, **ssim_args)
            )
        diff = np.abs(a.astype(np.int64) - b.astype(np.int64))
        planar = diff if diff.ndim == 2 else np.moveaxis(diff, -1, 0)
        planar = planar.reshape((-1,) + diff.shape[:2])
        c, y, x = np.unravel_index(int(np.argmax(planar)), planar.shape)
        pair["largest_code"] = int(planar.max())
        pair["largest_x"], pair["largest_y"], pair["largest_channel"] = int(x), int(y), int(c)
        pair["differing_pixels"] = int((planar != 0).any(axis=0).sum())
        pairs.append(pair)
    with Image.open(os.path.join(os.path.dirname(data.__file__), "astronaut.png")) as im:
        icc = im.info["icc_profile"]
    (folder / "astronaut.icc").write_bytes(icc)
    profile = ImageCms.ImageCmsProfile(io.BytesIO(icc)).profile
    icc_case = {
        "file": "astronaut.icc",
        "description": profile.profile_description,
        "version": float(profile.version),
        "bytes": len(icc),
    }
    manifest = {
        "numpy_version": np.__version__,
        "skimage_version": skimage.__version__,
        # The distribution's version: the 1.9.0 wheel's pywt.__version__ says 1.8.0.
        "pywt_version": importlib.metadata.version("PyWavelets"),
        "pillow_version": PIL.__version__,
        "icc": icc_case,
        "image": cases,
        "pair": pairs,
    }
    (folder / "manifest.toml").write_text(to_toml(manifest))
    return manifest


def toml_value(v):
    if isinstance(v, str):
        return json.dumps(v)
    if isinstance(v, float):
        return repr(v)
    if isinstance(v, list):
        return "[" + ", ".join(toml_value(x) for x in v) + "]"
    return str(v)


def to_toml(manifest):
    lines = ["# Generated by tests/reference/make_measure.py; do not edit."]
    for key, value in manifest.items():
        if not isinstance(value, (list, dict)):
            lines.append(f"{key} = {toml_value(value)}")
    lines += ["", "[icc]"] + [f"{k} = {toml_value(v)}" for k, v in manifest["icc"].items()]
    for table in ("image", "pair"):
        for case in manifest[table]:
            lines += ["", f"[[{table}]]"] + [f"{k} = {toml_value(v)}" for k, v in case.items()]
    return "\n".join(lines) + "\n"


def close(a, b):
    if isinstance(b, list):
        return isinstance(a, list) and len(a) == len(b) and all(close(x, y) for x, y in zip(a, b))
    if isinstance(b, float):
        return isinstance(a, float) and abs(a - b) <= CHECK_ATOL
    return a == b


def check():
    problems = []
    with tempfile.TemporaryDirectory() as tmp:
        fresh = generate(pathlib.Path(tmp))
        committed = tomllib.loads((FIXTURES / "manifest.toml").read_text())
        for key in ("numpy_version", "skimage_version", "pywt_version", "pillow_version"):
            if committed.get(key) != fresh[key]:
                print(f"note: fixtures made with {key} {committed.get(key)}, checking with {fresh[key]}")
        for table in ("image", "pair"):
            if len(committed[table]) != len(fresh[table]):
                problems.append(f"the number of {table} entries differs")
            for a, b in zip(committed[table], fresh[table]):
                for key, vb in b.items():
                    if not close(a.get(key), vb):
                        problems.append(f"{table} {b.get('id', b.get('a'))}: {key} {a.get(key)} != {vb}")
        for key, vb in fresh["icc"].items():
            if not close(committed["icc"].get(key), vb):
                problems.append(f"icc: {key} {committed['icc'].get(key)} != {vb}")
        if (FIXTURES / "astronaut.icc").read_bytes() != (pathlib.Path(tmp) / "astronaut.icc").read_bytes():
            problems.append("astronaut.icc: bytes differ")
        for case in fresh["image"]:
            old = np.asarray(Image.open(FIXTURES / case["file"]))
            new = np.asarray(Image.open(pathlib.Path(tmp) / case["file"]))
            if old.shape != new.shape or not np.array_equal(old, new):
                problems.append(f"{case['file']}: pixels differ")
    for p in problems:
        print(p)
    print("fixtures match" if not problems else f"{len(problems)} mismatches")
    return 1 if problems else 0


def main():
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--check", action="store_true", help="compare with the committed fixtures")
    args = parser.parse_args()
    if args.check:
        sys.exit(check())
    m = generate(FIXTURES)
    print(f"wrote {len(m['image'])} images and {len(m['pair'])} pairs to {FIXTURES}")


if __name__ == "__main__":
    main()
