#!/usr/bin/python3
"""Video decoding against the ffmpeg / ffprobe programs.

References:
  - ffprobe -show_frames best_effort_timestamp_time: the number of frames and every frame time
    (relative to the first frame) must match to 1e-6 s, including a variable-frame-rate file;
    the announced/counted frame total must equal ffprobe's frame count.
  - Lossless files (FFV1 gray/gray16/gray12/yuv420p10le in MKV, rawvideo in NUT/AVI, a TIFF image2
    sequence): every pixel must equal the source frames that were piped into ffmpeg.
  - Lossy files (H.264/MP4, MJPEG/AVI): luma must equal ffmpeg's own decode of the file to the
    file's native luma (-pix_fmt gray / gray10le), the same decoder run by a second program.
Fixtures are generated at test time.
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
PROBE = os.path.join(args.build, "probe_io_decode")
failures = []
checks = 0


def check(cond, what):
    global checks
    checks += 1
    if not cond:
        failures.append(what)
        print("FAIL:", what)


def run(cmd, **kw):
    return subprocess.run(cmd, check=True, capture_output=True, **kw)


def decode(path, *extra):
    dump = path + ".dump"
    r = subprocess.run([PROBE, path, "--dump", dump, *extra], capture_output=True, text=True)
    if r.returncode != 0:
        raise RuntimeError("%s: probe failed (%d): %s" % (path, r.returncode, r.stderr.strip()))
    info = dict(kv.split("=", 1) for kv in r.stderr.split("\n")[0].split()[1:])
    lines = r.stdout.split("\n")
    n = int(lines[0].split()[1])
    times = [float(l.split()[1]) for l in lines[1:1 + n]]
    w, h = map(int, info["size"].split("x"))
    raw = np.fromfile(dump, dtype=np.uint8 if info["bytes"] == "1" else "<u2")
    os.remove(dump)
    check(raw.size == n * w * h, "%s: dump size" % path)
    return raw.reshape(n, h, w), times, info


def ffprobe_times(path):
    out = run(["ffprobe", "-v", "error", "-select_streams", "v:0", "-show_entries", "frame=best_effort_timestamp_time",
               "-of", "csv=p=0", path], text=True).stdout.split()
    t = [float(x.strip(",")) for x in out if x.strip(",") not in ("", "N/A")]
    check(len(t) == len(out), "%s: ffprobe gave a time for every frame" % path)
    return [x - t[0] for x in t]


def ffmpeg_luma(path, fmt, dtype):
    """ffmpeg's own decode of the luma plane (the reference decoder run by another program)."""
    raw = run(["ffmpeg", "-v", "error", "-i", path, "-map", "0:v:0", "-fps_mode", "passthrough", "-f", "rawvideo",
               "-pix_fmt", fmt, "-"]).stdout
    return np.frombuffer(raw, dtype=dtype)


