#!/usr/bin/python3
"""Sparse reading for the background estimate, against the ffprobe and ffmpeg programs.

References:
  - ffprobe -show_frames key_frame: every frame sp_source_sample reads from a video with keyframes
    between dependent frames (FFV1 with a GOP, H.264 with B-frames) must be a keyframe by ffprobe,
    the nearest unused one to its target position (positions counted in presentation order), and its
    pixels must equal ffmpeg's decode of the whole file at that position (its luma plane, ffmpeg
    -vf extractplanes=y).
  - A long-GOP H.264 file with fewer keyframes than targets, a codec whose frames all stand alone
    (MJPEG) and still frames are declined (done 0), so the caller reads in order.
  - Reading in order with sp_source_skip for the frames passed over (rawvideo NUT, whose packets are
    dropped undecoded; FFV1, decoded; a PNG directory, not read) gives the same positions and pixels
    as ffmpeg's decode.
  - Seeking to each sample (rawvideo in NUT and AVI, whose indexes list every frame at one step;
    Matroska, whose index grows as it is read) reads the same frames as ffmpeg's decode at those
    positions.
  - The measure job on FFV1 with a GOP of 4 (background from keyframes; a GOP of 7 has fewer than
    16 keyframes in 90 frames and reads every frame) agrees with the same frames as
    rawvideo (background from the exact sample positions): detections within 1%, median diameter
    difference below 0.2% (a tolerance of our own choosing: the two backgrounds differ only by which
    frames were sampled).
Fixtures are a synthesised plume encoded at test time.
"""
import argparse
import os
import shutil
import subprocess
import sys
import tempfile

import numpy as np

ap = argparse.ArgumentParser()
ap.add_argument("--build", required=True)
args = ap.parse_args()
PROBE = os.path.join(args.build, "probe_io_sample")
SPUME = os.path.join(args.build, "spume")
failures = []
checks = 0
W, H, N = 160, 200, 90


def check(cond, what):
    global checks
    checks += 1
    if not cond:
        failures.append(what)
        print("FAIL:", what)


def run(cmd):
    return subprocess.run(cmd, check=True, capture_output=True)


def ff_frames(path):
    raw = run(["ffmpeg", "-nostdin", "-loglevel", "error", "-i", path, "-f", "rawvideo", "-fps_mode", "passthrough",
               "-vf", "extractplanes=y", "-pix_fmt", "gray", "-"]).stdout
    return np.frombuffer(raw, np.uint8).reshape(-1, H, W)


def ff_keys(path):
    out = run(["ffprobe", "-v", "error", "-select_streams", "v:0", "-show_entries", "frame=key_frame",
               "-of", "csv=p=0", path]).stdout.decode().split()
    return [i for i, k in enumerate(out) if k.strip().startswith("1")]


def probe(path, n, mode, dump):
    out = [l for l in run([PROBE, path, str(n), "--mode", mode, "--dump", dump]).stdout.decode().split("\n")
           if l.strip()]
    done = int([l for l in out if l.startswith("done")][0].split()[1])
    rows = [tuple(map(int, l.split())) for l in out if not l.startswith("done")]
    got = np.fromfile(dump, np.uint8).reshape(-1, H, W) if rows else None
    return done, rows, got


def nearest_unused(keys, targets, lo, hi):
    used, out = set(), []
    for t in targets:
        best = None
        for k in keys:
            if lo <= k < hi and k not in used and (best is None or abs(k - t) < abs(best - t)):
                best = k
        out.append(best)
        used.add(best)
    return out


