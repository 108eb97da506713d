#!/usr/bin/env python3
"""Reference fixtures for Pumice's linear filters, computed with scipy.ndimage.

Reference functions (scipy, version pinned in requirements.txt and recorded in
the manifest):

* scipy.ndimage.gaussian_filter(input, sigma, mode=MODE, cval=CVAL, truncate=T)
  for sigma 0.7, 2 and 5 with truncate 4, and sigma 2 with truncate 2;
* scipy.ndimage.convolve(input, weights, mode=MODE, cval=CVAL), origin 0, for a
  non-symmetric 3x3 kernel, a separable 5x5 kernel (an outer product) and a
  3x5 (rows x columns) kernel;

each for every mode: reflect, mirror, nearest, wrap and constant (cval 0.25),
which Pumice calls reflect, mirror, replicate, wrap and constant (fill 0.25).

Inputs are drawn with numpy.random.default_rng and fixed seeds, stored as
float32; the reference is computed on the float64 copy of those float32 values
(so Pumice reads exactly the same input) and its result cast to float32.

Every file is a .npy array (format 1.0, '<f4', C order, 2-D: rows x columns).
manifest.json lists every case; manifest.toml holds the same data for the Rust
test, which parses it with the `toml` crate.

    python tests/reference/make_fixtures.py           # write tests/reference/fixtures/
    python tests/reference/make_fixtures.py --check   # regenerate in a temporary
                                                      # folder and compare; exit 1 on mismatch
"""

import argparse
import json
import pathlib
import sys
import tempfile
import tomllib

import numpy as np
import scipy
import scipy.ndimage as ndi

HERE = pathlib.Path(__file__).resolve().parent
FIXTURES = HERE / "fixtures"

# Cross-version tolerance for --check. The references are computed in float64
# and rounded to float32; a different numpy/scipy build may sum in another
# order or use other libm routines, which moves the float64 result by ~1e-16
# and can at most flip the float32 rounding by one unit in the last place.
# Every output here has magnitude < 1 (the kernels below have sum |w| <= 1 and
# the inputs lie in [0, 1]), where one float32 ulp is <= 2^-24 ~ 6e-8. So 1e-7
# absorbs only that cross-version float64 rounding, nothing more.
CHECK_TOLERANCE = 1e-7

# scipy.ndimage mode -> Pumice border name (tests/../src/tile/border.rs).
MODES = [
    ("reflect", "reflect"),
    ("mirror", "mirror"),
    ("nearest", "replicate"),
    ("wrap", "wrap"),
    ("constant", "constant"),
]
CVAL = 0.25  # only used by mode='constant'; recorded as 0.0 for the others

# (sigma, truncate) for scipy.ndimage.gaussian_filter.
GAUSS = [(0.7, 4.0), (2.0, 4.0), (5.0, 4.0), (2.0, 2.0)]

# Kernels for scipy.ndimage.convolve, rows x columns. Entries are dyadic
# rationals (exact in float32 and float64) with sum |w| <= 1, so outputs stay
# below 1 in magnitude (see CHECK_TOLERANCE).
_COL5 = np.array([1, 2, 3.5, -1, 0.5], dtype=np.float64) / 8
_ROW5 = np.array([0.5, 1, 4, 2, -0.5], dtype=np.float64) / 8
KERNELS = {
    # Non-symmetric, rank 3: catches a missing 180-degree turn and transposition.
    "k3x3": np.array([[1, 2, 0], [-1, 3, 2], [0, -1, 4]], dtype=np.float64) / 16,
    # Rank 1 (outer product of two non-symmetric vectors): Pumice runs it as two passes.
    "k5x5sep": np.outer(_COL5, _ROW5),
    # 3 rows x 5 columns, not rank 1: different halos along the two axes.
    "k3x5": np.array([[1, 0, -2, 1, 3], [2, 4, 1, 0, -1], [0, -1, 2, 3, 1]], dtype=np.float64) / 32,
}


