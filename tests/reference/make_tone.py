#!/usr/bin/env python3
"""Reference fixtures for Pumice's tone and threshold operators (stretch,
binarize, equalize), computed with scikit-image and numpy (versions pinned in
requirements.txt and recorded in the manifest).

Reference functions and how their parameters map to Pumice's:

* stretch:low=L,high=H  <->  lo, hi = numpy.percentile(x, [L, H]) (default
  'linear' method), then skimage.exposure.rescale_intensity(x, in_range=(lo, hi),
  out_range=(0, 1)), which clips outside [lo, hi].
* binarize:otsu         <->  t = skimage.filters.threshold_otsu(codes) on the
  uint8 image (one bin per code, so t is a code); result codes > t. The Rust
  test requires the same t (to the bin) and the same 0/1 image.
  On float data: threshold_otsu(x, nbins=256) <-> binarize:otsu,bins=256.
* equalize             <->  skimage.exposure.equalize_hist(codes) on the uint8
  image (one bin per code, out = cdf(code)); on float data
  equalize_hist(x, nbins=65536), Pumice's float binning.
* space:to=xyz|lab|oklab  <->  colour.RGB_to_XYZ(rgb, sRGB colourspace with the
  matrix derived from its primaries and D65, apply_cctf_decoding=True), then
  colour.XYZ_to_Lab(xyz, D65) / colour.XYZ_to_Oklab(xyz), on a 9x9x9 grid of
  sRGB values stored one colour per row (N x 3).
* binarize:sauvola,window=W,k=K,r=R  <->  T = skimage.filters.threshold_sauvola(
  x, window_size=W, k=K, r=R) on x = codes/255 in float64; result x > T.
  scikit-image pads with numpy's 'reflect' mode (edge sample not repeated),
  which is Pumice's `mirror` border. The threshold surface T is stored too, so
  the Rust test can allow a different 0/1 only where |x − T| is within
  rounding of a tie.

* window:low=L,high=H,gamma=G  <->  numpy: clip((x - L)/(H - L), 0, 1) ** (1/G)
  on x = codes/255 (float64), the formula of Pumice's `window` doc written out.
* exposure:S  <->  numpy: decode(x) * 2**S with decode the IEC 61966-2-1:1999
  §5.2 transfer (c <= 0.04045: c/12.92, else ((c + 0.055)/1.055)**2.4); the
  result stays in linear light.
* balance:gray-world | white-patch | rect  <->  numpy on lin = decode(x) as
  float32: m_c = mean(lin_c) (over the rectangle for rect), gain_c =
  mean(m)/m_c; white-patch p_c = numpy.percentile(lin_c, 99), gain_c =
  max(p)/p_c (Buchsbaum 1980 gray world, Land & McCann 1971 white patch, as
  Pumice's `balance` doc writes them); out = lin * gain.
* space:lab then extract:l / extract:2  <->  colour.XYZ_to_Lab as above, L* and
  b*; space:lch then extract:c <-> colour.Lab_to_LCHab, C*ab; space:hsv then
  extract:s <-> colour.RGB_to_HSV(rgb), S.
* clahe:tiles=T,clip=C,bins=256  <->  skimage.exposure.equalize_adapthist(
  codes, kernel_size=side/T, clip_limit=C, nbins=256) on a crop whose side is
  a multiple of T (so scikit-image pads nothing that a tile reads) and whose
  codes span 0..255 (so its input rescale is only 8 -> 14 bits). Their clip
  limits agree when C·pixels per tile is an integer (scikit-image floors
  it); clip_limit=0 (no clipping) <-> clip=1. The rest differs and is
  measured, not hidden: scikit-image requantises to 14 bits and bins by
  1 + 16384 // nbins = 65 levels (253 bins used, Pumice one per code), hands
  clipped counts back only to bins under the limit (integer steps), truncates
  each map to an integer of 0..16383, puts each tile's centre half a pixel
  off the pixel grid for even tile sides, and stretches its result to 0..1
  by the result's min and max. The manifest records, per tile, the largest
  share of pixels clipped away (`excess_share`), which bounds the
  redistribution difference.

RGB images are stored planar as a (3·height, width) array: red rows, then
green, then blue.

Inputs are crops of scikit-image's bundled sample images (skimage.data:
camera, coins, moon, page) and seeded numpy.random.default_rng data. Integer
images are stored as their codes in float32 (exact); Pumice divides by 255
itself, as its decoder does. Every file is a .npy array (format 1.0, '<f4',
C order, 2-D). manifest.toml lists the cases.

    python tests/reference/make_tone.py           # write tests/reference/fixtures/tone/
    python tests/reference/make_tone.py --check   # regenerate in a temporary folder
                                                  # and compare; exit 1 on mismatch
"""

