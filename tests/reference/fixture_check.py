"""The `--check` and write logic shared by the fixture scripts that store
.npy arrays ('<f4') beside a manifest.toml (make_filters, make_morph,
make_canny, make_denoise).

`--check` regenerates every fixture in a temporary folder and compares it with
the committed one: the manifest (library versions only noted, since CI pins
them), the set of files, input arrays exactly, and outputs by the script's own
`compare`. Without `--check` the fixtures are rewritten in place.
"""

import argparse
import math
import pathlib
import sys
import tempfile
import tomllib

import numpy as np


def max_difference(tolerance):
    """A `compare` that allows `tolerance` of absolute difference (cross-version float rounding)."""
    def compare(name, a, b):
        diff = float(np.max(np.abs(a.astype(np.float64) - b.astype(np.float64))))
        return None if diff <= tolerance else f"{name}: differs by {diff:.3e} (tolerance {tolerance:g})"
    return compare


def check(fixtures, generate, *, label, version_keys, is_input, compare, measured_keys=(), free_keys=()):
    """Returns 0 when the committed fixtures match a fresh generation, else 1.

    `is_input(name, manifest)` tells input arrays (compared exactly) from
    outputs (compared by `compare(name, committed, fresh)`, which returns a
    problem or None). Case keys in `measured_keys` may move by 1e-4 relative
    between builds; keys in `free_keys` are not compared (their arrays are).
    """
    problems = []
    with tempfile.TemporaryDirectory() as tmp:
        fresh_dir = pathlib.Path(tmp)
        generate(fresh_dir)
        fresh = tomllib.loads((fresh_dir / "manifest.toml").read_text())
        try:
            committed = tomllib.loads((fixtures / "manifest.toml").read_text())
        except FileNotFoundError:
            print(f"no committed manifest in {fixtures}", file=sys.stderr)
            return 1
        for key in version_keys:
            if committed.get(key) != fresh.get(key):
                print(f"note: fixtures made with {key} {committed.get(key)}, checking with {fresh.get(key)}",
                      file=sys.stderr)

        def strip(m):
            skip = set(measured_keys) | set(free_keys)
            cases = [{k: v for k, v in c.items() if k not in skip} for c in m.get("case", [])]
            return {k: v for k, v in m.items() if k not in version_keys and k != "case"}, cases

        if strip(committed) != strip(fresh):
            problems.append("manifest.toml: the list of cases or their parameters differ")
        for old, new in zip(committed.get("case", []), fresh.get("case", [])):
            for key in measured_keys:
                if key in new and abs(old.get(key, math.inf) - new[key]) > 1e-4 * max(1.0, abs(new[key])):
                    problems.append(f"{new.get('id', '?')}: {key} {old.get(key)} -> {new[key]}")
        fresh_files = {p.name for p in fresh_dir.glob("*.npy")}
        old_files = {p.name for p in fixtures.glob("*.npy")}
        problems += [f"{n}: committed but no longer generated" for n in sorted(old_files - fresh_files)]
        problems += [f"{n}: generated but not committed" for n in sorted(fresh_files - old_files)]
        for name in sorted(fresh_files & old_files):
            a = np.load(fixtures / name, allow_pickle=False)
            b = np.load(fresh_dir / name, allow_pickle=False)
            if a.dtype != np.dtype("<f4") or a.shape != b.shape:
                problems.append(f"{name}: committed {a.dtype} {a.shape}, generated {b.dtype} {b.shape}")
            elif is_input(name, fresh):
                if not np.array_equal(a, b):
                    problems.append(f"{name}: input differs from a fresh draw")
            elif (problem := compare(name, a, b)) is not None:
                problems.append(problem)
    if problems:
        print(f"{len(problems)} mismatch(es) against {fixtures}:", file=sys.stderr)
        for p in problems:
            print(f"  {p}", file=sys.stderr)
        return 1
    print(f"{label} fixtures match: {len(fresh.get('case', []))} cases")
    return 0


def main(doc, fixtures, generate, run_check):
    """The scripts' command line: `--check` runs `run_check()`, else the fixtures are rewritten."""
    parser = argparse.ArgumentParser(description=doc.split("\n\n")[0])
    parser.add_argument("--check", action="store_true", help="regenerate in a temporary folder and compare")
    if parser.parse_args().check:
        return run_check()
    fixtures.mkdir(parents=True, exist_ok=True)
    for old in fixtures.glob("*.npy"):
        old.unlink()
    generate(fixtures)
    manifest = tomllib.loads((fixtures / "manifest.toml").read_text())
    size = sum(p.stat().st_size for p in fixtures.iterdir())
    print(f"wrote {len(manifest.get('case', []))} cases to {fixtures} ({size / 1024:.0f} KiB)")
    return 0
