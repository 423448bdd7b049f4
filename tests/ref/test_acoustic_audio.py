#!/usr/bin/python3
"""Audio input against numpy and ffmpeg: a stereo test signal written with Python's wave module, then
converted by the ffmpeg program to WAV 24/32-bit integer and 32-bit float, FLAC, and the audio track of
an MKV video. Every sample probe_acoustic_audio delivers (in odd-sized blocks) must equal the source
within the format's quantisation, for the chosen channel and for the channel mean; lengths must match
ffprobe's sample count.
"""
import argparse
import os
import shutil
import subprocess
import sys
import tempfile
import wave

import numpy as np

ap = argparse.ArgumentParser()
ap.add_argument("--build", required=True)
args = ap.parse_args()
PROBE = os.path.join(args.build, "probe_acoustic_audio")
failures = []


def check(cond, what):
    if not cond:
        failures.append(what)
        print("FAIL:", what)


tmp = tempfile.mkdtemp(prefix="spume_audio_")
fs, n = 44100, 44100 * 2 + 123
t = np.arange(n) / fs
rng = np.random.default_rng(7)
left = 0.5 * np.sin(2 * np.pi * 1000 * t) + rng.normal(0, 0.05, n)
right = 0.3 * np.sin(2 * np.pi * 3300 * t) * np.exp(-3 * t)
q = np.round(np.clip(np.stack([left, right], 1), -1, 32767 / 32768) * 32768).astype("<i2")
src = os.path.join(tmp, "s16.wav")
with wave.open(src, "wb") as w:
    w.setnchannels(2)
    w.setsampwidth(2)
    w.setframerate(fs)
    w.writeframes(q.tobytes())
truth = q.astype(np.float64) / 32768


def ffmpeg(out, *opts):
    subprocess.run(["ffmpeg", "-v", "error", "-y", "-i", src, *opts, out], check=True)
    return out


def ffprobe_samples(path):
    r = subprocess.run(["ffprobe", "-v", "error", "-select_streams", "a:0", "-count_packets", "-show_entries",
                        "stream=duration_ts,sample_rate", "-of", "csv=p=0", path], capture_output=True, text=True)
    return r.stdout.strip()


cases = [("s16 wav", src, 1e-9, n)]
cases.append(("s24 wav", ffmpeg(os.path.join(tmp, "s24.wav"), "-c:a", "pcm_s24le"), 1e-9, n))
cases.append(("s32 wav", ffmpeg(os.path.join(tmp, "s32.wav"), "-c:a", "pcm_s32le"), 1e-9, n))
cases.append(("f32 wav", ffmpeg(os.path.join(tmp, "f32.wav"), "-c:a", "pcm_f32le"), 1e-9, n))
cases.append(("flac", ffmpeg(os.path.join(tmp, "a.flac"), "-c:a", "flac"), 1e-9, n))
vid = os.path.join(tmp, "video.mkv")
subprocess.run(["ffmpeg", "-v", "error", "-y", "-f", "lavfi", "-i", "testsrc=size=64x48:rate=25:duration=2.1",
                "-i", src, "-c:v", "ffv1", "-c:a", "pcm_s16le", "-shortest", vid], check=True)
cases.append(("mkv audio track", vid, 1e-9, None))

for label, path, tol, want_n in cases:
    for ch, ref in ((0, truth[:, 0]), (1, truth[:, 1]), (-1, truth.mean(1))):
        dump = os.path.join(tmp, "dump.f32")
        r = subprocess.run([PROBE, path, "--channel", str(ch), "--dump", dump, "--block", "777"],
                           capture_output=True, text=True)
        check(r.returncode == 0, "%s ch %d: exit %d %s" % (label, ch, r.returncode, r.stderr))
        got = np.fromfile(dump, "<f4").astype(np.float64)
        m = min(len(got), len(ref))
        if want_n is not None:
            check(len(got) == want_n, "%s ch %d: %d samples, want %d" % (label, ch, len(got), want_n))
        else:
            check(m > 0.95 * min(len(ref), 2.1 * fs), "%s: only %d samples" % (label, len(got)))
        err = np.max(np.abs(got[:m] - ref[:m])) if m else 1
        # float32 delivery: 16-bit values are exact in float32; the channel mean rounds to float32.
        check(err <= 1e-7, "%s ch %d: max error %.3g" % (label, ch, err))
        if ch == 0:
            fp = ffprobe_samples(path).split(",")
            if len(fp) == 2 and fp[1].isdigit():
                check(int(fp[1]) == len(got), "%s: %d samples, ffprobe says %s" % (label, len(got), fp[1]))
            print("ok  %-16s %s | max err %.2g | ffprobe %s" % (label, r.stdout.strip(), err, ffprobe_samples(path)))

# 8-bit WAV: unsigned with offset 128.
u8 = os.path.join(tmp, "u8.wav")
with wave.open(u8, "wb") as w:
    w.setnchannels(1)
    w.setsampwidth(1)
    w.setframerate(8000)
    w.writeframes(np.array([128, 0, 255, 192], np.uint8).tobytes() * 100)
r = subprocess.run([PROBE, u8, "--dump", os.path.join(tmp, "u8.f32")], capture_output=True, text=True)
got = np.fromfile(os.path.join(tmp, "u8.f32"), "<f4")
check(r.returncode == 0 and np.allclose(got[:4], [0, -1, 127 / 128, 0.5]), "8-bit WAV: %s %s" % (got[:4], r.stderr))

shutil.rmtree(tmp, ignore_errors=True)
print("%d failures" % len(failures))
sys.exit(1 if failures else 0)