import argparse
import json
import pathlib
import sys
import tempfile
import tomllib

import numpy as np
import colour
import skimage
from skimage import data, exposure, filters
from skimage.exposure._adapthist import clip_histogram  # its redistribution, measured below

HERE = pathlib.Path(__file__).resolve().parent
FIXTURES = HERE / "fixtures" / "tone"

# --check tolerance between library versions: results are float32 images in
# [0, 1] or thresholds in code units; common practice, no published source.
CHECK_ATOL = 1e-6


def crops():
    """(name, uint8 array) inputs: crops that keep each image's character."""
    return [
        ("camera", data.camera()[150:246, 180:276]),  # the cameraman's coat and the sky
        ("coins", data.coins()[100:196, 100:196]),
        ("moon", data.moon()[200:296, 200:296]),  # low contrast
        ("page", data.page()[0:96, 0:128]),  # uneven light on text
    ]


def save(folder, name, a):
    a = np.ascontiguousarray(a, dtype="<f4")
    assert a.ndim == 2
    np.save(folder / name, a, allow_pickle=False)


def generate(folder):
    folder.mkdir(parents=True, exist_ok=True)
    cases = []
    for name, img in crops():
        save(folder, f"{name}.npy", img.astype(np.float32))
        x = img.astype(np.float64) / 255.0
        # Otsu on the uint8 codes.
        t = float(filters.threshold_otsu(img))
        save(folder, f"{name}-otsu.npy", (img > t).astype(np.float32))
        cases.append(
            {
                "id": f"{name}-otsu",
                "reference": "skimage.filters.threshold_otsu(uint8 image)",
                "step": "binarize:otsu",
                "input": f"{name}.npy",
                "scale": 255.0,
                "output": f"{name}-otsu.npy",
                "threshold": t,
            }
        )
        # Percentile stretch.
        for low, high in [(0.5, 99.5)] + ([(2.0, 98.0)] if name == "moon" else []):
            lo, hi = np.percentile(x, [low, high])
            out = exposure.rescale_intensity(x, in_range=(lo, hi), out_range=(0.0, 1.0))
            cid = f"{name}-stretch-{low}-{high}"
            save(folder, f"{cid}.npy", out.astype(np.float32))
            cases.append(
                {
                    "id": cid,
                    "reference": "numpy.percentile + skimage.exposure.rescale_intensity",
                    "step": f"stretch:low={low},high={high}",
                    "input": f"{name}.npy",
                    "scale": 255.0,
                    "output": f"{cid}.npy",
                    "low_value": float(lo),
                    "high_value": float(hi),
                }
            )
    # Global equalisation of the uint8 crops: cdf per code.
    for name, img in crops():
        if name not in ("camera", "moon"):
            continue
        out = exposure.equalize_hist(img)
        cid = f"{name}-equalize"
        save(folder, f"{cid}.npy", out.astype(np.float32))
        cases.append(
            {
                "id": cid,
                "reference": "skimage.exposure.equalize_hist(uint8 image)",
                "step": "equalize",
                "input": f"{name}.npy",
                "scale": 255.0,
                "output": f"{cid}.npy",
            }
        )
    # Sauvola on the page and the coins.
    for name, img in crops():
        if name not in ("page", "coins"):
            continue
        x = img.astype(np.float64) / 255.0
        for window, k, r in [(25, 0.2, 0.5)] + ([(15, 0.34, 0.5)] if name == "page" else []):
            T = filters.threshold_sauvola(x, window_size=window, k=k, r=r)
            cid = f"{name}-sauvola-w{window}-k{k}"
            save(folder, f"{cid}.npy", (x > T).astype(np.float32))
            save(folder, f"{cid}-T.npy", T.astype(np.float32))
            cases.append(
                {
                    "id": cid,
                    "reference": f"skimage.filters.threshold_sauvola(x, window_size={window}, k={k}, r={r})",
                    "step": f"binarize:sauvola,window={window},k={k},r={r}",
                    "input": f"{name}.npy",
                    "scale": 255.0,
                    "output": f"{cid}.npy",
                    "thresholds": f"{cid}-T.npy",
                }
            )
    # Otsu on seeded float data (two overlapping normal populations).
    rng = np.random.default_rng(20260101)
    f = np.concatenate([rng.normal(0.3, 0.08, 2000), rng.normal(0.7, 0.1, 2096)]).astype(np.float32)
    f = rng.permutation(f).reshape(64, 64)
    save(folder, "float-bimodal.npy", f)
    t = float(filters.threshold_otsu(f.astype(np.float64), nbins=256))
    save(folder, "float-bimodal-otsu.npy", (f > t).astype(np.float32))
    cases.append(
        {
            "id": "float-bimodal-otsu",
            "reference": "skimage.filters.threshold_otsu(float64 image, nbins=256)",
            "step": "binarize:otsu,bins=256",
            "input": "float-bimodal.npy",
            "scale": 1.0,
            "output": "float-bimodal-otsu.npy",
            "threshold": t,
            "bin_width": float((f.max() - f.min()) / 256.0),
        }
    )
    # Equalisation of float data: 65536 bins, as Pumice bins float data.
    g = (rng.gamma(2.0, 0.1, 4096)).astype(np.float32).reshape(64, 64)
    save(folder, "float-gamma.npy", g)
    out = exposure.equalize_hist(g.astype(np.float64), nbins=65536)
    save(folder, "float-gamma-equalize.npy", out.astype(np.float32))
    cases.append(
        {
            "id": "float-gamma-equalize",
            "reference": "skimage.exposure.equalize_hist(float64 image, nbins=65536)",
            "step": "equalize",
            "input": "float-gamma.npy",
            "scale": 1.0,
            "output": "float-gamma-equalize.npy",
        }
    )
    # sRGB -> XYZ -> Lab and Oklab on a 9x9x9 grid of sRGB-encoded colours
    # (it holds black, white, the primaries and secondaries), one colour per row.
    grid = np.linspace(0.0, 1.0, 9)
    rgb = np.stack(np.meshgrid(grid, grid, grid, indexing="ij"), -1).reshape(-1, 3)
    save(folder, "srgb-grid.npy", rgb.astype(np.float32))
    srgb = colour.RGB_COLOURSPACES["sRGB"].copy()
    # The matrix derived from the primaries and the D65 chromaticity (IEC 61966-2-1
    # §5.2 rounds it to 4 digits; palette derives it, so the derived one is compared).
    srgb.use_derived_transformation_matrices(True)
    xyz = colour.RGB_to_XYZ(rgb.astype(np.float32).astype(np.float64), srgb, apply_cctf_decoding=True)
    d65 = srgb.whitepoint
    for model, values in [
        ("xyz", xyz),
        ("lab", colour.XYZ_to_Lab(xyz, d65)),
        ("oklab", colour.XYZ_to_Oklab(xyz)),
    ]:
        save(folder, f"srgb-grid-{model}.npy", values.astype(np.float32))
        cases.append(
            {
                "id": f"srgb-grid-{model}",
                "reference": f"colour.RGB_to_XYZ (sRGB, derived matrix){'' if model == 'xyz' else ' + colour.XYZ_to_' + {'lab': 'Lab', 'oklab': 'Oklab'}[model]}",
                "step": f"space:to={model}",
                "input": "srgb-grid.npy",
                "scale": 1.0,
                "output": f"srgb-grid-{model}.npy",
                "whitepoint_x": float(d65[0]),
                "whitepoint_y": float(d65[1]),
            }
        )
    cases.extend(point_and_colour_cases(folder))
    cases.extend(clahe_cases(folder))
    manifest = {
        "colour_version": colour.__version__,
        "numpy_version": np.__version__,
        "skimage_version": skimage.__version__,
        "case": cases,
    }
    (folder / "manifest.toml").write_text(to_toml(manifest))
    return manifest


