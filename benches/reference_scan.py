#!/usr/bin/env python3
"""Times reference libraries on the workloads of `cargo bench --bench scan`.

Called with the 2480x3508 8-bit page and its 0/1 ink mask the benchmark wrote
(raw bytes), so both sides measure the same data in the same run. Prints one
JSON object: "lib.workload" -> median seconds.

  label        scipy.ndimage.label(mask, structure=numpy.ones((3, 3)));
               skimage.measure.label(mask, connectivity=2).
  dust-binary  skimage.morphology.remove_small_objects(mask, max_size=12, connectivity=2)
               (Pumice: dust:12,polarity=light on the 0/1 page).
  dust-gray    skimage.morphology.area_closing(codes, area_threshold=13, connectivity=2)
               (Pumice: dust:12 on the 8-bit page).
"""
import argparse
import json
import sys

import numpy as np

from timing import median_time

W, H = 2480, 3508


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("page")
    ap.add_argument("ink")
    ap.add_argument("--repeats", type=int, default=5)
    args = ap.parse_args()
    codes = np.fromfile(args.page, dtype=np.uint8).reshape(H, W)
    mask = np.fromfile(args.ink, dtype=np.uint8).reshape(H, W).astype(bool)
    out = {}
    try:
        from scipy import ndimage

        ones = np.ones((3, 3), dtype=int)
        out["scipy.label"] = median_time(lambda: ndimage.label(mask, structure=ones), args.repeats)
    except ImportError as e:
        print(f"reference: scipy unavailable ({e})", file=sys.stderr)
    try:
        from skimage import measure, morphology

        out["skimage.label"] = median_time(lambda: measure.label(mask, connectivity=2), args.repeats)
        out["skimage.dust-binary"] = median_time(
            lambda: morphology.remove_small_objects(mask, max_size=12, connectivity=2), args.repeats)
        out["skimage.dust-gray"] = median_time(
            lambda: morphology.area_closing(codes, area_threshold=13, connectivity=2), max(1, args.repeats // 5))
    except ImportError as e:
        print(f"reference: scikit-image unavailable ({e})", file=sys.stderr)
    print(json.dumps(out))


if __name__ == "__main__":
    sys.exit(main())
