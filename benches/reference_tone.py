#!/usr/bin/env python3
"""Times reference libraries on the workloads of `cargo bench --bench tone`.

Called with the 4000x3000 8-bit luma image the benchmark wrote (raw bytes), so
both sides measure the same data in the same run. Prints one JSON object:
"lib.workload" -> median seconds.

  clahe-8x8            cv2.createCLAHE(clipLimit=2.56, tileGridSize=(8, 8)).apply (uint8);
                       clipLimit is relative to the uniform bin height, so 2.56 = Pumice's
                       clip=0.01 with 256 bins; skimage.exposure.equalize_adapthist(kernel_size
                       = image/8, clip_limit=0.01).
  space-lab            colour.XYZ_to_Lab(colour.sRGB_to_XYZ(rgb)) on float32 rgb = codes/255.
  equalize             cv2.equalizeHist (uint8, 2 threads); skimage.exposure.equalize_hist.
  equalize-u8-codes    the same cv2.equalizeHist time, beside the bench's u8 loop.
  stretch              numpy.percentile(x, [0.5, 99.5]) then numpy.clip((x - lo)/(hi - lo), 0, 1)
                       on float32 x = codes/255.
  binarize-otsu        skimage.filters.threshold_otsu(uint8) and the comparison; cv2.threshold
                       with THRESH_OTSU.
  binarize-sauvola-25  skimage.filters.threshold_sauvola(x, window_size=25) and x > T, x float64.
"""
import argparse
import json
import sys

import numpy as np

from timing import median_time

W, H = 4000, 3000




def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("luma")
    ap.add_argument("rgb")
    ap.add_argument("--repeats", type=int, default=5)
    args = ap.parse_args()
    codes = np.fromfile(args.luma, dtype=np.uint8).reshape(H, W)
    out = {}
    try:
        import cv2

        cv2.setNumThreads(2)
        out["cv2.equalize"] = median_time(lambda: cv2.equalizeHist(codes), args.repeats)
        # The bench's equalize-u8-codes line (a loop on the bytes, not the operator)
        # is shown beside the same OpenCV time.
        out["cv2.equalize-u8-codes"] = out["cv2.equalize"]
        clahe = cv2.createCLAHE(clipLimit=2.56, tileGridSize=(8, 8))
        out["cv2.clahe-8x8"] = median_time(lambda: clahe.apply(codes), args.repeats)
        out["cv2.binarize-otsu"] = median_time(
            lambda: cv2.threshold(codes, 0, 1, cv2.THRESH_BINARY + cv2.THRESH_OTSU), args.repeats)
    except ImportError as e:
        print(f"reference: OpenCV unavailable ({e})", file=sys.stderr)
    x32 = codes.astype(np.float32) / 255.0

    def stretch():
        lo, hi = np.percentile(x32, [0.5, 99.5])
        return np.clip((x32 - lo) / (hi - lo), 0, 1)

    out["numpy.stretch"] = median_time(stretch, args.repeats)
    try:
        from skimage import exposure, filters

        out["skimage.equalize"] = median_time(lambda: exposure.equalize_hist(codes), args.repeats)
        out["skimage.binarize-otsu"] = median_time(lambda: codes > filters.threshold_otsu(codes), args.repeats)
        x = codes.astype(np.float64) / 255.0
        out["skimage.binarize-sauvola-25"] = median_time(
            lambda: x > filters.threshold_sauvola(x, window_size=25), max(1, args.repeats // 2))
    except ImportError as e:
        print(f"reference: scikit-image unavailable ({e})", file=sys.stderr)
    try:
        import colour

        rgb = np.fromfile(args.rgb, dtype=np.uint8).reshape(H, W, 3).astype(np.float32) / 255.0
        out["colour.space-lab"] = median_time(
            lambda: colour.XYZ_to_Lab(colour.sRGB_to_XYZ(rgb)), max(1, args.repeats // 2))
    except ImportError as e:
        print(f"reference: colour-science unavailable ({e})", file=sys.stderr)
    print(json.dumps(out))


if __name__ == "__main__":
    main()