def frames_src(n, h, w, maxv, seed):
    rng = np.random.default_rng(seed)
    yy, xx = np.mgrid[0:h, 0:w]
    out = []
    for i in range(n):
        base = ((xx * 5 + yy * 3 + 11 * i) * (maxv // 255 if maxv > 255 else 1)) % (maxv + 1)
        noise = rng.integers(0, maxv + 1, (h, w))
        out.append(np.where((xx // 8 + yy // 8 + i) % 2 == 0, base, noise))
    return np.array(out, dtype=np.uint8 if maxv <= 255 else np.uint16)


def encode(path, src, in_fmt, out_args, rate="25"):
    n, h, w = src.shape
    run(["ffmpeg", "-v", "error", "-y", "-f", "rawvideo", "-pix_fmt", in_fmt, "-s", "%dx%d" % (w, h), "-framerate", rate,
         "-i", "-", *out_args, path], input=src.astype("<u2" if src.dtype == np.uint16 else np.uint8).tobytes())


def compare_times(path, times, info, extra_note=""):
    ref = ffprobe_times(path)
    check(len(times) == len(ref), "%s: %d frames, ffprobe %d %s" % (path, len(times), len(ref), extra_note))
    check(int(info["total"]) == len(ref), "%s: frames_total %s, ffprobe %d" % (path, info["total"], len(ref)))
    if len(times) == len(ref):
        err = max(abs(a - b) for a, b in zip(times, ref))
        check(err <= 1e-6, "%s: frame times differ from ffprobe by %.3g s" % (path, err))
    return ref


tmp = tempfile.mkdtemp(prefix="spume_ffprobe_")
N, H, W = 24, 48, 66

# Lossless: pixel identity with the source frames, times identical to ffprobe.
g8 = frames_src(N, H, W, 255, 1)
g16 = frames_src(N, H, W, 65535, 2)
g12 = frames_src(N, H, W, 4095, 3)
cases = [
    ("ffv1_gray.mkv", g8, "gray", ["-c:v", "ffv1", "-pix_fmt", "gray"], 8),
    ("ffv1_gray16.mkv", g16, "gray16le", ["-c:v", "ffv1", "-pix_fmt", "gray16le"], 16),
    ("ffv1_gray12.mkv", g12, "gray12le", ["-c:v", "ffv1", "-pix_fmt", "gray12le"], 12),
    ("raw_gray.nut", g8, "gray", ["-c:v", "rawvideo", "-pix_fmt", "gray"], 8),
    ("raw_gray16.nut", g16, "gray16le", ["-c:v", "rawvideo", "-pix_fmt", "gray16le"], 16),
    ("raw_gray.avi", g8, "gray", ["-c:v", "rawvideo", "-pix_fmt", "gray"], 8),
    ("raw_gray.mkv", g8, "gray", ["-c:v", "rawvideo", "-pix_fmt", "gray"], 8),
]
for name, src, in_fmt, oargs, bits in cases:
    p = os.path.join(tmp, name)
    encode(p, src, in_fmt, oargs)
    frames, times, info = decode(p)
    compare_times(p, times, info)
    check(info["bits"] == str(bits), "%s: bits %s, want %d" % (name, info["bits"], bits))
    check(float(info["fps"]) == 25.0, "%s: fps %s, want 25 (ffprobe avg_frame_rate)" % (name, info["fps"]))
    check(frames.shape == src.shape and np.array_equal(frames, src), "%s: pixels equal the source frames" % name)

# yuv420p10le (FFV1): the luma plane comes out as 10-bit values in 16-bit samples. The source is
# given as gray10le so ffmpeg's conversion to yuv420p10le keeps luma exactly (full range grey ->
# limited would change values, so compare with ffmpeg's own decode to gray10le instead).
p = os.path.join(tmp, "ffv1_yuv10.mkv")
encode(p, frames_src(N, H, W, 1023, 4), "gray10le", ["-c:v", "ffv1", "-pix_fmt", "yuv420p10le"])
frames, times, info = decode(p)
compare_times(p, times, info)
check(info["bytes"] == "2" and info["bits"] == "10", "yuv420p10le: bytes %s bits %s, want 2 / 10" % (info["bytes"], info["bits"]))
ref = run(["ffmpeg", "-v", "error", "-i", p, "-f", "rawvideo", "-vf", "extractplanes=y", "-pix_fmt", "gray10le", "-"]).stdout
check(np.array_equal(frames.ravel(), np.frombuffer(ref, "<u2")), "yuv420p10le: luma equals ffmpeg extractplanes=y")

# Lossy codecs: count and times against ffprobe, luma against ffmpeg's own decode of the Y plane.
rgbish = frames_src(N, H, W, 255, 5)
lossy = [("mjpeg.avi", ["-c:v", "mjpeg", "-q:v", "3", "-pix_fmt", "yuvj420p"])]
if b"libx264" in run(["ffmpeg", "-hide_banner", "-encoders"]).stdout:
    lossy += [("h264.mp4", ["-c:v", "libx264", "-preset", "veryfast", "-pix_fmt", "yuv420p", "-bf", "2"]),
              ("h264_vfr.mkv", ["-c:v", "libx264", "-preset", "veryfast", "-pix_fmt", "yuv420p"])]
else:
    print("note: ffmpeg has no libx264 encoder here; the H.264/MP4 case is skipped")
for name, oargs in lossy:
    p = os.path.join(tmp, name)
    if "vfr" in name:
        # Variable frame rate: jittered presentation times kept by the muxer.
        oargs = ["-vf", "settb=1/1000,setpts='(N*0.04+mod(N\\,3)*0.013)/TB'", "-fps_mode", "passthrough",
                 "-enc_time_base", "1/1000"] + oargs
    encode(p, rgbish, "gray", oargs)
    frames, times, info = decode(p)
    ref_t = compare_times(p, times, info)
    if "vfr" in name:
        gaps = np.diff(ref_t)
        check(gaps.min() > 0 and gaps.max() - gaps.min() > 0.01,
              "%s: the file really has a variable frame rate (gaps %s)" % (name, gaps[:4]))
    ref = run(["ffmpeg", "-v", "error", "-i", p, "-f", "rawvideo", "-fps_mode", "passthrough", "-vf", "extractplanes=y",
               "-pix_fmt", "gray", "-"]).stdout
    check(np.array_equal(frames.ravel(), np.frombuffer(ref, np.uint8)), "%s: luma equals ffmpeg extractplanes=y" % name)

# --fps override: t = index / fps; selection keeps indices of the recording.
p = os.path.join(tmp, "ffv1_gray.mkv")
frames, times, info = decode(p, "--fps", "1000", "--start", "5", "--step", "3", "--count", "4", "--roi", "3,4,20,10")
check(len(times) == 4 and all(abs(t - (5 + 3 * i) / 1000) < 1e-12 for i, t in enumerate(times)), "override times %s" % times)
check(info["selected"] == "4", "frames_selected %s, want 4" % info["selected"])
check(np.array_equal(frames, g8[5:17:3, 4:14, 3:23]), "selection + ROI pixels equal the source crop")

# TIFF image2 sequence written by ffmpeg, read back as a pattern and as a directory.
sd = os.path.join(tmp, "tifs")
os.mkdir(sd)
encode(os.path.join(sd, "frame%03d.tif"), g16[:7], "gray16le", ["-c:v", "tiff", "-pix_fmt", "gray16le", "-f", "image2"])
ref = ffprobe_times_img = run(["ffprobe", "-v", "error", "-framerate", "30", "-i", os.path.join(sd, "frame%03d.tif"),
                               "-show_entries", "frame=best_effort_timestamp_time", "-of", "csv=p=0"], text=True).stdout.split()
ref = [float(x.strip(",")) for x in ref]
for src_path in (os.path.join(sd, "frame%03d.tif"), sd):
    frames, times, info = decode(src_path, "--fps", "30")
    check(len(times) == len(ref) == 7, "%s: %d frames, ffprobe %d" % (src_path, len(times), len(ref)))
    check(max(abs(a - (b - ref[0])) for a, b in zip(times, ref)) <= 1e-6, "%s: times vs ffprobe -framerate 30" % src_path)
    check(np.array_equal(frames, g16[:7]), "%s: TIFF pixels equal the source" % src_path)

print("%d checks, %d failures" % (checks, len(failures)))
if not failures:
    shutil.rmtree(tmp)
sys.exit(1 if failures else 0)
