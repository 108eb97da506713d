#!/usr/bin/env python3
"""Reference fixtures for Pumice's scan operators (deskew, dust and the
connected-component labelling under it), computed with scipy, scikit-image,
numpy and Pillow (versions pinned in requirements.txt and recorded in the
manifest).

* deskew: one synthetic page (rows of dark text-like blocks of varied length,
  two ruled lines, paper 232 with a faint vertical shading) drawn straight with
  numpy and turned with scipy.ndimage.rotate(page, angle, reshape=False,
  order=1, mode='constant', cval=232), an independent rotation. scipy turns
  counter-clockwise as displayed for a positive angle (checked below on an
  impulse), so the page's clockwise skew, Pumice's sign, is -angle. Cases:
  skews -7.5, -1.2, 0.3, 2.75 and 9 degrees, and a page of uniform noise that
  must report no skew.
* label: skimage.data.coins (bright coins, codes > Otsu), text and page (dark
  ink, codes < Otsu) thresholded with skimage.filters.threshold_otsu; the masks
  are labelled with scipy.ndimage.label(mask, structure=numpy.ones((3, 3)))
  and skimage.measure.label(mask, connectivity=2); the script asserts that
  both give the same partition. The Rust test requires the same count and the
  same label image up to renumbering.
* dust (two-level): skimage.morphology.remove_small_objects(mask, max_size=A,
  connectivity=2) removes components of at most A pixels: dust:max-area=A on
  the mask as a 0/1 image with polarity=light (the objects are the 1s).
* paper: skimage.data.page and text whole, the paper mask (samples
  skimage.filters.threshold_sauvola(window_size=25) puts above their local
  threshold) and the paper's spread before flattening (numpy std and mean of
  the codes under the mask); the Rust test runs the steps listed and requires
  the stated drop of the spread (std) or of the relative spread (std / mean).
* dust (gray): skimage.morphology.area_closing(codes, area_threshold=A+1,
  connectivity=2) and area_opening(...) on a crop of skimage.data.page:
  dust:max-area=A,polarity=dark and polarity=light. Both work on the uint8 codes.

Images are 8-bit PNG (labels 16-bit PNG, written with Pillow), so the fixture
set stays small; manifest.toml lists the cases.

    python tests/reference/make_scan.py           # write tests/reference/fixtures/scan/
    python tests/reference/make_scan.py --check   # regenerate in a temporary folder
                                                  # and compare; exit 1 on mismatch
"""

import argparse
import json
import pathlib
import sys
import tempfile
import tomllib

import numpy as np
import PIL
import scipy
import skimage
from PIL import Image
from scipy import ndimage
from skimage import data, filters, measure, morphology

HERE = pathlib.Path(__file__).resolve().parent
FIXTURES = HERE / "fixtures" / "scan"
PAPER = 232
SKEWS = [-7.5, -1.2, 0.3, 2.75, 9.0]


def straight_page(rng, w=480, h=640):
    """A page of invented text-like blocks and two ruled lines, straight."""
    y = np.arange(h)[:, None]
    page = np.full((h, w), float(PAPER)) - 10.0 * (y / h)  # faint shading
    page = np.broadcast_to(page, (h, w)).copy()
    top = 70
    for line in range(20):
        y0 = top + line * 24
        if y0 + 11 > h - 90:
            break
        x = 60
        end = w - 60 - (rng.integers(0, 120) if line % 6 == 5 else 0)
        while x < end:
            word = int(rng.integers(12, 60))
            page[y0 : y0 + 11, x : min(x + word, end)] = 40.0
            x += word + int(rng.integers(7, 12))
    for y0 in (40, h - 70):
        page[y0 : y0 + 2, 40 : w - 40] = 60.0
    return page


def skewed(page, skew):
    # scipy turns counter-clockwise (as displayed) for a positive angle.
    return ndimage.rotate(page, -skew, reshape=False, order=1, mode="constant", cval=float(PAPER))


def rotation_sense():
    """+1 when scipy.ndimage.rotate(+a) turns counter-clockwise as displayed (y down)."""
    a = np.zeros((21, 21))
    a[10, 15] = 1.0
    r, _ = np.unravel_index(ndimage.rotate(a, 10.0, reshape=False, order=1).argmax(), a.shape)
    return 1 if r < 10 else -1


