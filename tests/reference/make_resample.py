#!/usr/bin/env python3
"""Reference fixtures for Pumice's resampling (`resize`, `rotate`).

Reference functions (versions pinned in requirements.txt, recorded in the manifest):

* Pillow ``Image.resize(size, resample=F)`` on 8-bit gray ("L") images for
  F in LANCZOS, BICUBIC (Pillow's bicubic is Keys a = -0.5, i.e. Catmull-Rom),
  BILINEAR and BOX: down, up and mixed scalings. Pillow works on the encoded
  values, so Pumice is run with ``--domain encoded`` for these.
* OpenCV ``cv2.resize(img, size, interpolation=cv2.INTER_AREA)`` on float32 for
  integer-factor reductions (an exact area average), against Pumice's box filter.
* scikit-image ``transform.rotate(img, angle, resize=False, order=1,
  mode='constant', cval=0, preserve_range=True)`` (bilinear, counter-clockwise
  degrees, about ((cols-1)/2, (rows-1)/2)) on a crop of the bundled
  ``camera`` sample, against ``rotate:angle=-A,filter=bilinear,expand=false,fill=black``.
* scikit-image ``transform.resize(img, shape, order=1, mode='symmetric',
  anti_aliasing=False)`` (bilinear at pixel centres) upscaling a crop of
  ``camera``, against ``resize:filter=bilinear`` (same sample positions, same
  edge rule: Pumice's ``reflect`` is numpy's ``symmetric``).
* scikit-image ``transform.resize(img, shape, order=1, anti_aliasing=True)``
  reducing a band-limited pattern (a sum of cosines far below the output's
  Nyquist frequency) together with the pattern's exact values at the output
  pixel centres: scikit-image blurs with a Gaussian (σ = (factor − 1) / 2) and
  interpolates, Pumice filters with the widened lanczos3 kernel — different
  methods, so the check is that both reproduce the underlying pattern, and
  Pumice at least as closely as scikit-image does (its deviation is recorded).

Files are .npy (format 1.0, '<f4', C order, 2-D). Pillow's inputs and outputs
hold 8-bit codes as floats. manifest.toml lists every case.

    python tests/reference/make_resample.py           # write tests/reference/fixtures/resample/
    python tests/reference/make_resample.py --check   # regenerate and compare; exit 1 on mismatch
"""

import argparse
import json
import pathlib
import sys
import tempfile

import numpy as np

HERE = pathlib.Path(__file__).resolve().parent
OUT = HERE / "fixtures" / "resample"


def save(folder, name, array):
    np.save(folder / name, np.ascontiguousarray(array, dtype="<f4"))


