#!/usr/bin/env python3
# SPDX-License-Identifier: MIT
"""Side-by-side reference for `make bench` (stereo section): the semi-global block
matching of a widely used general-purpose vision library (Debian package python3-opencv),
run on the same pairs and scored the same way as tools/bench_stereo.c: bad-1px, bad-2px
and mean absolute error on non-occluded pixels with every pixel counted, holes filled
from the background side (per row, the lower of the nearest valid disparities), and
KITTI D1. Never a build or test dependency of sinew: tools/bench skips this column when
the module is absent.

Settings: the library's own stereo sample's "typical" ones (from memory): block 3,
P1 = 8 * 3 * 3^2, P2 = 32 * 3 * 3^2, disp12MaxDiff 1, uniquenessRatio 10,
speckleWindowSize 100, speckleRange 32, colour input, the same disparity counts as
bench_stereo. Usage: bench_stereo_ref.py DATA_DIR
"""
import os
import sys
import time

import cv2
import numpy as np

# (name, folder, left, right, truth, scale, disparities); scales from the datasets'
# documentation (Middlebury 2003 quarter size: /4, Tsukuba /16, Venus /8, KITTI /256).
PAIRS = [
    ("teddy", "middlebury2003/teddy", "im2.png", "im6.png", "disp2.png", 4, 64),
    ("cones", "middlebury2003/cones", "im2.png", "im6.png", "disp2.png", 4, 64),
    ("tsukuba", "middlebury2001/tsukuba", "scene1.row3.col3.ppm", "scene1.row3.col4.ppm",
     "truedisp.row3.col3.pgm", 16, 16),
    ("venus", "middlebury2001/venus", "im2.ppm", "im6.ppm", "disp2.pgm", 8, 32),
    ("kitti000146", "kitti2015/000146", "image_2/000146_10.png", "image_3/000146_10.png",
     "disp_noc_0/000146_10.png", 256, 128),
]


def fill_background(d, valid):
    """Per row: each invalid pixel gets the lower of the nearest valid values left/right."""
    out = d.copy()
    h, w = d.shape
    for y in range(h):
        row, ok = out[y], valid[y]
        idx = np.flatnonzero(ok)
        if idx.size == 0:
            row[:] = 0
            continue
        pos = np.arange(w)
        right = np.searchsorted(idx, pos)           # first valid index >= pos
        left = right - 1
        lv = np.where(left >= 0, row[idx[np.clip(left, 0, idx.size - 1)]], np.inf)
        rv = np.where(right < idx.size, row[idx[np.clip(right, 0, idx.size - 1)]], np.inf)
        fill = np.minimum(lv, rv)
        row[~ok] = fill[~ok]
    return out


def main():
    data = os.path.join(sys.argv[1], "stereo")
    print("reference: python3-opencv %s semi-global block matching (typical settings), "
          "holes filled from the background side" % cv2.__version__)
    print("%-12s %5s %8s %8s %7s %8s %9s" % ("pair", "D", "bad1-noc", "bad2-noc", "mae-noc",
                                             "d1-noc", "time ms"))
    for name, folder, left, right, truth, scale, nd in PAIRS:
        p = lambda f: os.path.join(data, folder, f)
        L, R = cv2.imread(p(left), cv2.IMREAD_COLOR), cv2.imread(p(right), cv2.IMREAD_COLOR)
        gt = cv2.imread(p(truth), cv2.IMREAD_UNCHANGED).astype(np.float64)
        if gt.ndim == 3:
            gt = gt[:, :, 0]
        known = gt > 0
        gt = gt / scale
        region = known
        if os.path.exists(p("nonocc.png")):
            region = known & (cv2.imread(p("nonocc.png"), cv2.IMREAD_GRAYSCALE) > 0)
        bs = 3
        sgbm = cv2.StereoSGBM_create(minDisparity=0, numDisparities=nd, blockSize=bs,
                                     P1=8 * 3 * bs * bs, P2=32 * 3 * bs * bs, disp12MaxDiff=1,
                                     uniquenessRatio=10, speckleWindowSize=100, speckleRange=32)
        times = []
        for _ in range(3):
            t0 = time.monotonic()
            raw = sgbm.compute(L, R)
            times.append(time.monotonic() - t0)
        d = raw.astype(np.float64) / 16.0
        d = fill_background(d, raw >= 0)
        err = np.abs(d - gt)[region]
        n = err.size
        print("%-12s %5d %7.2f%% %7.2f%% %7.3f %7.2f%% %9.1f" % (
            name, nd, 100.0 * np.count_nonzero(err > 1) / n, 100.0 * np.count_nonzero(err > 2) / n,
            err.mean(), 100.0 * np.count_nonzero((err > 3) & (err > 0.05 * gt[region])) / n,
            1e3 * sorted(times)[1]))


if __name__ == "__main__":
    main()