work = tempfile.mkdtemp(prefix="spume-keys-")
try:
    scene = os.path.join(work, "scene")
    run([SPUME, "synth", "plume", "--out", scene, "--size", f"{W}x{H}", "--frames", str(N), "--quiet"])
    src = os.path.join(scene, "video.mkv")
    enc = {
        "ffv1-gop7.mkv": ["-c:v", "ffv1", "-g", "7", "-pix_fmt", "gray"],
        "ffv1-gop4.mkv": ["-c:v", "ffv1", "-g", "4", "-pix_fmt", "gray"],
        "h264-bframes.mkv": ["-c:v", "libx264", "-pix_fmt", "yuv420p", "-bf", "2", "-x264-params",
                             "keyint=9:min-keyint=9:scenecut=0"],
        "h264-longgop.mkv": ["-c:v", "libx264", "-pix_fmt", "yuv420p", "-x264-params", "keyint=250"],
        "mjpeg.avi": ["-c:v", "mjpeg", "-q:v", "3", "-pix_fmt", "yuvj420p"],
        "raw.nut": ["-c:v", "rawvideo", "-pix_fmt", "gray", "-f", "nut"],
    }
    files = {}
    for name, opts in enc.items():
        files[name] = os.path.join(work, name)
        run(["ffmpeg", "-nostdin", "-loglevel", "error", "-y", "-i", src, *opts, files[name]])
    dump = os.path.join(work, "dump.raw")

    n = 8
    targets = [(2 * j + 1) * N // (2 * n) for j in range(n)]
    for name in ("ffv1-gop7.mkv", "h264-bframes.mkv"):
        ref = ff_frames(files[name])
        keys = ff_keys(files[name])
        done, rows, got = probe(files[name], n, "keys", dump)
        check(done == 1, f"{name}: keyframe sampling applies ({len(keys)} keyframes)")
        if done != 1:
            continue
        want = nearest_unused(keys, targets, 0, len(ref))
        check([r[0] for r in rows] == sorted(want) or sorted(r[0] for r in rows) == sorted(want),
              f"{name}: positions {[r[0] for r in rows]} are the nearest keyframes {want}")
        for (pos, tgt), img in zip(rows, got):
            check(pos in keys, f"{name}: position {pos} is a keyframe by ffprobe")
            check(want[tgt] == pos, f"{name}: target {targets[tgt]} took keyframe {pos} (expected {want[tgt]})")
            check(np.array_equal(img, ref[pos]), f"{name}: pixels of frame {pos} equal ffmpeg's decode")
        print(f"{name}: {len(rows)} frames read at {[r[0] for r in rows]}, keyframes every "
              f"{keys[1] - keys[0] if len(keys) > 1 else '-'}")

    # A selection (start, count) and a region of interest: positions count from the start.
    name, start, count = "ffv1-gop7.mkv", 10, 70
    ref = ff_frames(files[name])
    keys = ff_keys(files[name])
    out = [l for l in run([PROBE, files[name], "4", "--start", str(start), "--count", str(count), "--roi",
                           "10,20,50,40", "--dump", dump]).stdout.decode().split("\n") if l.strip()]
    rows = [tuple(map(int, l.split())) for l in out if not l.startswith("done")]
    got = np.fromfile(dump, np.uint8).reshape(-1, 40, 50)
    want = nearest_unused(keys, [start + (2 * j + 1) * count // 8 for j in range(4)], start, start + count)
    check("done 1" in out and [start + r[0] for r in rows] == want,
          f"selection: positions {[r[0] for r in rows]} + {start} are the nearest keyframes {want}")
    for (pos, _), img in zip(rows, got):
        check(np.array_equal(img, ref[start + pos, 20:60, 10:60]), f"selection: crop of frame {start + pos}")

    for name in ("h264-longgop.mkv", "mjpeg.avi", "raw.nut"):
        done, rows, _ = probe(files[name], n, "keys", dump)
        check(done == 0 and not rows, f"{name}: keyframe sampling declined (done {done})")
    pngdir = os.path.join(scene, "frames")
    out = run([PROBE, pngdir, str(n), "--mode", "keys", "--fps", "500"]).stdout.decode()
    check("done 0" in out, "still frames: keyframe sampling declined")

    for name in ("raw.nut", "ffv1-gop7.mkv", "mjpeg.avi"):
        ref = ff_frames(files[name])
        done, rows, got = probe(files[name], n, "skip", dump)
        check([r[0] for r in rows] == targets, f"{name}: in-order reading with skips reaches {targets}")
        for (pos, _), img in zip(rows, got):
            check(np.array_equal(img, ref[pos]), f"{name}: pixels of frame {pos} after skipping equal ffmpeg's")

    # Seeking to each target (rawvideo with a constant-step index: NUT, AVI) lands on the right frame.
    # Matroska's index grows as frames are read; whether it seeks or reads on, the frames must be right.
    for name, enc_args, expect_seek in (("raw.nut", None, True), ("raw.avi", ["-c:v", "rawvideo", "-pix_fmt", "gray"], True),
                                        ("raw.mkv", ["-c:v", "rawvideo", "-pix_fmt", "gray"], None)):
        if enc_args:
            files[name] = os.path.join(work, name)
            run(["ffmpeg", "-nostdin", "-loglevel", "error", "-y", "-i", src, *enc_args, files[name]])
        ref = ff_frames(files[name])
        done, rows, got = probe(files[name], n, "seek", dump)
        if expect_seek is not None:
            check((done > 0) == expect_seek, f"{name}: {done} seeks moved (expected some)")
        check([r[0] for r in rows] == targets, f"{name}: frames read after seeking {[r[0] for r in rows]}")
        for (pos, _), img in zip(rows, got):
            check(np.array_equal(img, ref[pos]), f"{name}: pixels of frame {pos} after a seek equal ffmpeg's")

    # The measure job: FFV1 with a GOP estimates its background from keyframes and agrees with the
    # same frames measured from rawvideo (whose background uses the exact sample positions).
    import csv
    import json
    res = {}
    for name in ("ffv1-gop4.mkv", "ffv1-gop7.mkv", "raw.nut"):
        out = os.path.join(work, "m-" + name)
        run([SPUME, "measure", files[name], "--out", out, "--no-report", "--no-track", "--quiet"])
        with open(os.path.join(out, "summary.json")) as f:
            mode = json.load(f)["settings"]["background"]
        with open(os.path.join(out, "bubbles.csv")) as f:
            rows = list(csv.DictReader(f))
        res[name] = (mode, rows)
    check(res["ffv1-gop4.mkv"][0] == "recording keyframes", f"FFV1, 23 keyframes: background {res['ffv1-gop4.mkv'][0]!r}")
    check(res["ffv1-gop7.mkv"][0] == "recording", f"FFV1, 13 keyframes (< 16): background {res['ffv1-gop7.mkv'][0]!r}")
    check(res["raw.nut"][0] == "recording", f"rawvideo: background {res['raw.nut'][0]!r}")
    a, b = res["ffv1-gop4.mkv"][1], res["raw.nut"][1]
    check(abs(len(a) - len(b)) <= 0.01 * len(b), f"detections {len(a)} (keyframes) vs {len(b)} (every frame)")
    key = lambda r: (r["frame"], round(float(r["x_px"])), round(float(r["y_px"])))
    db = {key(r): float(r["d_vol_mm"]) for r in b}
    rel = sorted(abs(float(r["d_vol_mm"]) / db[key(r)] - 1) for r in a if key(r) in db)
    check(len(rel) >= 0.95 * len(b) and rel[len(rel) // 2] < 0.002,
          f"matched {len(rel)}/{len(b)} bubbles, median |d_vol difference| {100 * rel[len(rel) // 2]:.3f}% < 0.2%")
    print(f"measure: {len(a)} vs {len(b)} detections, median |d_vol difference| {100 * rel[len(rel) // 2]:.4f}%")
finally:
    shutil.rmtree(work, ignore_errors=True)

print(f"{checks - len(failures)}/{checks} checks passed")
sys.exit(1 if failures else 0)
