#!/usr/bin/env python3
"""Times reference libraries on the workloads of `cargo bench --bench throughput`.

Called by the benchmark with the image it generated, so both measure the same
data in the same run. Prints one JSON object: workload name -> median seconds.

Workloads (4000x3000 RGB):
  gauss-2, gauss-8   scipy.ndimage.gaussian_filter (float32 planes, truncate=4,
                     mode='reflect') and cv2.GaussianBlur (float32, ksize 2r+1 with
                     r = floor(4*sigma + 0.5), BORDER_REFLECT), 2 threads for OpenCV.
  jpeg-decode, jpeg-encode   cv2.imdecode / cv2.imencode (quality 90) and
                     Pillow Image.open().load() / Image.save(quality=90).
  png-decode, png-encode     the same for PNG at a fast deflate level
                     (cv2.IMWRITE_PNG_COMPRESSION=1, Pillow compress_level=1).
  convolve-3x3       cv2.filter2D (float32, BORDER_REFLECT; the kernel is
                     symmetric, so correlation = convolution) and
                     scipy.ndimage.convolve (mode='reflect'), kernel 0 -1 0;-1 5 -1;0 -1 0.
  convolve-5x5-separable  cv2.sepFilter2D and scipy.ndimage.convolve with the
                     binomial 1 4 6 4 1 outer product / 256.
  gray               cv2.cvtColor(COLOR_RGB2GRAY) on float32, numpy weighted sum
                     with the BT.709 weights.
  invert, gamma      numpy 1 - x and np.power(x, 1/2.2) on float32 planes;
                     cv2.pow(x, 1/2.2) for gamma.
  flip, rotate-90, crop   cv2.flip / cv2.rotate and numpy (fliplr, rot90,
                     slicing), each materialised as a contiguous copy.
"""
import argparse
import io
import json
import sys

from timing import median_time




