#!/usr/bin/env python3
"""Times reference libraries on the workloads of `cargo bench --bench filters`.

Called by the benchmark with the .npy files it wrote (rgb.npy: 3 x H x W float32
linear planes; rgb8.npy: H x W x 3 uint8; gray.npy: H x W float32; gray16.npy:
H x W uint16; gray8.npy: H x W uint8, the gray plane in 8-bit codes), so both sides measure the same data in the same run. Prints one
JSON object: "lib.workload" -> median seconds for the whole image.

  gauss-2, -8, -32   cv2.GaussianBlur(plane, (2r+1, 2r+1), sigma, BORDER_REFLECT) per
                     float32 plane, r = floor(4 sigma + 0.5); scipy.ndimage.gaussian_filter
                     (truncate 4, mode 'reflect') for sigma 2 and 8.
  box-5              cv2.blur(plane, (11, 11), BORDER_REFLECT) per float32 plane;
                     scipy.ndimage.uniform_filter(size=11, mode='reflect') per plane.
  median-5x5         cv2.medianBlur(rgb8, 5) on the interleaved 8-bit image;
                     scipy.ndimage.median_filter(size=5) per plane, timed on a
                     1000 x 750 crop and scaled by the area (x16) - the whole image
                     takes tens of seconds.
  median-r15-16bit   scipy.ndimage.median_filter(gray16, size=31, mode='reflect') on
                     a 500 x 375 crop, scaled by the area (x64). OpenCV's medianBlur
                     takes 16-bit data only up to ksize 5, so it has no figure here.
  sobel-magnitude    cv2.Sobel(gray, CV_32F, 1, 0) and (0, 1) (ksize 3,
                     BORDER_REFLECT) + cv2.magnitude; scipy.ndimage.sobel on both
                     axes + numpy.hypot.
  canny-1            skimage.feature.canny(gray, sigma=1, low_threshold=0.1,
                     high_threshold=0.2, mode='reflect') on float32 (the same
                     algorithm, single-threaded); cv2.GaussianBlur(gray8, (9, 9), 1,
                     BORDER_REFLECT) + cv2.Canny(.., 25.5, 51, L2gradient=True) on
                     the 8-bit codes (OpenCV's Canny takes only u8; thresholds
                     scaled by 255; it thins without interpolation); its row is
                     labelled cv2u8.
  bilateral-luma     cv2.bilateralFilter(rgb, 9, 0.1, 2, BORDER_REFLECT) on the interleaved
                     encoded float32 image (rgb-encoded.npy): one weight per neighbour for
                     the three channels, from the L1 colour distance (Pumice: from luma).
  bilateral-channels cv2.bilateralFilter(plane, 9, 0.1, 2, BORDER_REFLECT) per plane.
  nlmeans            skimage.restoration.denoise_nl_means(noisy1000, patch_size=7,
                     patch_distance=10, h=0.08, fast_mode=True) (single-threaded);
                     cv2.fastNlMeansDenoising(u8 codes, h=0.08*255, templateWindowSize=7,
                     searchWindowSize=21): another algorithm on 8-bit data, for context.
OpenCV runs with 2 threads (cv2.setNumThreads(2)); scipy is single-threaded.
"""
import argparse
import json
import sys

import numpy as np

from timing import median_time