def srgb_decode(c):
    """IEC 61966-2-1:1999 §5.2, in float64."""
    return np.where(c <= 0.04045, c / 12.92, ((c + 0.055) / 1.055) ** 2.4)


def planar(rgb):
    """(h, w, 3) -> (3h, w): the planes stacked."""
    return np.concatenate([rgb[..., c] for c in range(3)], axis=0)


def point_and_colour_cases(folder):
    cases = []
    cam = data.camera()[200:248, 240:288]  # 48x48: coat, face and sky
    save(folder, "point-camera.npy", cam.astype(np.float32))
    x = cam.astype(np.float64) / 255.0
    for low, high, gamma in [(0.2, 0.7, 1.0), (0.1, 0.6, 2.2)]:
        out = np.clip((x - low) / (high - low), 0.0, 1.0) ** (1.0 / gamma)
        cid = f"point-window-{low}-{high}-{gamma}"
        save(folder, f"{cid}.npy", out.astype(np.float32))
        cases.append(
            {
                "id": cid,
                "reference": "numpy: clip((x - low)/(high - low), 0, 1) ** (1/gamma)",
                "step": f"window:low={low},high={high},gamma={gamma}",
                "input": "point-camera.npy",
                "scale": 255.0,
                "output": f"{cid}.npy",
                "layout": "gray",
                "window_low": low,
                "window_high": high,
                "gamma": gamma,
            }
        )
    astro = data.astronaut()[150:182, 200:232]  # 32x32 RGB: the suit, the flag's colours
    save(folder, "colour-astronaut.npy", planar(astro).astype(np.float32))
    rgb = astro.astype(np.float64) / 255.0
    lin = srgb_decode(rgb)
    for stops in [1.0, -1.5]:
        cid = f"point-exposure-{stops}"
        save(folder, f"{cid}.npy", planar(lin * 2.0**stops).astype(np.float32))
        cases.append(
            {
                "id": cid,
                "reference": "numpy: IEC 61966-2-1 decode(x) * 2**stops (linear light)",
                "step": f"exposure:{stops}",
                "input": "colour-astronaut.npy",
                "scale": 255.0,
                "output": f"{cid}.npy",
                "layout": "rgb",
            }
        )
    lin32 = srgb_decode(rgb).astype(np.float32).astype(np.float64)
    rect = (4, 6, 10, 8)  # x, y, width, height
    rx, ry, rw, rh = rect
    for method, step in [
        ("gray-world", "balance:gray-world"),
        ("white-patch", "balance:white-patch,percentile=99"),
        ("rect", f"balance:rect,x={rx},y={ry},width={rw},height={rh}"),
    ]:
        case = {}
        if method == "gray-world":
            m = lin32.reshape(-1, 3).mean(axis=0)
            gains = m.mean() / m
        elif method == "rect":
            m = lin32[ry : ry + rh, rx : rx + rw].reshape(-1, 3).mean(axis=0)
            gains = m.mean() / m
        else:
            flat = lin32.reshape(-1, 3)
            p = np.percentile(flat, 99, axis=0)
            gains = p.max() / p
            # Pumice reads percentiles from 65536 bins between each channel's
            # minimum and maximum: each within one bin width of numpy's.
            width = (flat.max(axis=0) - flat.min(axis=0)) / 65536.0
            case["bin_share"] = float((width / p).max())
        cid = f"balance-{method}"
        save(folder, f"{cid}.npy", planar(lin32 * gains).astype(np.float32))
        cases.append(
            {
                "id": cid,
                "reference": f"numpy {method} gains on IEC 61966-2-1 decoded float32 samples",
                "step": step,
                "input": "colour-astronaut.npy",
                "scale": 255.0,
                "output": f"{cid}.npy",
                "layout": "rgb",
                **case,
            }
        )
    srgb = colour.RGB_COLOURSPACES["sRGB"].copy()
    srgb.use_derived_transformation_matrices(True)
    rgb32 = rgb.astype(np.float32).astype(np.float64)
    lab = colour.XYZ_to_Lab(colour.RGB_to_XYZ(rgb32, srgb, apply_cctf_decoding=True), srgb.whitepoint)
    lch = colour.Lab_to_LCHab(lab)
    hsv = colour.RGB_to_HSV(rgb32)
    for cid, steps, values, ref in [
        ("extract-lab-l", "space:lab extract:l", lab[..., 0], "colour.XYZ_to_Lab, L*"),
        ("extract-lab-2", "space:lab extract:2", lab[..., 2], "colour.XYZ_to_Lab, b* (by index)"),
        ("extract-lch-c", "space:lch extract:c", lch[..., 1], "colour.Lab_to_LCHab, C*ab"),
        ("extract-hsv-s", "space:hsv extract:s", hsv[..., 1], "colour.RGB_to_HSV, S"),
    ]:
        save(folder, f"{cid}.npy", values.astype(np.float32))
        cases.append(
            {
                "id": cid,
                "reference": ref,
                "step": steps,
                "input": "colour-astronaut.npy",
                "scale": 255.0,
                "output": f"{cid}.npy",
                "layout": "rgb",
            }
        )
    return cases