def codes(a):
    return np.clip(np.round(a), 0, 255).astype(np.uint8)


def save_png(folder, name, a):
    # uint8 arrays become mode L, uint16 arrays mode I;16 (Pillow's defaults).
    assert a.dtype in (np.uint8, np.uint16)
    Image.fromarray(a).save(folder / name, optimize=True)


def same_partition(a, b):
    """True when label images a and b differ only by renumbering (0 kept as background)."""
    if a.shape != b.shape or ((a == 0) != (b == 0)).any():
        return False
    pairs = np.unique(np.stack([a.ravel(), b.ravel()]), axis=1)
    return len(np.unique(pairs[0])) == pairs.shape[1] == len(np.unique(pairs[1]))


def generate(folder):
    folder.mkdir(parents=True, exist_ok=True)
    assert rotation_sense() == 1, "scipy.ndimage.rotate's sense changed"
    cases = []
    rng = np.random.default_rng(20260812)
    page = straight_page(rng)
    for skew in SKEWS:
        name = f"page-skew{skew:+.2f}.png"
        save_png(folder, name, codes(skewed(page, skew)))
        cases.append(
            {
                "id": f"deskew{skew:+.2f}",
                "reference": f"scipy.ndimage.rotate(page, {-skew}, reshape=False, order=1)",
                "kind": "deskew",
                "input": name,
                "skew": skew,
            }
        )
    noise = codes(rng.uniform(0, 255, (260, 200)))
    save_png(folder, "noise.png", noise)
    cases.append(
        {"id": "deskew-noise", "reference": "numpy uniform noise", "kind": "no-skew", "input": "noise.png"}
    )

    samples = [("coins", data.coins(), "bright"), ("text", data.text(), "dark"), ("page", data.page(), "dark")]
    for name, img, ink in samples:
        t = filters.threshold_otsu(img)
        mask = img > t if ink == "bright" else img < t
        by_scipy, n_scipy = ndimage.label(mask, structure=np.ones((3, 3), dtype=int))
        by_skimage = measure.label(mask, connectivity=2)
        n_skimage = int(by_skimage.max())
        assert n_scipy == n_skimage and same_partition(by_scipy, by_skimage), name
        assert n_scipy < 65536
        save_png(folder, f"{name}-mask.png", mask.astype(np.uint8) * np.uint8(255))
        save_png(folder, f"{name}-labels.png", by_scipy.astype(np.uint16))
        cases.append(
            {
                "id": f"label-{name}",
                "reference": "scipy.ndimage.label(structure=ones((3, 3))), skimage.measure.label(connectivity=2)",
                "kind": "label",
                "input": f"{name}-mask.png",
                "output": f"{name}-labels.png",
                "count_scipy": int(n_scipy),
                "count_skimage": n_skimage,
                "threshold": float(t),
            }
        )
        area = 20
        kept = morphology.remove_small_objects(mask, max_size=area, connectivity=2)
        save_png(folder, f"{name}-dust{area}.png", kept.astype(np.uint8) * np.uint8(255))
        cases.append(
            {
                "id": f"dust-mask-{name}",
                "reference": f"skimage.morphology.remove_small_objects(mask, max_size={area}, connectivity=2)",
                "kind": "dust",
                "step": f"dust:max-area={area},polarity=light",
                "input": f"{name}-mask.png",
                "output": f"{name}-dust{area}.png",
            }
        )

    # Paper flattening (`illumination:method=paper`): the unevenly lit samples
    # whole, and the paper region the test measures the spread over — the
    # samples skimage.filters.threshold_sauvola(window_size=25) puts above
    # their local threshold (paper, not ink), as a 0/255 mask.
    # The manifest holds the paper's spread before flattening, by numpy
    # (population std of the 8-bit codes over the mask, and that std over
    # their mean), and the steps the Rust test runs with the factors it requires.
    paper_steps = {
        "page": [("illumination:method=paper,radius=20", "std", 2.5)],
        "text": [
            ("illumination:method=paper,radius=10", "relative", 1.4),
            ("illumination:method=paper,radius=10,keep-offset=true", "std", 1.4),
        ],
    }
    for name, image in [("page", data.page()), ("text", data.text())]:
        save_png(folder, f"{name}.png", image)
        paper = image > filters.threshold_sauvola(image, window_size=25)
        save_png(folder, f"{name}-paper-mask.png", (paper * 255).astype(np.uint8))
        codes_on_paper = image[paper].astype(np.float64)
        for i, (step, spread, factor) in enumerate(paper_steps[name]):
            cases.append(
                {
                    "id": f"paper-{name}-{i}",
                    "reference": "skimage.data." + name + "(), paper = image > skimage.filters.threshold_sauvola("
                    "image, window_size=25); numpy std and mean of the codes there",
                    "kind": "paper",
                    "input": f"{name}.png",
                    "output": f"{name}-paper-mask.png",
                    "step": step,
                    "measure": spread,
                    "factor": factor,
                    "std_before": float(codes_on_paper.std()),
                    "mean_before": float(codes_on_paper.mean()),
                }
            )

    crop = data.page()[40:140, 0:160]
    save_png(folder, "page-crop.png", crop)
    for polarity, fn in [("dark", morphology.area_closing), ("light", morphology.area_opening)]:
        for area in (8, 40):
            out = fn(crop, area_threshold=area + 1, connectivity=2)
            name = f"page-crop-{polarity}{area}.png"
            save_png(folder, name, out.astype(np.uint8))
            cases.append(
                {
                    "id": f"dust-gray-{polarity}{area}",
                    "reference": f"skimage.morphology.{fn.__name__}(codes, area_threshold={area + 1}, connectivity=2)",
                    "kind": "dust",
                    "step": f"dust:max-area={area},polarity={polarity}",
                    "input": "page-crop.png",
                    "output": name,
                }
            )
    manifest = {
        "numpy_version": np.__version__,
        "scipy_version": scipy.__version__,
        "skimage_version": skimage.__version__,
        "pillow_version": PIL.__version__,
        "case": cases,
    }
    (folder / "manifest.toml").write_text(to_toml(manifest))
    return manifest


