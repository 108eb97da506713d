"""Reference for benches/stack.rs: numpy (pinned in benches/requirements.txt)
on the whole stack preloaded in memory as uint16, shape (frames, side, side).

* median-preloaded  <->  numpy.median(stack, axis=0)
* mean-preloaded    <->  numpy.mean(stack, axis=0, dtype=numpy.float64)

Prints {"numpy.median-preloaded": s, "numpy.mean-preloaded": s, "numpy.peak_mib": MiB};
peak memory is the process's peak resident size (resource.getrusage
RUSAGE_SELF ru_maxrss, KiB on Linux), stack included.

Usage: reference_stack.py RAW_U16_FILE FRAMES SIDE
"""
import json
import resource
import sys

import numpy as np

from timing import median_time


def main():
    path, frames, side = sys.argv[1], int(sys.argv[2]), int(sys.argv[3])
    stack = np.fromfile(path, dtype="<u2").reshape(frames, side, side)
    out = {
        "numpy.median-preloaded": median_time(lambda: np.median(stack, axis=0), repeats=3),
        "numpy.mean-preloaded": median_time(lambda: np.mean(stack, axis=0, dtype=np.float64), repeats=3),
        "numpy.peak_mib": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
    }
    print(json.dumps(out))


if __name__ == "__main__":
    main()
