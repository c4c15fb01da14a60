#!/usr/bin/env python3
# SPDX-License-Identifier: MIT
"""Scripted peer for `make bench` (run throughput section, tools/bench_run): the per-pair
work of `sinew run` done with a widely used general-purpose vision library (Debian
package python3-opencv) and numpy: its dense inverse search flow (medium preset) both
ways on gray frames, a forward-backward check (|f + b(x + f)|^2 < 0.01 (|f|^2 +
|b(x + f)|^2) + 0.5, Sundaram et al., ECCV 2010), flows saved as .npy and the mask as
PNG, one folder per consecutive pair. Prints the median per-pair time (ms) of the work
inside the process and the whole-process wall time per pair is measured by the caller.
Never a build or test dependency of sinew: tools/bench_run skips this column when the
module is absent. Usage: bench_run_ref.py COLOR_DIR OUT_DIR
"""
import os
import sys
import time

import cv2
import numpy as np


def fb_mask(f, b):
    h, w = f.shape[:2]
    gx, gy = np.meshgrid(np.arange(w, dtype=np.float32), np.arange(h, dtype=np.float32))
    bw = cv2.remap(b, gx + f[..., 0], gy + f[..., 1], cv2.INTER_LINEAR,
                   borderMode=cv2.BORDER_CONSTANT, borderValue=(np.nan, np.nan))
    s = f + bw
    lhs = (s * s).sum(axis=2)
    rhs = 0.01 * ((f * f).sum(axis=2) + (bw * bw).sum(axis=2)) + 0.5
    ok = lhs < rhs  # NaN (left the view) compares false: rejected
    return np.where(ok, 0, 255).astype(np.uint8)


def main():
    src, out = sys.argv[1], sys.argv[2]
    names = sorted(n for n in os.listdir(src) if n.endswith(".png"))
    dis = cv2.DISOpticalFlow_create(cv2.DISOPTICAL_FLOW_PRESET_MEDIUM)
    times = []
    prev = None
    for k, n in enumerate(names):
        t0 = time.perf_counter()
        cur = cv2.cvtColor(cv2.imread(os.path.join(src, n), cv2.IMREAD_COLOR),
                           cv2.COLOR_BGR2GRAY)
        if prev is not None:
            f = dis.calc(prev, cur, None)
            b = dis.calc(cur, prev, None)
            m = fb_mask(f, b)
            d = os.path.join(out, "%06d-%06d" % (k - 1, k))
            os.makedirs(d, exist_ok=True)
            np.save(os.path.join(d, "forward.npy"), f)
            np.save(os.path.join(d, "backward.npy"), b)
            cv2.imwrite(os.path.join(d, "mask.png"), m)
            times.append(time.perf_counter() - t0)
        prev = cur
    times.sort()
    print("%.1f" % (1e3 * times[len(times) // 2]))


if __name__ == "__main__":
    main()