def make_inputs():
    """Deterministic float32 inputs, name -> 2-D array (rows x columns)."""
    impulse = np.zeros((9, 11), dtype=np.float32)
    impulse[3, 6] = 1.0  # off centre, so a flipped or shifted kernel shows
    return {
        # uniform [0, 1) noise, 47 rows x 61 columns (61 wide, 47 high)
        "noise": np.random.default_rng(20240601).random((47, 61), dtype=np.float32),
        # one row of 37 samples: the vertical pass sees only halo
        "row": np.random.default_rng(11).random((1, 37), dtype=np.float32),
        # one column of 29 samples: the horizontal pass sees only halo
        "column": np.random.default_rng(12).random((29, 1), dtype=np.float32),
        # 2x2: every kernel here is wider than the image
        "tiny": np.random.default_rng(13).random((2, 2), dtype=np.float32),
        "impulse": impulse,
    }


def make_cases(inputs):
    """Yields (case dict, float32 output array) for every case, in a fixed order."""
    for sigma, truncate in GAUSS:
        for mode, border in MODES:
            cval = CVAL if mode == "constant" else 0.0
            for name, x in inputs.items():
                out = ndi.gaussian_filter(
                    x.astype(np.float64), sigma, mode=mode, cval=cval, truncate=truncate
                )
                case = {
                    "id": f"gauss-sigma{sigma:g}-truncate{truncate:g}-{border}-{name}",
                    "operator": "gauss",
                    "reference": "scipy.ndimage.gaussian_filter",
                    "call": f"gaussian_filter(x, sigma={sigma!r}, mode={mode!r}, "
                    f"cval={cval!r}, truncate={truncate!r})",
                    "sigma": sigma,
                    "truncate": truncate,
                    "mode": mode,
                    "border": border,
                    "cval": cval,
                }
                yield case, name, x, out
    for kname, k in KERNELS.items():
        for mode, border in MODES:
            cval = CVAL if mode == "constant" else 0.0
            for name, x in inputs.items():
                out = ndi.convolve(x.astype(np.float64), k, mode=mode, cval=cval)
                case = {
                    "id": f"convolve-{kname}-{border}-{name}",
                    "operator": "convolve",
                    "reference": "scipy.ndimage.convolve",
                    "call": f"convolve(x, weights={kname}, mode={mode!r}, cval={cval!r})",
                    "kernel": kname,  # a key of the manifest's `kernels` table
                    "mode": mode,
                    "border": border,
                    "cval": cval,
                }
                yield case, name, x, out


def save(path, a):
    a = np.ascontiguousarray(a, dtype="<f4")
    assert a.ndim == 2
    np.save(path, a, allow_pickle=False)


def toml_value(v):
    if isinstance(v, bool):
        return "true" if v else "false"
    if isinstance(v, float):
        return repr(v)  # shortest round-trip form, e.g. 0.7, 2.0, -0.0625: valid TOML floats
    if isinstance(v, int):
        return str(v)
    if isinstance(v, str):
        return json.dumps(v)  # a JSON string is a valid TOML basic string for this text
    if isinstance(v, list):
        return "[" + ", ".join(toml_value(i) for i in v) + "]"
    raise TypeError(f"no TOML form for {v!r}")


def to_json(manifest):
    """JSON with one top-level entry, and one case, per line: small and diffable."""
    items = [f" {json.dumps(k)}: {json.dumps(v)}" for k, v in manifest.items() if k != "case"]
    cases = ",\n  ".join(json.dumps(c) for c in manifest["case"])
    items.append(f' "case": [\n  {cases}\n ]')
    return "{\n" + ",\n".join(items) + "\n}\n"


def to_toml(manifest):
    lines = [
        "# Generated by tests/reference/make_fixtures.py; do not edit. Same data as manifest.json.",
    ]
    for key, value in manifest.items():
        if key not in ("case", "kernels"):
            lines.append(f"{key} = {toml_value(value)}")
    lines.append("")
    lines.append("[kernels]")
    for key, value in manifest["kernels"].items():
        lines.append(f"{key} = {toml_value(value)}")
    for case in manifest["case"]:
        lines.append("")
        lines.append("[[case]]")
        for key, value in case.items():
            lines.append(f"{key} = {toml_value(value)}")
    return "\n".join(lines) + "\n"


