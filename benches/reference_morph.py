#!/usr/bin/env python3
"""Times reference libraries on the workloads of `cargo bench --bench morph`.

Called with the 2048x2048 16-bit luma image the benchmark wrote (raw little-endian
uint16), the flat and dark frames (float32 TIFF; read here as the same formulas
the benchmark used, so no TIFF reader is needed) and the names of the workloads
Pumice ran. Prints one JSON object: "lib.workload" -> median seconds.

  erode/dilate/open/close/tophat-square-15
                        scipy.ndimage grey_erosion, grey_dilation, grey_opening,
                        grey_closing, white_tophat (uint16, size=(15, 15), mode
                        'nearest', which for a minimum or maximum equals Pumice's
                        `ignore`: the repeated edge sample is already in the window)
  erode-disk-7          scipy.ndimage.grey_erosion(footprint=skimage.morphology.disk(7))
  bin-2-sum             numpy: x.reshape(1024, 2, 1024, 2).sum(axis=(1, 3)) on float32 x
  hotpixel              scipy.ndimage.median_filter(footprint = 3x3 ring) (float32), then the
                        difference, its MAD (numpy.median twice) and numpy.where
  flatfield             numpy: (raw - dark) / (flat - dark) * mean(flat - dark), float64
  illumination-ball-50  skimage.restoration.rolling_ball(x, radius=50) — exact, and only the
                        apex trace (half of Pumice's opening), one repeat (it takes minutes)
  illumination-ball-15-exact  skimage.restoration.rolling_ball(x, radius=15), one repeat
  illumination-paper-15 scipy.ndimage.grey_closing(footprint=disk(15)), then x / closing
"""
import json
import sys

import numpy as np

from timing import median_time

N = 2048


def main():
    raw_path, _flat_path, _dark_path, *names = sys.argv[1:]
    wanted = set(names)
    codes = np.fromfile(raw_path, dtype="<u2").reshape(N, N)
    x32 = codes.astype(np.float32) / np.float32(65535)
    out = {}
    import scipy.ndimage as ndi
    from skimage.morphology import disk

    def want(name):
        return not wanted or name in wanted

    flat_ops = {
        "erode": ndi.grey_erosion,
        "dilate": ndi.grey_dilation,
        "open": ndi.grey_opening,
        "close": ndi.grey_closing,
        "tophat": ndi.white_tophat,
    }
    for op, fn in flat_ops.items():
        name = f"{op}-square-15"
        if want(name):
            out[f"scipy.{name}"] = median_time(lambda fn=fn: fn(codes, size=(15, 15), mode="nearest"))
    if want("erode-disk-7"):
        fp = disk(7).astype(bool)
        out["scipy.erode-disk-7"] = median_time(lambda: ndi.grey_erosion(codes, footprint=fp, mode="nearest"))
    if want("bin-2-sum"):
        out["numpy.bin-2-sum"] = median_time(lambda: x32.reshape(N // 2, 2, N // 2, 2).sum(axis=(1, 3)))
    if want("hotpixel"):
        ring = np.ones((3, 3), dtype=bool)
        ring[1, 1] = False

        def hotpixel():
            m = ndi.median_filter(x32, footprint=ring, mode="mirror")
            d = x32 - m
            sigma = 1.4826 * np.median(np.abs(d - np.median(d)))
            return np.where(np.abs(d) > 5 * sigma, m, x32)

        out["scipy.hotpixel"] = median_time(hotpixel)
    if want("flatfield"):
        c = N / 2
        yy, xx = np.mgrid[0:N, 0:N].astype(np.float32)
        flat = 0.8 * (1 - 0.3 * ((xx - c) ** 2 + (yy - c) ** 2) / (c * c))
        dark = 0.01 + 0.001 * ((np.arange(N)[None, :] * 7 + np.arange(N)[:, None] * 13) % 11)

        def flatfield():
            g = flat.astype(np.float64) - dark
            return ((x32 - dark) / g * g.mean()).astype(np.float32)

        out["numpy.flatfield"] = median_time(flatfield)
    if want("illumination-ball-50") or want("illumination-ball-15-exact"):
        from skimage.restoration import rolling_ball

        codes8 = codes / 257.0  # the ball's height in 8-bit code units, as Pumice's levels=255
        if want("illumination-ball-50"):
            out["skimage.illumination-ball-50"] = median_time(lambda: rolling_ball(codes8, radius=50), 1)
        if want("illumination-ball-15-exact"):
            out["skimage.illumination-ball-15-exact"] = median_time(lambda: rolling_ball(codes8, radius=15), 1)
    if want("illumination-paper-15"):
        fp = disk(15).astype(bool)
        out["scipy.illumination-paper-15"] = median_time(
            lambda: x32 / ndi.grey_closing(x32, footprint=fp, mode="nearest"))
    print(json.dumps(out))


if __name__ == "__main__":
    main()
