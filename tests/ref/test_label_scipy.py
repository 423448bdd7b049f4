#!/usr/bin/python3
"""Labelling (src/detect/label.c) against scipy.ndimage.label and skimage.measure.regionprops.

Drives probe_detect_label on a few hundred invented binary masks (noise of 1-70 % density, discs
and ellipses, line segments, checkerboards, spirals, and degenerate sizes: 1x1, single rows and
columns, empty, full, widths not a multiple of 8) and checks, for each:

  * the partition equals scipy.ndimage.label(mask, structure=np.ones((3, 3))) up to a bijective
    renumbering (reference: scipy), and our labels follow the raster order of each component's
    first pixel (the documented numbering, checked directly);
  * area, bounding box and centroid equal skimage.measure.regionprops exactly (reference: skimage,
    whose centroid is coords.mean(), i.e. the correctly rounded m10/m00);
  * the central moments equal exact rational values computed here from integer sums (to 4e-16
    relative: the probe must not lose digits to cancellation);
  * orientation and major/minor axis lengths computed here from the probe's mu20, mu11, mu02 with
    skimage 0.19's conventions match regionprops to 1e-6 (reference: skimage). Conversion: skimage's
    inertia tensor is [[a, b], [b, c]] = [[mu20, -mu11], [-mu11, mu02]] / area, with our x = column,
    y = row; its orientation is 0.5*atan2(-2b, c - a) = 0.5*atan2(2*mu11, mu02 - mu20), the angle of
    the major axis measured from the row (y) axis towards the column (x) axis, in [-pi/2, pi/2].
    An angle phi from the +x axis in our y-down frame is pi/2 - orientation (mod pi).
    Axis lengths are 4*sqrt(eigenvalue).
  * the output (labels and table) is byte-identical at --threads 1 and --threads 2.
"""
import argparse
import math
import os
import subprocess
import sys
import tempfile
from fractions import Fraction

import numpy as np
from scipy import ndimage
from skimage import measure, draw


def write_pgm(path, a):
    a = np.ascontiguousarray(a, dtype=np.uint8)
    with open(path, "wb") as f:
        f.write(b"P5\n%d %d\n255\n" % (a.shape[1], a.shape[0]))
        f.write(a.tobytes())


def run_probe(probe, mask, tmp, threads):
    pgm = os.path.join(tmp, "in.pgm")
    out = os.path.join(tmp, "out%d.bin" % threads)
    write_pgm(pgm, mask.astype(np.uint8) * 255)
    p = subprocess.run([probe, pgm, out, "--threads", str(threads)], capture_output=True, text=True)
    if p.returncode != 0:
        raise AssertionError("probe failed: " + p.stderr)
    with open(out, "rb") as f:
        raw = f.read()
    labels = np.frombuffer(raw, dtype="<i4").reshape(mask.shape)
    return labels, raw, p.stdout