def clahe_cases(folder):
    cases = []
    for name, img in [("camera", data.camera()[100:164, 200:264]), ("moon", data.moon()[200:264, 200:264])]:
        # Full range, so scikit-image's rescale of the input is 8 -> 14 bits only.
        img = np.round(exposure.rescale_intensity(img, out_range=(0, 255))).astype(np.uint8)
        save(folder, f"clahe-{name}.npy", img.astype(np.float32))
        for tiles, clip in [(4, 0.0), (4, 0.03125)]:
            kernel = img.shape[0] // tiles
            out = exposure.equalize_adapthist(img, kernel_size=kernel, clip_limit=clip, nbins=256)
            # Per tile, as shares of its pixels: the counts clipped above the limit
            # (scikit-image's integer limit, equal to Pumice's here), the counts
            # scikit-image's clip_histogram hands back (it adds +1 to every bin under
            # the limit per round, so it can hand back more than it clipped), and
            # the count of a code that shares scikit-image's bin with the code
            # below it (that code's map then includes it; Pumice's does not).
            limit = max(int(clip * kernel * kernel), 1) if clip > 0 else kernel * kernel
            sk_bin = np.round(np.arange(256) * 257 * 16383 / 65535) // (1 + 16384 // 256)
            merged = np.flatnonzero(sk_bin[1:] == sk_bin[:-1]) + 1
            share = handed = merge = 0.0
            for ty in range(tiles):
                for tx in range(tiles):
                    t = img[ty * kernel : (ty + 1) * kernel, tx * kernel : (tx + 1) * kernel]
                    h = np.bincount(t.ravel(), minlength=256)
                    share = max(share, float(np.maximum(h - limit, 0).sum()) / t.size)
                    hb = np.bincount(sk_bin[t.ravel()].astype(np.int64), minlength=256)
                    back = clip_histogram(hb.copy(), limit).sum() - np.minimum(hb, limit).sum()
                    handed = max(handed, float(back) / t.size)
                    merge = max(merge, float(h[merged].max()) / t.size)
            cid = f"clahe-{name}-t{tiles}-c{clip}"
            save(folder, f"{cid}.npy", out.astype(np.float32))
            cases.append(
                {
                    "id": cid,
                    "reference": f"skimage.exposure.equalize_adapthist(kernel_size={kernel}, clip_limit={clip}, nbins=256)",
                    "step": f"clahe:tiles={tiles},clip={clip if clip > 0 else 1},bins=256",
                    "input": f"clahe-{name}.npy",
                    "scale": 255.0,
                    "output": f"{cid}.npy",
                    "layout": "gray",
                    "excess_share": share,
                    "handed_share": handed,
                    "merge_share": merge,
                    "tile_side": kernel,
                }
            )
    return cases


