#!/usr/bin/env python3
"""Reference fixtures for `pumice stack`, computed with numpy (version pinned
in requirements.txt and recorded in the manifest).

Fifteen invented 16-bit frames of 32×24 pixels (seeded
numpy.random.default_rng): a smooth pattern, Poisson-like noise, and a few
"cosmic ray" outliers at full scale so that clipping has work to do. Each
mode's reference along the frame axis (axis 0), in code units, float64:

* mean        <->  numpy.mean(axis=0)
* median      <->  numpy.median(axis=0) (odd count; also on the first 14
                   frames, where numpy averages the two middle values)
* min, max    <->  numpy.min(axis=0), numpy.max(axis=0)
* sigma-clip  <->  written out below in numpy, following the definition of
                   astropy.stats.sigma_clip (astropy 6.x documentation;
                   astropy is not a pinned dependency): each round takes the
                   median and the population standard deviation (ddof=0) of
                   the kept values and keeps those within
                   [median − κ·std, median + κ·std] (bounds inclusive); rounds
                   repeat until none is rejected or `iterations` have run; a
                   round that would reject every value of a pixel is not
                   applied. Then the mean of the kept values.

Results are stored as value = result / 65535 (the [0, 1] scale Pumice
decodes 16-bit codes to), computed in float64 and saved as float32. The frames
are stored as their codes in float32 (exact), stacked vertically: frame k is
rows 24k … 24k+23. Every file is a .npy array (format 1.0, '<f4', C order,
2-D). manifest.toml lists the cases.

    python tests/reference/make_stack.py           # write tests/reference/fixtures/stack/
    python tests/reference/make_stack.py --check   # regenerate in a temporary folder
                                                   # and compare; exit 1 on mismatch
"""

import argparse
import pathlib
import sys
import tempfile
import tomllib

import numpy as np

HERE = pathlib.Path(__file__).resolve().parent
FIXTURES = HERE / "fixtures" / "stack"

FRAMES, HEIGHT, WIDTH = 15, 24, 32
MAX = 65535.0

# --check tolerance between numpy versions, on [0, 1] values: one float32 ulp
# at 1.0 (summation order may differ); common practice, no published source.
CHECK_ATOL = 1.2e-7


def frames():
    rng = np.random.default_rng(20261202)
    y, x = np.mgrid[0:HEIGHT, 0:WIDTH]
    pattern = 20000 + 8000 * np.sin(x / 5.0) * np.cos(y / 7.0) + 300 * x
    stack = rng.normal(pattern, 400.0, size=(FRAMES, HEIGHT, WIDTH))
    # Outliers: about 2 % of samples set to full scale (hot pixels, cosmic rays).
    hits = rng.random(stack.shape) < 0.02
    stack[hits] = MAX
    # A few dark dropouts too.
    stack[rng.random(stack.shape) < 0.005] = 0
    return np.clip(np.round(stack), 0, MAX).astype(np.uint16)


def sigma_clipped_mean(stack, kappa, iterations):
    x = stack.astype(np.float64)
    keep = np.ones(x.shape, dtype=bool)
    for _ in range(iterations):
        masked = np.where(keep, x, np.nan)
        centre = np.nanmedian(masked, axis=0)
        std = np.nanstd(masked, axis=0)  # ddof=0
        new = keep & (x >= centre - kappa * std) & (x <= centre + kappa * std)
        emptied = ~new.any(axis=0)
        new[:, emptied] = keep[:, emptied]
        if (new == keep).all():
            break
        keep = new
    return np.nanmean(np.where(keep, x, np.nan), axis=0)


def save(folder, name, a):
    a = np.ascontiguousarray(a, dtype="<f4")
    assert a.ndim == 2
    np.save(folder / name, a, allow_pickle=False)


def generate(folder):
    folder.mkdir(parents=True, exist_ok=True)
    stack = frames()
    save(folder, "frames.npy", stack.reshape(FRAMES * HEIGHT, WIDTH).astype(np.float32))
    cases = []

    def case(cid, mode, reference, result, count=FRAMES, kappa=None, iterations=None):
        save(folder, f"{cid}.npy", result / MAX)
        c = {"id": cid, "mode": mode, "reference": reference, "frames": count, "output": f"{cid}.npy"}
        if kappa is not None:
            c["kappa"] = float(kappa)
            c["iterations"] = int(iterations)
        cases.append(c)

    case("mean", "mean", "numpy.mean(axis=0)", stack.mean(axis=0, dtype=np.float64))
    case("median", "median", "numpy.median(axis=0)", np.median(stack, axis=0).astype(np.float64))
    case(
        "median-even",
        "median",
        "numpy.median(axis=0) on the first 14 frames",
        np.median(stack[:14], axis=0).astype(np.float64),
        count=14,
    )
    case("min", "min", "numpy.min(axis=0)", stack.min(axis=0).astype(np.float64))
    case("max", "max", "numpy.max(axis=0)", stack.max(axis=0).astype(np.float64))
    for kappa, iterations in [(3.0, 5), (2.0, 1), (1.5, 10)]:
        case(
            f"sigma-clip-k{kappa}-i{iterations}",
            "sigma-clip",
            "kappa-sigma clipping about the median in numpy (astropy.stats.sigma_clip definition)",
            sigma_clipped_mean(stack, kappa, iterations),
            kappa=kappa,
            iterations=iterations,
        )
    manifest = {"numpy_version": np.__version__, "height": HEIGHT, "width": WIDTH, "case": cases}
    lines = ["# Generated by tests/reference/make_stack.py; do not edit."]
    lines += [f'numpy_version = "{np.__version__}"', f"height = {HEIGHT}", f"width = {WIDTH}"]
    for c in cases:
        lines += ["", "[[case]]"]
        for k, v in c.items():
            lines.append(f'{k} = "{v}"' if isinstance(v, str) else f"{k} = {v}")
    (folder / "manifest.toml").write_text("\n".join(lines) + "\n")
    return manifest


def check():
    problems = []
    with tempfile.TemporaryDirectory() as tmp:
        fresh_dir = pathlib.Path(tmp)
        fresh = generate(fresh_dir)
        committed = tomllib.loads((FIXTURES / "manifest.toml").read_text())
        if committed.get("numpy_version") != fresh["numpy_version"]:
            print(f"note: fixtures made with numpy {committed.get('numpy_version')}, checking with {fresh['numpy_version']}")
        if [c["id"] for c in committed["case"]] != [c["id"] for c in fresh["case"]]:
            problems.append("the cases differ")
        for name in ["frames.npy"] + [c["output"] for c in fresh["case"]]:
            a, b = np.load(FIXTURES / name), np.load(fresh_dir / name)
            if a.shape != b.shape or not np.allclose(a, b, rtol=0, atol=CHECK_ATOL):
                problems.append(f"{name}: differs by more than {CHECK_ATOL}")
    for p in problems:
        print(p)
    print("stack fixtures: " + ("MISMATCH" if problems else "ok"))
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
