#!/usr/bin/python3
"""End-to-end speed of `spume measure` on compressed video against decoding alone. Prints figures;
asserts nothing about speed (the machine is shared and noisy: compare the ratios printed within one
run).

For H.264 (libx264, yuv420p) and FFV1 (grey, lossless) files of a synthesised plume at 640x800 or
larger, prints the wall time of `ffmpeg -i FILE -f null -` (decoding only, ffmpeg's default
threading) and of the whole `spume measure FILE` run, and their ratio (the goal is <= 1.2: analysis
overlapped with decoding). Each command is run `--repeat` times and the fastest run is kept.

The background estimate reads keyframes only when the run holds at least 16 of them (docs/methods.md);
libx264's default keyframe interval is 250 frames, so the default run is 4000 frames long, a short
high-speed run. The keyframe count and the background mode are printed beside each figure.

usage: /usr/bin/python3 bench/bench_decode.py [--build build] [--frames 4000] [--size 640x800]
                                              [--repeat 1] [--keep DIR]
"""
import argparse
import json
import os
import shutil
import subprocess
import sys
import tempfile
import time

here = os.path.dirname(os.path.abspath(__file__))
ap = argparse.ArgumentParser()
ap.add_argument("--build", default=os.path.join(here, "..", "build"))
ap.add_argument("--frames", type=int, default=4000)
ap.add_argument("--size", default="640x800")
ap.add_argument("--repeat", type=int, default=1)
ap.add_argument("--keep", help="work directory to keep (default: a temporary one, removed)")
args = ap.parse_args()
spume = os.path.abspath(os.path.join(args.build, "spume"))
work = args.keep or tempfile.mkdtemp(prefix="spume-bdec-")
os.makedirs(work, exist_ok=True)


def sh(cmd):
    p = subprocess.run(cmd, capture_output=True, text=True)
    if p.returncode != 0:
        sys.exit(f"failed: {' '.join(cmd)}\n{p.stderr}")
    return p.stdout


def best(cmd):
    times = []
    for _ in range(args.repeat):
        t0 = time.perf_counter()
        sh(cmd)
        times.append(time.perf_counter() - t0)
    return min(times)


scene = os.path.join(work, "scene")
sh([spume, "synth", "plume", "--out", scene, "--size", args.size, "--frames", str(args.frames), "--no-png",
    "--quiet"])
src = os.path.join(scene, "video.mkv")
files = {
    "H.264 (libx264 crf 18, yuv420p)": ("h264.mkv", ["-c:v", "libx264", "-preset", "medium", "-crf", "18",
                                                      "-pix_fmt", "yuv420p"]),
    "FFV1 (grey, lossless)": ("ffv1.mkv", ["-c:v", "ffv1", "-pix_fmt", "gray"]),
}
print(f"decode vs measure: {args.frames} frames {args.size} (synth plume), {os.cpu_count()} cores, best of "
      f"{args.repeat}")
for name, (fn, enc) in files.items():
    path = os.path.join(work, fn)
    sh(["ffmpeg", "-nostdin", "-loglevel", "error", "-y", "-i", src, *enc, path])
    t_dec = best(["ffmpeg", "-nostdin", "-loglevel", "error", "-i", path, "-f", "null", "-"])
    out = os.path.join(work, "out-" + fn)
    t_meas = best([spume, "measure", path, "--out", out, "--quiet"])
    keys = sh(["ffprobe", "-v", "error", "-skip_frame", "nokey", "-select_streams", "v:0", "-count_frames",
               "-show_entries", "stream=nb_read_frames", "-of", "csv=p=0", path]).strip()
    with open(os.path.join(out, "summary.json")) as f:
        mode = json.load(f)["settings"]["background"]
    print(f"{name}: {os.path.getsize(path) / 2**20:.1f} MiB, {keys} keyframes; ffmpeg decode only {t_dec:.2f} s "
          f"({args.frames / t_dec:.0f} frames/s); spume measure {t_meas:.2f} s ({args.frames / t_meas:.0f} frames/s, "
          f"background from: {mode}); ratio {t_meas / t_dec:.2f} (goal <= 1.2)")
if not args.keep:
    shutil.rmtree(work)