def toml_value(v):
    if isinstance(v, str):
        return json.dumps(v)
    if isinstance(v, float):
        return repr(v)
    return str(v)


def to_toml(manifest):
    lines = ["# Generated by tests/reference/make_tone.py; do not edit."]
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
        for key in ("numpy_version", "skimage_version", "colour_version"):
            if committed.get(key) != fresh[key]:
                print(f"note: fixtures made with {key} {committed.get(key)}, checking with {fresh[key]}")
        if len(committed["case"]) != len(fresh["case"]):
            problems.append("the number of cases differs")
        for a, b in zip(committed["case"], fresh["case"]):
            for key in b:
                va, vb = a.get(key), b[key]
                if isinstance(vb, float):
                    if va is None or abs(va - vb) > CHECK_ATOL:
                        problems.append(f"{b['id']}: {key} {va} != {vb}")
                elif va != vb:
                    problems.append(f"{b['id']}: {key} {va!r} != {vb!r}")
        for path in sorted(pathlib.Path(tmp).glob("*.npy")):
            old = FIXTURES / path.name
            if not old.exists():
                problems.append(f"{path.name}: not committed")
                continue
            a, b = np.load(old), np.load(path)
            if a.shape != b.shape or not np.allclose(a, b, rtol=0, atol=CHECK_ATOL):
                problems.append(f"{path.name}: differs")
    for p in problems:
        print(p, file=sys.stderr)
    print(f"{len(fresh['case'])} tone cases checked: {'FAILED' if problems else 'ok'}")
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
