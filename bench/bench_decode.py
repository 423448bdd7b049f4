#!/usr/bin/python3
"""End-to-end speed of `spume measure` on compressed video against decoding alone. Prints figures;
asserts nothing about speed (the machine is shared and noisy: compare the ratios printed within one
run).

For H.264 (libx264, yuv420p) and FFV1 (grey, lossless) files of a synthesised plume at 640x800 or
larger, prints the wall time of `ffmpeg -i FILE -f null -` (decoding only, ffmpeg's default
threading) and of the whole `spume measure FILE` run, and their ratio (the goal is <= 1.2: analysis
overlapped with decoding). The commands run back to back `--repeat` times; the fastest run of each is
printed, and then the ratio within each round, which compares runs made seconds apart (this
machine's speed drifts by tens of per cent over minutes).

It also times spume reading the file with nothing to measure (`--roi 0,0,16,16 --no-report`): the CPU
time of the whole run less that of the reading alone is what measuring costs per frame. Beside it,
the budget the goal leaves: a run that may last 1.2 times ffmpeg's wall time on this many cores has at
most cores x 1.2 x that time of CPU, of which reading takes its share; the rest, per frame, is the most
measuring may cost even if it filled every idle moment of the decoder.

The background estimate reads keyframes only when the run holds at least 16 of them (docs/methods.md);
libx264's default keyframe interval is 250 frames, so the default run is 4000 frames long, a short
high-speed run. The keyframe count and the background mode are printed beside each figure.

usage: /usr/bin/python3 bench/bench_decode.py [--build build] [--frames 4000] [--size 640x800]
                                              [--repeat 3] [--keep DIR]
"""
import argparse
import json
import os
import resource
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
ap.add_argument("--repeat", type=int, default=3)
ap.add_argument("--keep", help="work directory to keep and reuse (default: a temporary one, removed)")
args = ap.parse_args()
spume = os.path.abspath(os.path.join(args.build, "spume"))
work = args.keep or tempfile.mkdtemp(prefix="spume-bdec-")
os.makedirs(work, exist_ok=True)


def sh(cmd):
    p = subprocess.run(cmd, capture_output=True, text=True)
    if p.returncode != 0:
        sys.exit(f"failed: {' '.join(cmd)}\n{p.stderr}")
    return p.stdout


def timed(cmd):
    """Wall time of one run, and its CPU time (user + system)."""
    r0 = resource.getrusage(resource.RUSAGE_CHILDREN)
    t0 = time.perf_counter()
    sh(cmd)
    t = time.perf_counter() - t0
    r1 = resource.getrusage(resource.RUSAGE_CHILDREN)
    return t, r1.ru_utime + r1.ru_stime - r0.ru_utime - r0.ru_stime


scene = os.path.join(work, "scene")
src = os.path.join(scene, "video.mkv")
# A kept work directory is reused: the scene and the encoded files are made only when missing (delete
# them after changing --frames or --size).
if not os.path.exists(src):
    sh([spume, "synth", "plume", "--out", scene, "--size", args.size, "--frames", str(args.frames), "--no-png",
        "--quiet"])
files = {
    "H.264 (libx264 crf 18, yuv420p)": ("h264.mkv", ["-c:v", "libx264", "-preset", "medium", "-crf", "18",
                                                      "-pix_fmt", "yuv420p"]),
    "FFV1 (grey, lossless)": ("ffv1.mkv", ["-c:v", "ffv1", "-pix_fmt", "gray"]),
}
print(f"decode vs measure: {args.frames} frames {args.size} (synth plume), {os.cpu_count()} cores, best of "
      f"{args.repeat}")
for name, (fn, enc) in files.items():
    path = os.path.join(work, fn)
    if not os.path.exists(path):
        sh(["ffmpeg", "-nostdin", "-loglevel", "error", "-y", "-i", src, *enc, path + ".tmp.mkv"])
        os.rename(path + ".tmp.mkv", path)
    out = os.path.join(work, "out-" + fn)
    read = os.path.join(work, "read-" + fn)
    # The three commands back to back in each round, so that a round's ratio compares runs made
    # within seconds of each other; the machine's speed drifts between rounds.
    rounds = []
    for _ in range(args.repeat):
        shutil.rmtree(out, ignore_errors=True)
        shutil.rmtree(read, ignore_errors=True)
        rounds.append((timed(["ffmpeg", "-nostdin", "-loglevel", "error", "-i", path, "-f", "null", "-"]),
                       timed([spume, "measure", path, "--out", out, "--quiet"]),
                       timed([spume, "measure", path, "--out", read, "--quiet", "--no-report", "--roi",
                              "0,0,16,16"])))
    shutil.rmtree(read, ignore_errors=True)
    (t_dec, c_dec), _, _ = min(rounds, key=lambda r: r[0][0])
    _, (t_meas, c_meas), _ = min(rounds, key=lambda r: r[1][0])
    _, _, (t_read, c_read) = min(rounds, key=lambda r: r[2][0])
    paired = sorted(r[1][0] / r[0][0] for r in rounds)
    cores = len(os.sched_getaffinity(0))
    per_frame = (c_meas - c_read) / args.frames * 1e3
    budget = (cores * 1.2 * t_dec - c_read) / args.frames * 1e3
    keys = sh(["ffprobe", "-v", "error", "-skip_frame", "nokey", "-select_streams", "v:0", "-count_frames",
               "-show_entries", "stream=nb_read_frames", "-of", "csv=p=0", path]).strip()
    with open(os.path.join(out, "summary.json")) as f:
        mode = json.load(f)["settings"]["background"]
    print(f"{name}: {os.path.getsize(path) / 2**20:.1f} MiB, {keys} keyframes; ffmpeg decode only {t_dec:.2f} s "
          f"({args.frames / t_dec:.0f} frames/s, CPU {c_dec:.1f} s); spume measure {t_meas:.2f} s "
          f"({args.frames / t_meas:.0f} frames/s, CPU {c_meas:.1f} s, background from: {mode}); "
          f"ratio {t_meas / t_dec:.2f} (goal <= 1.2)")
    print(f"  spume reading alone {t_read:.2f} s (CPU {c_read:.1f} s); measuring costs {per_frame:.2f} ms of CPU "
          f"per frame; the goal leaves at most {budget:.2f} ms per frame on {cores} cores")
    print(f"  ratio within each round (measure right after ffmpeg): "
          f"{', '.join(f'{r:.2f}' for r in paired)}; median {paired[len(paired) // 2]:.2f}")
if not args.keep:
    shutil.rmtree(work)