def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("folder")
    ap.add_argument("--repeats", type=int, default=5)
    args = ap.parse_args()
    rgb = np.load(f"{args.folder}/rgb.npy")
    rgb8 = np.load(f"{args.folder}/rgb8.npy")
    gray = np.load(f"{args.folder}/gray.npy")
    gray16 = np.load(f"{args.folder}/gray16.npy")
    gray8 = np.load(f"{args.folder}/gray8.npy")
    h, w = gray.shape
    out = {}
    try:
        import cv2

        cv2.setNumThreads(2)
        for sigma in (2, 8, 32):
            k = 2 * int(4 * sigma + 0.5) + 1
            out[f"cv2.gauss-{sigma}"] = median_time(
                lambda: [cv2.GaussianBlur(p, (k, k), sigma, borderType=cv2.BORDER_REFLECT) for p in rgb],
                args.repeats,
            )
        out["cv2.box-5"] = median_time(
            lambda: [cv2.blur(p, (11, 11), borderType=cv2.BORDER_REFLECT) for p in rgb], args.repeats
        )
        out["cv2.median-5x5"] = median_time(lambda: cv2.medianBlur(rgb8, 5), args.repeats)

        def cv_sobel():
            gx = cv2.Sobel(gray, cv2.CV_32F, 1, 0, ksize=3, borderType=cv2.BORDER_REFLECT)
            gy = cv2.Sobel(gray, cv2.CV_32F, 0, 1, ksize=3, borderType=cv2.BORDER_REFLECT)
            return cv2.magnitude(gx, gy)

        out["cv2.sobel-magnitude"] = median_time(cv_sobel, args.repeats)

        def cv_canny():
            smooth = cv2.GaussianBlur(gray8, (9, 9), 1.0, borderType=cv2.BORDER_REFLECT)
            return cv2.Canny(smooth, 25.5, 51.0, L2gradient=True)

        out["cv2u8.canny-1"] = median_time(cv_canny, args.repeats)
        enc = np.load(f"{args.folder}/rgb-encoded.npy")
        enc_hwc = np.ascontiguousarray(np.moveaxis(enc, 0, -1))
        out["cv2.bilateral-luma"] = median_time(
            lambda: cv2.bilateralFilter(enc_hwc, 9, 0.1, 2, borderType=cv2.BORDER_REFLECT), args.repeats
        )
        out["cv2.bilateral-channels"] = median_time(
            lambda: [cv2.bilateralFilter(p, 9, 0.1, 2, borderType=cv2.BORDER_REFLECT) for p in enc], args.repeats
        )
        noisy = np.load(f"{args.folder}/noisy1000.npy")
        codes = np.clip(np.round(noisy * 255), 0, 255).astype(np.uint8)
        out["cv2.nlmeans"] = median_time(
            lambda: cv2.fastNlMeansDenoising(codes, None, 0.08 * 255, 7, 21), args.repeats
        )
    except ImportError as e:
        print(f"opencv not timed: {e}", file=sys.stderr)
    try:
        import scipy.ndimage as ndi

        for sigma in (2, 8):
            out[f"scipy.gauss-{sigma}"] = median_time(
                lambda: [ndi.gaussian_filter(p, sigma, mode="reflect", truncate=4.0) for p in rgb], 3
            )
        out["scipy.box-5"] = median_time(
            lambda: [ndi.uniform_filter(p, size=11, mode="reflect") for p in rgb], 3
        )
        crop = rgb8[:750, :1000]
        scale = (h * w) / crop[..., 0].size
        out["scipy.median-5x5"] = scale * median_time(
            lambda: [ndi.median_filter(crop[..., c], size=5, mode="reflect") for c in range(3)], 3
        )
        crop16 = gray16[:375, :500]
        scale16 = (h * w) / crop16.size
        out["scipy.median-r15-16bit"] = scale16 * median_time(
            lambda: ndi.median_filter(crop16, size=31, mode="reflect"), 1
        )
        out["scipy.sobel-magnitude"] = median_time(
            lambda: np.hypot(ndi.sobel(gray, axis=1, mode="reflect"), ndi.sobel(gray, axis=0, mode="reflect")),
            3,
        )
    except ImportError as e:
        print(f"scipy not timed: {e}", file=sys.stderr)
    try:
        import skimage.feature

        out["skimage.canny-1"] = median_time(
            lambda: skimage.feature.canny(gray, sigma=1.0, low_threshold=0.1, high_threshold=0.2, mode="reflect"),
            3,
        )
        from skimage.restoration import denoise_nl_means

        noisy = np.load(f"{args.folder}/noisy1000.npy")
        out["skimage.nlmeans"] = median_time(
            lambda: denoise_nl_means(noisy, patch_size=7, patch_distance=10, h=0.08, fast_mode=True), 3
        )
    except ImportError as e:
        print(f"scikit-image not timed: {e}", file=sys.stderr)
    print(json.dumps(out))


if __name__ == "__main__":
    main()
