#!/usr/bin/python3
"""Benchmark of the measure job. Prints figures; asserts nothing about speed (machines are shared
and noisy: compare the ratios printed within one run).

1. Detection frames/s on 1024x1024 8-bit frames at 1 and 2 threads, from an uncompressed video
   (rawvideo in NUT) so that decoding costs almost nothing.
2. Peak resident memory of measure on 1,000 and 10,000 frames of FFV1 video: it must not grow
   with the number of frames.

usage: /usr/bin/python3 bench/bench_measure.py [--build build] [--keep DIR]
"""
import argparse
import csv
import os
import shutil
import subprocess
import sys
import tempfile
import time

ap = argparse.ArgumentParser()
ap.add_argument("--build", default=os.path.join(os.path.dirname(__file__), "..", "build"))
ap.add_argument("--keep", help="work directory to keep (default: a temporary one, removed)")
ap.add_argument("--frames", type=int, default=300, help="frames for the speed test")
args = ap.parse_args()
spume = os.path.abspath(os.path.join(args.build, "spume"))
work = args.keep or tempfile.mkdtemp(prefix="spume-bench-")
os.makedirs(work, exist_ok=True)


def run(cmd, env=None):
    """Run cmd; return (wall seconds, peak RSS in MiB of that process)."""
    e = dict(os.environ)
    if env:
        e.update(env)
    t0 = time.perf_counter()
    p = subprocess.Popen(cmd, stdout=subprocess.DEVNULL, stderr=subprocess.PIPE, env=e)
    _, status, ru = os.wait4(p.pid, 0)
    dt = time.perf_counter() - t0
    err = p.stderr.read().decode()
    p.stderr.close()
    if os.waitstatus_to_exitcode(status) != 0:
        sys.exit(f"failed: {' '.join(cmd)}\n{err}")
    return dt, ru.ru_maxrss / 1024.0


def ffmpeg(*a):
    subprocess.run(["ffmpeg", "-loglevel", "error", "-y", *a], check=True)


def mean_bubbles(outdir):
    with open(os.path.join(outdir, "frames.csv")) as f:
        rows = list(csv.DictReader(f))
    return sum(int(r["bubbles"]) for r in rows) / max(len(rows), 1)


print(f"spume benchmark, work directory {work}")
print(f"machine: {os.cpu_count()} cores")

# 1. Detection speed on 1024x1024 frames.
scene = os.path.join(work, "column1024")
run([spume, "synth", "column", "--out", scene, "--size", "1024x1024", "--frames", str(args.frames), "--no-png",
     "--quiet"])
raw = os.path.join(work, "column1024.nut")
ffmpeg("-i", os.path.join(scene, "video.mkv"), "-c:v", "rawvideo", "-pix_fmt", "gray", raw)
rates = {}
for n in (1, 2):
    out = os.path.join(work, f"speed{n}")
    dt, rss = run([spume, "measure", raw, "--out", out, "--threads", str(n), "--no-report", "--quiet"])
    rates[n] = args.frames / dt
    print(f"detection, 1024x1024 8-bit, {mean_bubbles(out):.0f} bubbles/frame, {n} thread(s): "
          f"{rates[n]:.1f} frames/s ({dt:.2f} s for {args.frames} frames, background pass included), "
          f"peak RSS {rss:.0f} MiB")
print(f"speed-up 2 threads / 1 thread: {rates[2] / rates[1]:.2f}")

# 2. Peak RSS against the number of frames (FFV1 video, 320x400 so that 10,000 frames stay quick).
base = os.path.join(work, "plume")
run([spume, "synth", "plume", "--out", base, "--frames", "200", "--size", "320x400", "--no-png", "--quiet"])
src = os.path.join(base, "video.mkv")
long1k = os.path.join(work, "long1k.mkv")
long10k = os.path.join(work, "long10k.mkv")
ffmpeg("-stream_loop", "4", "-i", src, "-c:v", "ffv1", long1k)
ffmpeg("-stream_loop", "49", "-i", src, "-c:v", "ffv1", long10k)
rss = {}
for name, path, n in (("1,000", long1k, 1000), ("10,000", long10k, 10000)):
    out = os.path.join(work, "rss" + str(n))
    dt, r = run([spume, "measure", path, "--out", out, "--no-report", "--quiet"])
    rss[n] = r
    print(f"FFV1 320x400, {name} frames: peak RSS {r:.0f} MiB, {n / dt:.1f} frames/s end to end")
print(f"peak RSS ratio 10,000 / 1,000 frames: {rss[10000] / rss[1000]:.3f} (flat means about 1)")
if not args.keep:
    shutil.rmtree(work)
