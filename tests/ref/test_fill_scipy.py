#!/usr/bin/python3
"""Hole filling (src/detect/fill.c) against scipy.ndimage.binary_fill_holes.

probe_detect_label --fill IN.pgm OUT.pgm fills the holes of (IN != 0). Reference: scipy's
binary_fill_holes with its default structure (4-connected cross), which is what sp_fill_holes
promises. Masks (invented): rings and discs with bright spots, noise of varied density, nested
rings, checkerboards, holes touching the border, degenerate sizes (1x1, single rows and columns,
2-pixel-wide images, empty, full) and widths not a multiple of 8.
"""
import argparse
import os
import re
import subprocess
import sys
import tempfile

import numpy as np
from scipy import ndimage


def write_pgm(path, a):
    a = np.ascontiguousarray(a, dtype=np.uint8)
    with open(path, "wb") as f:
        f.write(b"P5\n%d %d\n255\n" % (a.shape[1], a.shape[0]))
        f.write(a.tobytes())


def read_pgm(path):
    with open(path, "rb") as f:
        data = f.read()
    m = re.match(rb"P5\s+(\d+)\s+(\d+)\s+(\d+)\s", data)
    assert m, "probe wrote a malformed PGM"
    w, h = int(m.group(1)), int(m.group(2))
    return np.frombuffer(data[m.end(): m.end() + w * h], np.uint8).reshape(h, w)


def masks(rng):
    yield "1x1 empty", np.zeros((1, 1), bool)
    yield "1x1 full", np.ones((1, 1), bool)
    yield "empty", np.zeros((23, 45), bool)
    yield "full", np.ones((19, 33), bool)
    yield "ring 3x3", np.array([[1, 1, 1], [1, 0, 1], [1, 1, 1]], bool)
    yield "open ring 3x3", np.array([[1, 1, 1], [1, 0, 1], [1, 0, 1]], bool)
    yield "diagonal gap", np.array([[0, 1, 1, 0], [1, 0, 0, 1], [1, 0, 0, 1], [0, 1, 1, 0]], bool)
    for k in range(8):
        yield "row", rng.random((1, int(rng.integers(1, 100)))) < 0.5
        yield "column", rng.random((int(rng.integers(1, 100)), 1)) < 0.5
        yield "two wide", rng.random((int(rng.integers(2, 60)), 2)) < 0.6
    for k in range(40):  # discs and rings with bright spots, some cut by the border
        h, w = int(rng.integers(10, 300)), int(rng.integers(10, 310))
        yy, xx = np.mgrid[0:h, 0:w]
        m = np.zeros((h, w), bool)
        for i in range(int(rng.integers(1, 20))):
            cx, cy = rng.uniform(-10, w + 10), rng.uniform(-10, h + 10)
            r = rng.uniform(2, max(3.0, min(h, w) / 3))
            t = rng.uniform(0.8, max(1.0, r / 2))
            d = np.hypot(xx - cx, yy - cy)
            m |= (d <= r) & (d >= r - t)
            if rng.random() < 0.5:  # a refraction spot inside
                m |= np.hypot(xx - cx - r / 4, yy - cy) < r / 6
        yield "rings %dx%d" % (h, w), m
    for k in range(45):  # noise of varied density
        h, w = int(rng.integers(3, 180)), int(rng.integers(3, 190))
        d = rng.uniform(0.05, 0.85)
        yield "noise %.2f" % d, rng.random((h, w)) < d
    for k in range(10):  # checkerboards: 1-px cells enclose nothing under 4-connected background
        h, w = int(rng.integers(3, 100)), int(rng.integers(3, 100))
        c = int(rng.integers(1, 4))
        yy, xx = np.mgrid[0:h, 0:w]
        m = ((yy // c + xx // c) % 2) == 0
        m |= rng.random((h, w)) < 0.3
        yield "checker %d" % c, m
    for k in range(10):  # nested rings (hole inside an object inside a hole)
        n = int(rng.integers(20, 200))
        yy, xx = np.mgrid[0:n, 0:n]
        d = np.maximum(abs(xx - n / 2), abs(yy - n / 2)).astype(int)
        yield "nested %d" % n, (d // int(rng.integers(1, 5))) % 2 == 0


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--build", required=True)
    args = ap.parse_args()
    probe = os.path.join(args.build, "probe_detect_label")
    rng = np.random.default_rng(99)
    fails = n = 0
    with tempfile.TemporaryDirectory() as tmp:
        src, dst = os.path.join(tmp, "m.pgm"), os.path.join(tmp, "f.pgm")
        for name, m in masks(rng):
            n += 1
            write_pgm(src, m * 255)
            p = subprocess.run([probe, "--fill", src, dst], capture_output=True, text=True)
            if p.returncode != 0:
                fails += 1
                print("FAIL %s: probe: %s" % (name, p.stderr.strip()))
                continue
            got = read_pgm(dst).astype(bool)
            want = ndimage.binary_fill_holes(m)  # reference: scipy, default 4-connected structure
            if not np.array_equal(got, want):
                fails += 1
                print("FAIL %s %s: %d pixels differ" % (name, m.shape, int((got != want).sum())))
    print("%d masks, %d failures" % (n, fails))
    if n < 100:
        print("FAIL: fewer than 100 masks")
        return 1
    return 1 if fails else 0


if __name__ == "__main__":
    sys.exit(main())