def make(folder):
    import cv2
    import PIL
    import skimage
    from PIL import Image
    from skimage import data, transform

    folder.mkdir(parents=True, exist_ok=True)
    rng = np.random.default_rng(20261202)
    y, x = np.mgrid[0:48, 0:64]
    # Codes stay within [60, 196], so no filter's overshoot (the negative lobes of
    # lanczos3 and bicubic add at most about a third of a step) reaches 0 or 255:
    # Pillow clips its 8-bit intermediate there and Pumice does not, a difference
    # these fixtures are not about.
    smooth = 128 + 50 * np.sin(x / 7.0) * np.cos(y / 5.0)
    codes = np.clip(np.round(smooth + rng.normal(0, 6, smooth.shape)), 60, 196).astype(np.uint8)
    save(folder, "pil-input.npy", codes)
    cases = []
    filters = {"lanczos3": "LANCZOS", "bicubic": "BICUBIC", "bilinear": "BILINEAR", "box": "BOX"}
    for size in [(24, 18), (100, 75), (64, 30), (17, 48)]:
        for ours, pil in filters.items():
            out = np.asarray(Image.fromarray(codes, "L").resize(size, resample=getattr(Image.Resampling, pil)))
            name = f"pil-{ours}-{size[0]}x{size[1]}.npy"
            save(folder, name, out)
            cases.append(dict(kind="pillow", filter=ours, width=size[0], height=size[1], input="pil-input.npy",
                              output=name, reference=f"PIL.Image.resize({size}, resample=Image.Resampling.{pil})"))

    floats = rng.random((48, 64), dtype=np.float32)
    save(folder, "area-input.npy", floats)
    for factor in (2, 4, 8):
        size = (64 // factor, 48 // factor)
        out = cv2.resize(floats, size, interpolation=cv2.INTER_AREA)
        name = f"area-{factor}.npy"
        save(folder, name, out)
        cases.append(dict(kind="area", filter="box", width=size[0], height=size[1], input="area-input.npy",
                          output=name, reference=f"cv2.resize({size}, interpolation=cv2.INTER_AREA)"))

    camera = (data.camera()[200:296, 180:276] / 255.0).astype(np.float32)
    save(folder, "rotate-input.npy", camera)
    for angle in (17.0, -33.5, 90.5):
        out = transform.rotate(camera.astype(np.float64), angle, resize=False, order=1, mode="constant",
                               cval=0.0, preserve_range=True)
        name = f"rotate-{angle:+.1f}.npy"
        save(folder, name, out)
        cases.append(dict(kind="rotate", filter="bilinear", angle=angle, input="rotate-input.npy", output=name,
                          reference=f"skimage.transform.rotate(angle={angle}, resize=False, order=1, "
                                    f"mode='constant', cval=0)"))

    up_in = (data.camera()[240:264, 200:232] / 255.0).astype(np.float32)
    save(folder, "skimage-up-input.npy", up_in)
    for shape in [(60, 80), (72, 77)]:
        out = transform.resize(up_in.astype(np.float64), shape, order=1, mode="symmetric", anti_aliasing=False)
        name = f"skimage-up-{shape[1]}x{shape[0]}.npy"
        save(folder, name, out)
        cases.append(dict(kind="skimage-up", filter="bilinear", width=shape[1], height=shape[0],
                          input="skimage-up-input.npy", output=name,
                          reference=f"skimage.transform.resize({shape}, order=1, mode='symmetric', "
                                    "anti_aliasing=False)"))

    # A pattern with every frequency at most 1/8 cycle per output pixel.
    def pattern(u, v):
        return (0.5 + 0.15 * np.cos(2 * np.pi * (0.011 * u + 0.007 * v) + 0.3)
                + 0.1 * np.cos(2 * np.pi * (-0.006 * u + 0.017 * v) + 1.1))

    yy, xx = np.mgrid[0:192, 0:256].astype(np.float64)
    down_in = pattern(xx, yy)
    save(folder, "skimage-down-input.npy", down_in)
    for factor in (4, 8):
        shape = (192 // factor, 256 // factor)
        out = transform.resize(down_in, shape, order=1, anti_aliasing=True)
        # The output pixel (X, Y) is centred on source coordinate (X + 0.5)·f − 0.5.
        oy, ox = np.mgrid[0:shape[0], 0:shape[1]].astype(np.float64)
        truth = pattern((ox + 0.5) * factor - 0.5, (oy + 0.5) * factor - 0.5)
        # Compared away from the edges (3 output pixels: the lanczos3 support),
        # where neither method's edge rule enters.
        inner = (slice(3, -3), slice(3, -3))
        name, truth_name = f"skimage-down-{factor}.npy", f"skimage-down-{factor}-exact.npy"
        save(folder, name, out)
        save(folder, truth_name, truth)
        cases.append(dict(kind="skimage-down", filter="lanczos3", width=shape[1], height=shape[0],
                          input="skimage-down-input.npy", output=name, exact=truth_name, margin=3,
                          reference_error=float(np.max(np.abs(out - truth)[inner])),
                          reference="skimage.transform.resize(order=1, anti_aliasing=True)"))

    lines = ["# Written by make_resample.py; do not edit.",
             f'numpy = "{np.__version__}"', f'pillow = "{PIL.__version__}"', f'opencv = "{cv2.__version__}"',
             f'scikit_image = "{skimage.__version__}"', ""]
    for c in cases:
        lines.append("[[case]]")
        for k, v in c.items():
            lines.append(f"{k} = {json.dumps(v)}")
        lines.append("")
    (folder / "manifest.toml").write_text("\n".join(lines))


def check():
    with tempfile.TemporaryDirectory() as tmp:
        fresh = pathlib.Path(tmp)
        make(fresh)
        bad = []
        names = sorted(p.name for p in fresh.iterdir())
        if names != sorted(p.name for p in OUT.iterdir()):
            bad.append("the set of files differs")
        for name in names:
            a, b = fresh / name, OUT / name
            if not b.exists():
                continue
            if name.endswith(".npy"):
                x, y = np.load(a), np.load(b)
                # 1e-6 absorbs cross-version float rounding; Pillow outputs are whole codes.
                if x.shape != y.shape or np.max(np.abs(x - y)) > 1e-6:
                    bad.append(name)
            elif a.read_text().split("\n\n", 1)[1] != b.read_text().split("\n\n", 1)[1]:
                bad.append(name)
        if bad:
            print("resample fixtures differ:", ", ".join(bad))
            sys.exit(1)
        print(f"resample fixtures match: {len(names)} files")


if __name__ == "__main__":
    ap = argparse.ArgumentParser()
    ap.add_argument("--check", action="store_true")
    if ap.parse_args().check:
        check()
    else:
        make(OUT)