def gen_masks(rng):
    """Yield (name, mask) pairs; invented data only."""
    # degenerate sizes
    yield "1x1 empty", np.zeros((1, 1), bool)
    yield "1x1 full", np.ones((1, 1), bool)
    yield "empty 37x53", np.zeros((37, 53), bool)
    yield "full 41x67", np.ones((41, 67), bool)
    yield "full 1x1000", np.ones((1, 1000), bool)
    yield "full 1000x1", np.ones((1000, 1), bool)
    yield "wide 2x16384 noise", rng.random((2, 16384)) < 0.3
    for k in range(12):
        w = int(rng.integers(1, 300))
        yield "one row %d" % w, rng.random((1, w)) < rng.uniform(0.05, 0.7)
        h = int(rng.integers(1, 300))
        yield "one column %d" % h, rng.random((h, 1)) < rng.uniform(0.05, 0.7)
    # 1-pixel-wide columns and rows
    for k in range(6):
        h, w = int(rng.integers(5, 120)), int(rng.integers(5, 120))
        m = np.zeros((h, w), bool)
        m[:, rng.integers(0, w, size=int(rng.integers(1, 6)))] = True
        m[rng.integers(0, h, size=int(rng.integers(0, 3))), :] = True
        yield "thin columns", m
    # noise of varied density
    for k in range(70):
        h, w = int(rng.integers(2, 160)), int(rng.integers(2, 170))
        d = float(np.exp(rng.uniform(np.log(0.01), np.log(0.7))))
        yield "noise %.3f %dx%d" % (d, h, w), rng.random((h, w)) < d
    # discs and ellipses
    for k in range(45):
        h, w = int(rng.integers(20, 320)), int(rng.integers(20, 330))
        m = np.zeros((h, w), bool)
        yy, xx = np.mgrid[0:h, 0:w]
        for i in range(int(rng.integers(1, 25))):
            cx, cy = rng.uniform(-5, w + 5), rng.uniform(-5, h + 5)
            a = rng.uniform(0.5, max(1.0, min(h, w) / 4))
            b = a * rng.uniform(0.2, 1.0)
            t = rng.uniform(0, np.pi)
            u = (xx - cx) * np.cos(t) + (yy - cy) * np.sin(t)
            v = -(xx - cx) * np.sin(t) + (yy - cy) * np.cos(t)
            m |= (u / a) ** 2 + (v / b) ** 2 <= 1
        if k % 3 == 0:  # rings: discs with holes
            m ^= ndimage.binary_erosion(m, iterations=2)
        yield "ellipses %dx%d" % (h, w), m
    # line segments
    for k in range(30):
        h, w = int(rng.integers(3, 200)), int(rng.integers(3, 210))
        m = np.zeros((h, w), bool)
        for i in range(int(rng.integers(1, 30))):
            r0, r1 = rng.integers(0, h, 2)
            c0, c1 = rng.integers(0, w, 2)
            rr, cc = draw.line(int(r0), int(c0), int(r1), int(c1))
            m[rr, cc] = True
        yield "lines %dx%d" % (h, w), m
    # checkerboards (cell 1 px: one 8-connected component)
    for k in range(15):
        h, w = int(rng.integers(1, 120)), int(rng.integers(1, 130))
        c = int(rng.integers(1, 5))
        yy, xx = np.mgrid[0:h, 0:w]
        m = ((yy // c + xx // c) % 2) == 0
        if k % 2:
            m &= rng.random((h, w)) < 0.9
        yield "checker %d %dx%d" % (c, h, w), m
    # spirals
    for k in range(15):
        h, w = int(rng.integers(30, 260)), int(rng.integers(30, 270))
        yy, xx = np.mgrid[0:h, 0:w]
        cx, cy = rng.uniform(0, w), rng.uniform(0, h)
        r = np.hypot(xx - cx, yy - cy)
        th = np.arctan2(yy - cy, xx - cx)
        pitch = rng.uniform(4, 15)
        frac = rng.uniform(0.15, 0.6)
        m = ((r / pitch - th / (2 * np.pi)) % 1.0) < frac
        yield "spiral %dx%d" % (h, w), m
    # strips of few rows stress the seams between parallel strips
    for k in range(20):
        h, w = int(rng.integers(2, 9)), int(rng.integers(1, 90))
        yield "short %dx%d" % (h, w), rng.random((h, w)) < rng.uniform(0.2, 0.7)


def close(a, b, rel, scale=1.0):
    return abs(a - b) <= rel * max(abs(a), abs(b), scale)


def sk_orientation(mu20, mu11, mu02, area):
    """skimage 0.19 RegionProperties.orientation, from our central moments."""
    a, b, c = mu20 / area, -mu11 / area, mu02 / area
    if a - c == 0:
        return -math.pi / 4 if b < 0 else math.pi / 4
    return 0.5 * math.atan2(-2 * b, c - a)


def sk_axes(mu20, mu11, mu02, area):
    T = np.array([[mu20, -mu11], [-mu11, mu02]]) / area
    ev = np.clip(np.linalg.eigvalsh(T), 0, None)
    return 4 * math.sqrt(ev[0]), 4 * math.sqrt(ev[1])  # (minor, major): eigvalsh is ascending


def check(probe, name, mask, tmp):
    lab1, raw1, txt1 = run_probe(probe, mask, tmp, 1)
    lab2, raw2, txt2 = run_probe(probe, mask, tmp, 2)
    errs = []
    if raw1 != raw2 or txt1 != txt2:
        errs.append("output differs between --threads 1 and 2")
    L = lab1.astype(np.int64)
    # reference: scipy.ndimage.label, 8-connected
    S, n = ndimage.label(mask, structure=np.ones((3, 3), int))
    rows = [ln.split() for ln in txt1.splitlines()]
    if len(rows) != n:
        return errs + ["%d components, scipy finds %d" % (len(rows), n)]
    if not np.array_equal(L > 0, mask):
        return errs + ["foreground differs from the mask"]
    if n:
        pairs = np.unique(np.stack([L[mask], S[mask]]), axis=1)
        if pairs.shape[1] != n or len(np.unique(pairs[0])) != n or len(np.unique(pairs[1])) != n:
            errs.append("partition is not a bijective renumbering of scipy's")
        # numbering in raster order of first pixels (documented in label.h)
        u, first = np.unique(L.ravel(), return_index=True)
        first = first[u > 0]
        if not (np.all(np.diff(first) > 0) and np.array_equal(u[u > 0], np.arange(1, n + 1))):
            errs.append("labels not numbered in raster order of first pixels")
    # exact integer moments, for the cancellation check
    yy, xx = np.mgrid[0:mask.shape[0], 0:mask.shape[1]]
    lf = L.ravel()
    sums = {}
    for key, wgt in (("m00", None), ("m10", xx), ("m01", yy), ("m20", xx * xx), ("m11", xx * yy),
                     ("m02", yy * yy)):
        s = np.bincount(lf, weights=None if wgt is None else wgt.ravel().astype(np.float64), minlength=n + 1)
        sums[key] = [int(v) for v in s]  # integers below 2^53: exact
    props = measure.regionprops(lab1.astype(np.int32))
    for rp, r in zip(props, rows):
        lbl, area = int(r[0]), int(r[1])
        x0, y0, x1, y1 = map(int, r[2:6])
        cx, cy, mu20, mu11, mu02 = map(float, r[6:11])
        border = int(r[11])
        h, w = mask.shape
        if rp.label != lbl:
            errs.append("label order")
            break
        # reference: skimage regionprops (area, bbox, centroid exact)
        if rp.area != area:
            errs.append("label %d area %d, skimage %d" % (lbl, area, rp.area))
        if rp.bbox != (y0, x0, y1 + 1, x1 + 1):
            errs.append("label %d bbox" % lbl)
        if rp.centroid != (cy, cx):
            errs.append("label %d centroid (%r, %r), skimage %r" % (lbl, cy, cx, rp.centroid))
        want_border = (x0 == 0) | (y0 == 0) << 1 | (x1 == w - 1) << 2 | (y1 == h - 1) << 3
        if border != want_border:
            errs.append("label %d border bits %d, expected %d" % (lbl, border, want_border))
        # exact central moments (independent rational arithmetic)
        m00, m10, m01 = sums["m00"][lbl], sums["m10"][lbl], sums["m01"][lbl]
        for got, mab, ma, mb, nm in ((mu20, sums["m20"][lbl], m10, m10, "mu20"),
                                     (mu11, sums["m11"][lbl], m10, m01, "mu11"),
                                     (mu02, sums["m02"][lbl], m01, m01, "mu02")):
            exact = float(Fraction(m00 * mab - ma * mb, m00))
            if abs(got - exact) > 4e-16 * abs(exact):
                errs.append("label %d %s %r, exact %r" % (lbl, nm, got, exact))
        # reference: skimage orientation and axis lengths, 1e-6 relative to the component's size
        minor, major = sk_axes(mu20, mu11, mu02, area)
        if not close(major, rp.axis_major_length, 1e-6, 1.0) or \
           not close(minor, rp.axis_minor_length, 1e-6, max(major, 1.0)):
            errs.append("label %d axes (%r, %r), skimage (%r, %r)" % (
                lbl, major, minor, rp.axis_major_length, rp.axis_minor_length))
        a, c, b = mu20 / area, mu02 / area, -mu11 / area
        gap = math.hypot(a - c, 2 * b)
        o = sk_orientation(mu20, mu11, mu02, area)
        if a == c and b != 0:
            # skimage's a == c branch returns -pi/4 for b < 0 while its formula tends to +pi/4; its
            # own rounding decides which side it lands on, so accept either sign there.
            if not close(abs(rp.orientation), math.pi / 4, 1e-6):
                errs.append("label %d orientation %r, skimage %r" % (lbl, o, rp.orientation))
        elif gap > 1e-6 * (a + c):  # an isotropic component has no orientation to compare
            d = (o - rp.orientation + math.pi / 2) % math.pi - math.pi / 2
            if abs(d) > 1e-6 * max(1.0, abs(o)):
                errs.append("label %d orientation %r, skimage %r" % (lbl, o, rp.orientation))
    return errs


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--build", required=True)
    args = ap.parse_args()
    probe = os.path.join(args.build, "probe_detect_label")
    rng = np.random.default_rng(20240611)
    failures = 0
    count = 0
    with tempfile.TemporaryDirectory() as tmp:
        for name, mask in gen_masks(rng):
            count += 1
            errs = check(probe, name, mask, tmp)
            if errs:
                failures += 1
                print("FAIL %s: %s" % (name, "; ".join(errs[:5])))
    print("%d masks, %d failures" % (count, failures))
    if count < 200:
        print("FAIL: fewer than 200 masks")
        return 1
    return 1 if failures else 0


if __name__ == "__main__":
    sys.exit(main())
