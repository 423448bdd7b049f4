#!/usr/bin/python3
"""Otsu threshold (src/detect/threshold.c) against skimage.filters.threshold_otsu.

probe_detect_label --otsu IN.pgm prints sp_otsu_hist over the 256-bin histogram of an 8-bit image.
For such images skimage's threshold is the value of the winning bin and its foreground is
image > threshold; our class 0 is bins 0..t, so both must print the same integer. Single-valued
images are the exception by design: skimage returns the value, sp_otsu_hist returns -1.

Checks:
  * many invented images (bimodal Gaussian mixtures, skewed gamma, narrow ranges, two-valued,
    three-valued with exact ties, uniform) — equality with skimage.filters.threshold_otsu
    (reference: skimage 0.19);
  * REFERENCES.md case (Otsu 1979, IEEE Trans. SMC 9:62): histogram {20: 50, 60: 10, 200: 40} has
    the maximum between-class variance 7210.667 on every t in [60, 199]; the tie rule (lowest t)
    gives 60, as skimage does (its argmax takes the first maximum).
"""
import argparse
import os
import subprocess
import sys
import tempfile

import numpy as np
from skimage.filters import threshold_otsu


def write_pgm(path, a):
    a = np.ascontiguousarray(a, dtype=np.uint8)
    with open(path, "wb") as f:
        f.write(b"P5\n%d %d\n255\n" % (a.shape[1], a.shape[0]))
        f.write(a.tobytes())


def probe_otsu(probe, img, tmp):
    path = os.path.join(tmp, "o.pgm")
    write_pgm(path, img)
    p = subprocess.run([probe, "--otsu", path], capture_output=True, text=True)
    if p.returncode != 0:
        raise AssertionError("probe failed: " + p.stderr)
    return int(p.stdout.strip())


def images(rng):
    for k in range(60):  # bimodal mixtures
        n = int(rng.integers(50, 16000))  # one row, within SP_MAX_DIM
        frac = rng.uniform(0.02, 0.98)
        m1, m2 = rng.uniform(0, 255, 2)
        s1, s2 = rng.uniform(1, 40, 2)
        n1 = int(n * frac)
        v = np.concatenate([rng.normal(m1, s1, n1), rng.normal(m2, s2, n - n1)])
        yield "bimodal", np.clip(np.rint(v), 0, 255).reshape(1, -1)
    for k in range(30):  # skewed
        v = rng.gamma(rng.uniform(0.3, 3), rng.uniform(2, 40), int(rng.integers(100, 10000)))
        yield "skewed", np.clip(np.rint(v), 0, 255).reshape(1, -1)
    for k in range(30):  # narrow ranges
        lo = int(rng.integers(0, 250))
        v = rng.integers(lo, min(256, lo + int(rng.integers(2, 6))), int(rng.integers(10, 3000)))
        yield "narrow", v.reshape(1, -1)
    for k in range(30):  # two-valued
        a, b = rng.choice(256, 2, replace=False)
        v = np.where(rng.random(int(rng.integers(2, 5000))) < rng.uniform(0.01, 0.99), a, b)
        if len(np.unique(v)) < 2:
            v[0], v[-1] = a, b
        yield "two-valued", v.reshape(1, -1)
    for k in range(20):  # three values with equal counts and spacing: an exact tie between two splits
        a = int(rng.integers(0, 150))
        d = int(rng.integers(1, 50))
        n = int(rng.integers(1, 400))
        yield "three-valued tie", np.repeat([a, a + d, a + 2 * d], n).reshape(1, -1)
    for k in range(20):  # uniform noise, 2-D images
        h, w = rng.integers(1, 200, 2)
        yield "uniform", rng.integers(0, 256, (int(h), int(w)))
    yield "single value", np.full((7, 9), 42)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--build", required=True)
    args = ap.parse_args()
    probe = os.path.join(args.build, "probe_detect_label")
    rng = np.random.default_rng(7)
    fails = n = 0
    with tempfile.TemporaryDirectory() as tmp:
        for name, img in images(rng):
            img = img.astype(np.uint8)
            n += 1
            got = probe_otsu(probe, img, tmp)
            want = -1 if len(np.unique(img)) < 2 else int(threshold_otsu(img))
            if got != want:
                fails += 1
                print("FAIL %s: ours %d, skimage %d" % (name, got, want))

        # REFERENCES.md / Otsu (1979): {20: 50 px, 60: 10 px, 200: 40 px}
        img = np.repeat(np.array([20, 60, 200], np.uint8), [50, 10, 40]).reshape(10, 10)
        got = probe_otsu(probe, img, tmp)
        hist = np.bincount(img.ravel(), minlength=256).astype(float)
        p = hist / hist.sum()
        i = np.arange(256)

        def between(t):
            w0 = p[: t + 1].sum()
            w1 = 1 - w0
            m0 = (p[: t + 1] * i[: t + 1]).sum() / w0
            m1 = (p[t + 1:] * i[t + 1:]).sum() / w1
            return w0 * w1 * (m0 - m1) ** 2

        var = [between(t) for t in range(20, 200)]
        vmax = max(var)
        if abs(vmax - 7210.667) > 5e-4:  # published to 3 decimals
            fails += 1
            print("FAIL reference case: max between-class variance %.4f, REFERENCES 7210.667" % vmax)
        plateau = [t for t in range(20, 200) if abs(between(t) - vmax) < 1e-9 * vmax]
        if plateau != list(range(60, 200)):
            fails += 1
            print("FAIL reference case: maximum plateau %d..%d, REFERENCES 60..199" % (plateau[0], plateau[-1]))
        if got != 60 or int(threshold_otsu(img)) != 60:
            fails += 1
            print("FAIL reference case: ours %d, skimage %r, expected 60" % (got, threshold_otsu(img)))
        n += 1
    print("%d images, %d failures" % (n, fails))
    return 1 if fails else 0


if __name__ == "__main__":
    sys.exit(main())
