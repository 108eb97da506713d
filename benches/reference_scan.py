#!/usr/bin/env python3
"""Times reference libraries on the workloads of `cargo bench --bench scan`.

Called with the 2480x3508 8-bit page and its 0/1 ink mask the benchmark wrote
(raw bytes), so both sides measure the same data in the same run. Prints one
JSON object: "lib.workload" -> median seconds.

  rotate-bicubic, rotate-bilinear
               cv2.warpAffine(page as float32 in [0, 1], the turn by 1.7 degrees
               counter-clockwise about the centre, INTER_CUBIC / INTER_LINEAR,
               BORDER_CONSTANT 1.0) with 2 threads (OpenCV's cubic is Keys
               a = -0.75, Pumice's Catmull-Rom a = -0.5: the same 4x4 taps);
               scipy.ndimage.rotate(order=1, reshape=False) for bilinear.
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
    page = codes.astype(np.float32) / 255.0
    try:
        import cv2

        cv2.setNumThreads(2)
        m = cv2.getRotationMatrix2D(((W - 1) / 2.0, (H - 1) / 2.0), 1.7, 1.0)
        for name, flag in [("rotate-bicubic", cv2.INTER_CUBIC), ("rotate-bilinear", cv2.INTER_LINEAR)]:
            out[f"cv2.{name}"] = median_time(
                lambda flag=flag: cv2.warpAffine(page, m, (W, H), flags=flag, borderMode=cv2.BORDER_CONSTANT,
                                                 borderValue=1.0), args.repeats)
    except ImportError as e:
        print(f"reference: OpenCV unavailable ({e})", file=sys.stderr)
    try:
        from scipy import ndimage

        out["scipy.rotate-bilinear"] = median_time(
            lambda: ndimage.rotate(page, 1.7, reshape=False, order=1, mode="constant", cval=1.0),
            max(1, args.repeats // 5))

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