def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("png")
    ap.add_argument("jpeg")
    ap.add_argument("--repeats", type=int, default=5)
    args = ap.parse_args()

    out = {}
    import numpy as np

    png_bytes = open(args.png, "rb").read()
    jpeg_bytes = open(args.jpeg, "rb").read()

    try:
        import cv2

        cv2.setNumThreads(2)
        buf_png = np.frombuffer(png_bytes, np.uint8)
        buf_jpg = np.frombuffer(jpeg_bytes, np.uint8)
        img = cv2.imdecode(buf_png, cv2.IMREAD_COLOR)
        f32 = img.astype(np.float32) / 255.0
        out["cv2.jpeg-decode"] = median_time(lambda: cv2.imdecode(buf_jpg, cv2.IMREAD_COLOR), args.repeats)
        out["cv2.jpeg-encode"] = median_time(
            lambda: cv2.imencode(".jpg", img, [cv2.IMWRITE_JPEG_QUALITY, 90]), args.repeats)
        out["cv2.png-decode"] = median_time(lambda: cv2.imdecode(buf_png, cv2.IMREAD_COLOR), args.repeats)
        out["cv2.png-encode"] = median_time(
            lambda: cv2.imencode(".png", img, [cv2.IMWRITE_PNG_COMPRESSION, 1]), args.repeats)
        for sigma in (2, 8):
            r = int(4 * sigma + 0.5)
            out[f"cv2.gauss-{sigma}"] = median_time(
                lambda: cv2.GaussianBlur(f32, (2 * r + 1, 2 * r + 1), sigma, borderType=cv2.BORDER_REFLECT),
                args.repeats)
        sharpen = np.array([[0, -1, 0], [-1, 5, -1], [0, -1, 0]], np.float32)
        binomial = np.array([1, 4, 6, 4, 1], np.float32) / 16.0
        out["cv2.convolve-3x3"] = median_time(
            lambda: cv2.filter2D(f32, -1, sharpen, borderType=cv2.BORDER_REFLECT), args.repeats)
        out["cv2.convolve-5x5-separable"] = median_time(
            lambda: cv2.sepFilter2D(f32, -1, binomial, binomial, borderType=cv2.BORDER_REFLECT), args.repeats)
        rgb32 = cv2.cvtColor(f32, cv2.COLOR_BGR2RGB)
        out["cv2.gray"] = median_time(lambda: cv2.cvtColor(rgb32, cv2.COLOR_RGB2GRAY), args.repeats)
        out["cv2.gamma"] = median_time(lambda: cv2.pow(f32, 1 / 2.2), args.repeats)
        out["cv2.flip"] = median_time(lambda: cv2.flip(f32, 1), args.repeats)
        out["cv2.rotate-90"] = median_time(lambda: cv2.rotate(f32, cv2.ROTATE_90_CLOCKWISE), args.repeats)
    except ImportError as e:
        print(f"reference: OpenCV unavailable ({e})", file=sys.stderr)

    try:
        from scipy import ndimage
        from PIL import Image

        rgb = np.asarray(Image.open(io.BytesIO(png_bytes)).convert("RGB"))
        planes = [np.ascontiguousarray(rgb[..., c], dtype=np.float32) / 255.0 for c in range(3)]
        for sigma in (2, 8):
            out[f"scipy.gauss-{sigma}"] = median_time(
                lambda: [ndimage.gaussian_filter(p, sigma, truncate=4.0, mode="reflect") for p in planes],
                max(1, args.repeats // 2))
        sharpen = np.array([[0, -1, 0], [-1, 5, -1], [0, -1, 0]], np.float32)
        b = np.array([1, 4, 6, 4, 1], np.float32)
        binomial = np.outer(b, b) / 256.0
        out["scipy.convolve-3x3"] = median_time(
            lambda: [ndimage.convolve(p, sharpen, mode="reflect") for p in planes], max(1, args.repeats // 2))
        out["scipy.convolve-5x5-separable"] = median_time(
            lambda: [ndimage.convolve(p, binomial, mode="reflect") for p in planes], max(1, args.repeats // 2))
        w = (0.2126, 0.7152, 0.0722)
        out["numpy.gray"] = median_time(lambda: w[0] * planes[0] + w[1] * planes[1] + w[2] * planes[2], args.repeats)
        out["numpy.invert"] = median_time(lambda: [1.0 - p for p in planes], args.repeats)
        out["numpy.gamma"] = median_time(lambda: [np.power(p, np.float32(1 / 2.2)) for p in planes], args.repeats)
        out["numpy.flip"] = median_time(lambda: [np.ascontiguousarray(np.fliplr(p)) for p in planes], args.repeats)
        out["numpy.rotate-90"] = median_time(
            lambda: [np.ascontiguousarray(np.rot90(p, -1)) for p in planes], args.repeats)
        out["numpy.crop"] = median_time(lambda: [p[1000:2000, 1500:2500].copy() for p in planes], args.repeats)
    except ImportError as e:
        print(f"reference: scipy unavailable ({e})", file=sys.stderr)

    try:
        from PIL import Image

        def pil_decode(data):
            im = Image.open(io.BytesIO(data))
            im.load()
            return im

        im = pil_decode(png_bytes).convert("RGB")
        out["pillow.jpeg-decode"] = median_time(lambda: pil_decode(jpeg_bytes), args.repeats)
        out["pillow.jpeg-encode"] = median_time(lambda: im.save(io.BytesIO(), "JPEG", quality=90), args.repeats)
        out["pillow.png-decode"] = median_time(lambda: pil_decode(png_bytes), args.repeats)
        out["pillow.png-encode"] = median_time(lambda: im.save(io.BytesIO(), "PNG", compress_level=1), args.repeats)
    except ImportError as e:
        print(f"reference: Pillow unavailable ({e})", file=sys.stderr)

    json.dump(out, sys.stdout)


if __name__ == "__main__":
    main()
