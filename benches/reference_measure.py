#!/usr/bin/env python3
"""Times reference libraries on the workloads of `cargo bench --bench measure`.

Called with the 4000x3000 8-bit luma image, its noisy copy and the 8-bit RGB
image the benchmark wrote (raw bytes), so both sides measure the same data in
the same run. Prints one JSON object: "lib.workload" -> median seconds.

  ssim-luma       skimage.metrics.structural_similarity(a, b, gaussian_weights=True,
                  sigma=1.5, use_sample_covariance=False, data_range=1) on float64
                  a, b = codes/255 (the conversion is not timed).
  stats-rgb-u8    per channel of the uint8 RGB image: numpy min, max, mean, std,
                  percentile([1, 5, 50, 95, 99]) and the counts of 0 and 255.
  stats-gray-f32  the same on the float32 noisy luma codes/255 (counts of <= 0 and >= 1).
  noise-gray      skimage.restoration.estimate_sigma on float64 noisy luma codes/255.
"""
import argparse
import json
import sys

import numpy as np

from timing import median_time

W, H = 4000, 3000


def stats(x, zero, full):
    return (x.min(), x.max(), x.mean(), x.std(), np.percentile(x, [1, 5, 50, 95, 99]),
            np.count_nonzero(x <= zero), np.count_nonzero(x >= full))


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("luma")
    ap.add_argument("noisy")
    ap.add_argument("rgb")
    ap.add_argument("--repeats", type=int, default=5)
    args = ap.parse_args()
    clean = np.fromfile(args.luma, dtype=np.uint8).reshape(H, W)
    noisy = np.fromfile(args.noisy, dtype=np.uint8).reshape(H, W)
    rgb = np.fromfile(args.rgb, dtype=np.uint8).reshape(H, W, 3)
    out = {}
    channels = [np.ascontiguousarray(rgb[:, :, c]) for c in range(3)]
    out["numpy.stats-rgb-u8"] = median_time(lambda: [stats(c, 0, 255) for c in channels], args.repeats)
    x32 = noisy.astype(np.float32) / 255.0
    out["numpy.stats-gray-f32"] = median_time(lambda: stats(x32, 0.0, 1.0), args.repeats)
    try:
        from skimage.metrics import structural_similarity
        from skimage.restoration import estimate_sigma

        a, b = clean / 255.0, noisy / 255.0
        out["skimage.ssim-luma"] = median_time(
            lambda: structural_similarity(a, b, gaussian_weights=True, sigma=1.5,
                                          use_sample_covariance=False, data_range=1.0), args.repeats)
        out["skimage.noise-gray"] = median_time(lambda: estimate_sigma(b), args.repeats)
    except ImportError as e:
        print(f"reference: scikit-image or PyWavelets unavailable ({e})", file=sys.stderr)
    print(json.dumps(out))


if __name__ == "__main__":
    main()
