"""Reference for benches/batch.rs: the same batch with Pillow and a process
pool of 2 workers (multiprocessing.Pool).

Per file: Image.open → convert("RGB") → resize((1600, h), Image.LANCZOS) →
filter(ImageFilter.UnsharpMask(radius=1, percent=100, threshold=0)) →
save(JPEG, quality=85). Pillow works on the encoded 8-bit values (no
linearisation); Pumice resizes and sharpens in linear light.

Prints {"pillow.batch": seconds, "pillow.batch_peak_mib": MiB}. Peak memory is
the parent's peak resident size plus twice the largest worker's
(resource.getrusage: RUSAGE_SELF and RUSAGE_CHILDREN ru_maxrss, KiB on Linux),
an upper bound on the pool's total.

Usage: reference_batch.py INPUT_DIR OUTPUT_DIR
"""
import json
import multiprocessing
import os
import resource
import sys
import time

from PIL import Image, ImageFilter


def work(job):
    src, dst = job
    with Image.open(src) as im:
        im = im.convert("RGB")
        h = round(im.height * 1600 / im.width)
        im = im.resize((1600, h), Image.LANCZOS)
        im = im.filter(ImageFilter.UnsharpMask(radius=1, percent=100, threshold=0))
        im.save(dst, "JPEG", quality=85)


def main():
    src, dst = sys.argv[1], sys.argv[2]
    os.makedirs(dst, exist_ok=True)
    jobs = [(os.path.join(src, n), os.path.join(dst, n)) for n in sorted(os.listdir(src))]
    start = time.perf_counter()
    with multiprocessing.Pool(2) as pool:
        pool.map(work, jobs, chunksize=1)
    seconds = time.perf_counter() - start
    peak_kib = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss + 2 * resource.getrusage(
        resource.RUSAGE_CHILDREN
    ).ru_maxrss
    print(json.dumps({"pillow.batch": seconds, "pillow.batch_peak_mib": peak_kib / 1024}))


if __name__ == "__main__":
    main()
