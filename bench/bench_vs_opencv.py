#!/usr/bin/python3
"""spume against a reference OpenCV detection stage (bench/bench_opencv.cpp, Debian libopencv-dev),
at the same thread count. Prints figures; asserts nothing about speed (the machine is shared and
noisy: compare the ratios printed within one run).

- The scene: a synthesised bubble plume (spume synth plume), 8-bit, as an uncompressed rawvideo NUT,
  so that decoding costs almost nothing.
- The reference gets every frame already in memory and the background given (the per-pixel median
  of 40 frames spread over the run, computed here with numpy, as spume's default estimate does), and
  times detection alone.
- spume is timed on the whole `spume measure` run of the NUT file (decode, background estimate,
  detection, measurement, tables), and again with the same background given (--background).
- The memory-bandwidth ceiling is one read pass over the same frames in memory, timed inside the
  reference program at the same thread count; spume's fraction of it is printed.

usage: /usr/bin/python3 bench/bench_vs_opencv.py [--build build] [--frames 200] [--size 1024x1024]
                                                 [--threads 1,2] [--keep DIR]
Needs: libopencv-dev and g++ (to build the reference), ffmpeg, python3-numpy, python3-pil.
"""
import argparse
import csv
import os
import shutil
import subprocess
import sys
import tempfile
import time

import numpy as np
from PIL import Image

here = os.path.dirname(os.path.abspath(__file__))
ap = argparse.ArgumentParser()
ap.add_argument("--build", default=os.path.join(here, "..", "build"))
ap.add_argument("--frames", type=int, default=200)
ap.add_argument("--size", default="1024x1024")
ap.add_argument("--threads", default="1,2")
ap.add_argument("--keep", help="work directory to keep (default: a temporary one, removed)")
args = ap.parse_args()
spume = os.path.abspath(os.path.join(args.build, "spume"))
work = args.keep or tempfile.mkdtemp(prefix="spume-vscv-")
os.makedirs(work, exist_ok=True)
w, h = map(int, args.size.split("x"))


def sh(cmd, **kw):
    p = subprocess.run(cmd, capture_output=True, text=True, **kw)
    if p.returncode != 0:
        sys.exit(f"failed: {' '.join(cmd)}\n{p.stderr}")
    return p.stdout


def timed(cmd):
    t0 = time.perf_counter()
    sh(cmd)
    return time.perf_counter() - t0


# Build the reference.
ref = os.path.join(work, "bench_opencv")
flags = sh(["pkg-config", "--cflags", "--libs", "opencv4"]).split()
sh(["g++", "-std=c++17", "-O3", "-fopenmp", os.path.join(here, "bench_opencv.cpp"), "-o", ref, *flags])

# The scene, as rawvideo NUT and as raw grey frames in a file for the reference.
scene = os.path.join(work, "scene")
sh([spume, "synth", "plume", "--out", scene, "--size", args.size, "--frames", str(args.frames), "--no-png",
    "--quiet"])
nut = os.path.join(work, "frames.nut")
sh(["ffmpeg", "-nostdin", "-loglevel", "error", "-y", "-i", os.path.join(scene, "video.mkv"), "-c:v", "rawvideo",
    "-pix_fmt", "gray", "-f", "nut", nut])
gray = os.path.join(work, "frames.gray")
sh(["ffmpeg", "-nostdin", "-loglevel", "error", "-y", "-i", nut, "-f", "rawvideo", "-pix_fmt", "gray", gray])
frames = np.memmap(gray, dtype=np.uint8, mode="r").reshape(-1, h, w)
n = frames.shape[0]
pick = np.linspace(0, n - 1, min(40, n)).round().astype(int)
bg = np.median(frames[pick], axis=0).round().astype(np.uint8)
bg_raw = os.path.join(work, "bg.gray")
bg.tofile(bg_raw)
bg_png = os.path.join(work, "bg.png")
Image.fromarray(bg).save(bg_png)
del frames


def detections(outdir):
    with open(os.path.join(outdir, "frames.csv")) as f:
        return sum(int(r["bubbles"]) for r in csv.DictReader(f))


print(f"spume vs OpenCV reference: {n} frames {w}x{h} 8-bit (synth plume), rawvideo NUT "
      f"{os.path.getsize(nut) / 2**20:.0f} MiB, {os.cpu_count()} cores, OpenCV reference built with g++ -O3")
for t in [int(x) for x in args.threads.split(",")]:
    out = sh([ref, gray, bg_raw, str(w), str(h), str(t), "0.7"])
    r = dict(line.split() for line in out.strip().splitlines())
    cv_fps, ceil_fps = float(r["opencv_fps"]), float(r["read_pass_fps"])
    o1 = os.path.join(work, f"m{t}")
    dt1 = timed([spume, "measure", nut, "--out", o1, "--threads", str(t), "--quiet"])
    o2 = os.path.join(work, f"b{t}")
    dt2 = timed([spume, "measure", nut, "--out", o2, "--threads", str(t), "--quiet", "--background", bg_png])
    sp1, sp2 = n / dt1, n / dt2
    print(f"threads {t}:")
    print(f"  OpenCV reference (in memory, detection only): {cv_fps:8.1f} frames/s, {int(r['detections']) / n:.1f} "
          f"components/frame")
    print(f"  spume measure, whole run (decode + background estimate + detection + tables): {sp1:8.1f} frames/s "
          f"= {sp1 / cv_fps:.2f}x the reference, {detections(o1) / n:.1f} bubbles/frame")
    print(f"  spume measure, background given: {sp2:8.1f} frames/s = {sp2 / cv_fps:.2f}x the reference")
    print(f"  memory-bandwidth ceiling (one read pass in memory): {ceil_fps:8.1f} frames/s "
          f"({float(r['read_gb_s']):.1f} GB/s); spume whole run at {100 * sp1 / ceil_fps:.2f}% of it, "
          f"reference at {100 * cv_fps / ceil_fps:.2f}%")
if not args.keep:
    shutil.rmtree(work)
