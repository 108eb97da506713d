#!/usr/bin/env python3
"""Times reference resampling on the files `cargo bench --bench geometry` wrote.

Prints {"lib.workload": median seconds}. Workloads (RGB 8-bit unless noted):
  lanczos3-1000x750, lanczos3-1333x1000 (from 4000x3000):
      PIL Image.resize(size, Image.Resampling.LANCZOS); cv2.resize(INTER_LANCZOS4)
      (OpenCV's Lanczos has 8 fixed taps and no antialiasing, so it does less work).
  bicubic-up-4000x3000 (from 1000x750):
      PIL BICUBIC; cv2.resize(INTER_CUBIC) on uint8 and on float32 ("cv2-f32").
OpenCV runs with 2 threads.
"""
import json
import sys

from timing import median_time




def main():
    big_path, small_path = sys.argv[1], sys.argv[2]
    out = {}
    from PIL import Image

    big = Image.open(big_path).convert("RGB")
    small = Image.open(small_path).convert("RGB")
    big.load()
    small.load()
    for (w, h) in ((1000, 750), (1333, 1000)):
        out[f"pillow.lanczos3-{w}x{h}"] = median_time(lambda: big.resize((w, h), Image.Resampling.LANCZOS))
    out["pillow.bicubic-up-4000x3000"] = median_time(lambda: small.resize((4000, 3000), Image.Resampling.BICUBIC))
    try:
        import cv2
        import numpy as np

        cv2.setNumThreads(2)
        b, s = np.asarray(big), np.asarray(small)
        for (w, h) in ((1000, 750), (1333, 1000)):
            out[f"cv2.lanczos3-{w}x{h}"] = median_time(lambda: cv2.resize(b, (w, h), interpolation=cv2.INTER_LANCZOS4))
        out["cv2.bicubic-up-4000x3000"] = median_time(lambda: cv2.resize(s, (4000, 3000), interpolation=cv2.INTER_CUBIC))
        sf = s.astype(np.float32) / 255
        out["cv2-f32.bicubic-up-4000x3000"] = median_time(
            lambda: cv2.resize(sf, (4000, 3000), interpolation=cv2.INTER_CUBIC))
    except ImportError as e:
        print(f"reference: OpenCV unavailable ({e})", file=sys.stderr)
    json.dump(out, sys.stdout)


if __name__ == "__main__":
    main()