def toml_value(v):
    if isinstance(v, str):
        return json.dumps(v)
    if isinstance(v, float):
        return repr(v)
    return str(v)


def to_toml(manifest):
    lines = ["# Generated by tests/reference/make_scan.py; do not edit."]
    for key, value in manifest.items():
        if key != "case":
            lines.append(f"{key} = {toml_value(value)}")
    for case in manifest["case"]:
        lines.append("")
        lines.append("[[case]]")
        for key, value in case.items():
            lines.append(f"{key} = {toml_value(value)}")
    return "\n".join(lines) + "\n"


def check():
    problems = []
    with tempfile.TemporaryDirectory() as tmp:
        fresh = generate(pathlib.Path(tmp))
        committed = tomllib.loads((FIXTURES / "manifest.toml").read_text())
        for key in ("numpy_version", "scipy_version", "skimage_version", "pillow_version"):
            if committed.get(key) != fresh[key]:
                print(f"note: fixtures made with {key} {committed.get(key)}, checking with {fresh[key]}")
        if committed["case"] != fresh["case"]:
            problems.append("the manifest's cases differ")
        for path in sorted(pathlib.Path(tmp).glob("*.png")):
            old = FIXTURES / path.name
            if not old.exists():
                problems.append(f"{path.name}: not committed")
                continue
            # Images are integer codes: they must be identical.
            if not np.array_equal(np.asarray(Image.open(old)), np.asarray(Image.open(path))):
                problems.append(f"{path.name}: differs")
    for p in problems:
        print(p, file=sys.stderr)
    print(f"{len(fresh['case'])} scan cases checked: {'FAILED' if problems else 'ok'}")
    return 1 if problems else 0


def main():
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--check", action="store_true", help="compare with the committed fixtures")
    args = ap.parse_args()
    if args.check:
        return check()
    manifest = generate(FIXTURES)
    size = sum(p.stat().st_size for p in FIXTURES.iterdir())
    print(f"wrote {len(manifest['case'])} cases to {FIXTURES} ({size / 1024:.0f} KiB)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