def generate(folder):
    """Writes every input, output and both manifests into `folder`."""
    folder.mkdir(parents=True, exist_ok=True)
    inputs = make_inputs()
    for name, x in inputs.items():
        save(folder / f"input-{name}.npy", x)
    cases = []
    for case, name, x, out in make_cases(inputs):
        out32 = out.astype(np.float32)
        # CHECK_TOLERANCE relies on this (one float32 ulp below 1 is <= 2^-24).
        assert np.max(np.abs(out32)) < 1.0, f"{case['id']}: output reaches 1 in magnitude"
        case["input"] = f"input-{name}.npy"
        case["output"] = f"{case['id']}.npy"
        case["shape"] = list(x.shape)  # rows, columns
        save(folder / case["output"], out32)
        cases.append(case)
    manifest = {
        "generator": "tests/reference/make_fixtures.py",
        "numpy_version": np.__version__,
        "scipy_version": scipy.__version__,
        "layout": ".npy format 1.0, '<f4', C order, shape = [rows, columns]",
        # convolve weights, rows x columns, as passed to scipy.ndimage.convolve
        "kernels": {name: k.tolist() for name, k in KERNELS.items()},
        "case": cases,
    }
    (folder / "manifest.json").write_text(to_json(manifest))
    (folder / "manifest.toml").write_text(to_toml(manifest))
    return manifest


VERSION_KEYS = ("numpy_version", "scipy_version")


def check():
    """Regenerates into a temporary folder and compares with FIXTURES."""
    problems = []
    with tempfile.TemporaryDirectory() as tmp:
        fresh_dir = pathlib.Path(tmp)
        fresh = generate(fresh_dir)
        try:
            committed = json.loads((FIXTURES / "manifest.json").read_text())
        except FileNotFoundError:
            print(f"no committed manifest in {FIXTURES}", file=sys.stderr)
            return 1
        for key in VERSION_KEYS:
            if committed.get(key) != fresh[key]:
                print(
                    f"note: fixtures made with {key} {committed.get(key)}, checking with {fresh[key]}",
                    file=sys.stderr,
                )
        strip = lambda m: {k: v for k, v in m.items() if k not in VERSION_KEYS}
        if strip(committed) != strip(fresh):
            problems.append("manifest.json: the list of cases or their parameters differ")
        # The TOML manifest must say the same as the committed JSON one.
        toml_committed = tomllib.loads((FIXTURES / "manifest.toml").read_text())
        if toml_committed != committed:
            problems.append("manifest.toml does not hold the same data as manifest.json")

        fresh_files = {p.name for p in fresh_dir.glob("*.npy")}
        old_files = {p.name for p in FIXTURES.glob("*.npy")}
        for name in sorted(old_files - fresh_files):
            problems.append(f"{name}: committed but no longer generated")
        for name in sorted(fresh_files - old_files):
            problems.append(f"{name}: generated but not committed")
        inputs = {c["input"] for c in fresh["case"]}
        for name in sorted(fresh_files & old_files):
            a = np.load(FIXTURES / name, allow_pickle=False)
            b = np.load(fresh_dir / name, allow_pickle=False)
            if a.dtype != np.dtype("<f4") or a.shape != b.shape:
                problems.append(f"{name}: committed {a.dtype} {a.shape}, generated {b.dtype} {b.shape}")
                continue
            if name in inputs:
                if not np.array_equal(a, b):  # inputs are drawn, not computed: bit for bit
                    problems.append(f"{name}: input differs from a fresh draw")
                continue
            diff = float(np.max(np.abs(a.astype(np.float64) - b.astype(np.float64))))
            if not diff <= CHECK_TOLERANCE:
                problems.append(f"{name}: differs by {diff:.3e} (tolerance {CHECK_TOLERANCE:g})")
    if problems:
        print(f"{len(problems)} mismatch(es) against {FIXTURES}:", file=sys.stderr)
        for p in problems:
            print(f"  {p}", file=sys.stderr)
        return 1
    print(f"fixtures match: {len(fresh['case'])} cases (numpy {np.__version__}, scipy {scipy.__version__})")
    return 0


def main():
    parser = argparse.ArgumentParser(description=__doc__.split("\n\n")[0])
    parser.add_argument(
        "--check",
        action="store_true",
        help="regenerate in a temporary folder and compare with the committed fixtures",
    )
    args = parser.parse_args()
    if args.check:
        return check()
    for old in FIXTURES.glob("*.npy"):
        old.unlink()
    manifest = generate(FIXTURES)
    size = sum(p.stat().st_size for p in FIXTURES.iterdir())
    print(f"wrote {len(manifest['case'])} cases to {FIXTURES} ({size / 1024:.0f} KiB)")
    return 0


if __name__ == "__main__":
    sys.exit(main())
