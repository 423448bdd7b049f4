#!/usr/bin/python3
"""Runs the spume command on a list of bad inputs and prints docs/bad-inputs.md's table (Markdown):
what was tried, the exit status, the one line on stderr, and whether any file was left under a final
output name. Not a pass/fail test (tests/e2e/test_bad_input.py and tests/ref/test_fuzz_regress.py
are); a row whose answer is a crash or a hang is marked so, to be fixed.

usage: /usr/bin/python3 tests/fuzz/bad_inputs.py --build BUILD > docs/bad-inputs-table.md
"""
import argparse
import os
import shutil
import signal
import struct
import subprocess
import tempfile
import wave
import zlib

import numpy as np
from PIL import Image

ap = argparse.ArgumentParser()
ap.add_argument("--build", required=True)
args = ap.parse_args()
spume = os.path.join(os.path.abspath(args.build), "spume")
work = tempfile.mkdtemp(prefix="spume-badin-")
FINAL = ("bubbles.csv", "frames.csv", "summary.json", "pings.csv", "listen.json")
rows = []


def ff(*a):
    subprocess.run(["ffmpeg", "-nostdin", "-loglevel", "error", "-y", *a], check=True)


def png_chunk(tag, data):
    return struct.pack(">I", len(data)) + tag + data + struct.pack(">I", zlib.crc32(tag + data) & 0xFFFFFFFF)


def frames_dir(name, sizes, mode="L"):
    d = os.path.join(work, name)
    os.makedirs(d, exist_ok=True)
    rng = np.random.default_rng(3)
    for i, (w, h) in enumerate(sizes):
        Image.fromarray(rng.integers(90, 210, (h, w), dtype=np.uint8)).convert(mode).save(
            os.path.join(d, f"f{i:04d}.png"))
    return d


def put(name, data):
    p = os.path.join(work, name)
    with open(p, "wb") as f:
        f.write(data)
    return p


def short(p):
    return p.replace(work + "/", "")


def tryit(what, cmd_args, out=None):
    out = out or os.path.join(work, "out-%d" % len(rows))
    argv = [spume, *cmd_args]
    if "--out" not in cmd_args and cmd_args[0] in ("measure", "listen"):
        argv += ["--out", out]
    argv += ["--quiet"] if cmd_args[0] in ("measure", "listen") else []
    try:
        p = subprocess.run(argv, capture_output=True, text=True, timeout=120)
        code = p.returncode
        lines = [l for l in p.stderr.splitlines() if l.strip()]
        if code < 0:
            ans = f"**crash: signal {signal.Signals(-code).name}**"
        else:
            ans = lines[-1] if lines else "(nothing on stderr)"
            if len(lines) > 1:
                ans += f" (+{len(lines) - 1} more lines)"
    except subprocess.TimeoutExpired:
        code, ans = "hang", "**no answer in 120 s**"
    left = [f for f in FINAL if os.path.isdir(out) and os.path.exists(os.path.join(out, f))]
    left += [f for f in (os.listdir(out) if os.path.isdir(out) else []) if f.endswith(".partial")]
    ans = ans.replace(work + "/", "").replace("|", "\\|")
    rows.append((what, " ".join(short(a) for a in cmd_args), code, ans, ", ".join(left) or "none"))


good = frames_dir("good", [(64, 48)] * 4)

# ---- paths and file kinds
tryit("missing file", ["measure", os.path.join(work, "nothing.mkv")])
tryit("empty file", ["measure", put("empty.mkv", b"")])
os.makedirs(os.path.join(work, "emptydir"))
tryit("directory with no images", ["measure", os.path.join(work, "emptydir"), "--fps", "100"])
tryit("text file named .mp4", ["measure", put("notes.mp4", b"lab notebook, not a video\n" * 40)])
tryit("random bytes named .mkv", ["measure", put("noise.mkv", np.random.default_rng(1).bytes(50000))])
tryit("/dev/zero as input (endless, not a regular file)", ["measure", "/dev/zero"])
fifo = os.path.join(work, "pipe.nut")
os.mkfifo(fifo)
tryit("a FIFO as input", ["measure", fifo])
loop = os.path.join(work, "loop.mkv")
os.symlink(loop, loop)
tryit("symlink to itself", ["measure", loop])
tryit("malformed frame pattern", ["measure", os.path.join(work, "f%d%d.png"), "--fps", "100"])
tryit("pattern matching no files", ["measure", os.path.join(work, "none%05d.png"), "--fps", "100"])

# ---- video files
clip = os.path.join(work, "clip.mkv")
ff("-f", "lavfi", "-i", "testsrc2=size=160x120:rate=25", "-frames:v", "50", "-c:v", "ffv1", clip)
data = open(clip, "rb").read()
tryit("FFV1 MKV cut to a third", ["measure", put("cut.mkv", data[: len(data) // 3])])
tryit("FFV1 MKV cut inside the header (200 bytes)", ["measure", put("head.mkv", data[:200])])
b = bytearray(data)
rng = np.random.default_rng(5)
for i in rng.integers(len(b) // 4, len(b), 200):
    b[int(i)] ^= 0xFF
tryit("FFV1 MKV with 200 bytes inverted in the frames", ["measure", put("garbled.mkv", bytes(b))])
mp4 = os.path.join(work, "clip.mp4")
ff("-f", "lavfi", "-i", "testsrc2=size=160x120:rate=25", "-frames:v", "50", "-c:v", "libx264", "-pix_fmt",
   "yuv420p", mp4)
data = open(mp4, "rb").read()
tryit("H.264 MP4 cut in half (index at the end missing)", ["measure", put("cut.mp4", data[: len(data) // 2])])
wav = os.path.join(work, "tone.wav")
ff("-f", "lavfi", "-i", "sine=frequency=1000:sample_rate=48000:duration=1", wav)
tryit("audio-only WAV given to measure", ["measure", wav])
nut = os.path.join(work, "raw.nut")
ff("-f", "lavfi", "-i", "testsrc2=size=64x48:rate=25", "-frames:v", "5", "-pix_fmt", "gray", "-c:v", "rawvideo",
   nut)
tryit("video ROI outside the frame", ["measure", nut, "--roi", "60,40,32,32"])
tryit("--start beyond the last frame", ["measure", nut, "--start", "100"])
tryit("--fps 0 / negative / NaN", ["measure", nut, "--fps", "nan"])
tryit("--step 0", ["measure", nut, "--step", "0"])

# ---- still frames
tryit("stills without --fps", ["measure", good])
tryit("frame size changes mid-run", ["measure", frames_dir("mixed", [(64, 48), (64, 48), (80, 48)]), "--fps",
                                     "100"])
trunc = frames_dir("truncpng", [(64, 48)] * 3)
v = os.path.join(trunc, "f0001.png")
cut = open(v, "rb").read()[:60]
open(v, "wb").write(cut)
tryit("truncated PNG in a sequence", ["measure", trunc, "--fps", "100"])
crc = frames_dir("badcrc", [(64, 48)] * 3)
v = os.path.join(crc, "f0001.png")
b = bytearray(open(v, "rb").read())
b[-20] ^= 0x55
open(v, "wb").write(bytes(b))
tryit("PNG with a corrupt IDAT (CRC mismatch)", ["measure", crc, "--fps", "100"])
for name, (w, h) in (("absurd", (100000, 100000)), ("zero", (0, 48)), ("wide", (16385, 1)),
                     ("area", (16384, 8192))):
    dd = os.path.join(work, "png-" + name)
    os.makedirs(dd)
    blob = b"\x89PNG\r\n\x1a\n" + png_chunk(b"IHDR", struct.pack(">IIBBBBB", w, h, 8, 0, 0, 0, 0)) + \
        png_chunk(b"IDAT", zlib.compress(b"\0" * 64)) + png_chunk(b"IEND", b"")
    open(os.path.join(dd, "f0000.png"), "wb").write(blob)
    tryit(f"PNG header claiming {w}x{h}", ["measure", dd, "--fps", "100"])
jdir = os.path.join(work, "jpeg")
os.makedirs(jdir)
Image.fromarray(np.full((48, 64), 150, np.uint8)).save(os.path.join(jdir, "f0000.jpg"), quality=90)
jb = bytearray(open(os.path.join(jdir, "f0000.jpg"), "rb").read())
sof = jb.find(b"\xff\xc0")
jb[sof + 5:sof + 9] = struct.pack(">HH", 65500, 65500)
tryit("JPEG whose SOF claims 65500x65500", ["measure", put("huge.jpg", bytes(jb)), "--fps", "100"])
jb = open(os.path.join(jdir, "f0000.jpg"), "rb").read()
tryit("JPEG cut in half", ["measure", put("half.jpg", jb[: len(jb) // 2]), "--fps", "100"])
tryit("PGM with maxval 0", ["measure", put("m0.pgm", b"P5\n4 4\n0\n" + b"\0" * 16), "--fps", "100"])
tryit("PGM claiming 100000x100000", ["measure", put("big.pgm", b"P5\n100000 100000\n255\n" + b"\0" * 64),
                                     "--fps", "100"])
tryit("PGM with too few samples", ["measure", put("few.pgm", b"P5\n64 48\n255\n" + b"\x80" * 100), "--fps",
                                   "100"])
bmp = bytearray(b"BM" + struct.pack("<IHHI", 54 + 16, 0, 0, 54) + struct.pack("<IiiHHIIiiII", 40, 4, -2000000000,
                                                                            1, 8, 0, 16, 0, 0, 0, 0) + b"\0" * 16)
tryit("BMP claiming height -2e9", ["measure", put("neg.bmp", bytes(bmp)), "--fps", "100"])
tif = os.path.join(work, "t.tif")
Image.fromarray(np.full((40, 64), 150, np.uint8)).save(tif)
tb = open(tif, "rb").read()
tryit("TIFF cut to 100 bytes", ["measure", put("cut.tif", tb[:100]), "--fps", "100"])
tryit("background image of another size", ["measure", good, "--fps", "100", "--background",
                                           os.path.join(work, "t.tif")])
tryit("background image that is a text file", ["measure", good, "--fps", "100", "--background",
                                                put("bg.png", b"not an image")])

# ---- output
tryit("output directory under a regular file", ["measure", good, "--fps", "100"],
      out=os.path.join(put("afile", b""), "sub"))
if os.path.exists("/dev/full"):
    # --out /dev/full itself is not a directory; a directory whose output files land on a full
    # device is what a full disk looks like to the writer.
    tryit("output directory is /dev/full", ["measure", good, "--fps", "100"], out="/dev/full")
# A full disk: a 16 KiB tmpfs (needs root; skipped otherwise). The frames are large enough that the
# tables do not fit.
small = os.path.join(work, "small-fs")
os.makedirs(small)
if os.geteuid() == 0 and subprocess.run(["mount", "-t", "tmpfs", "-o", "size=16k", "tmpfs", small]).returncode == 0:
    try:
        busy = frames_dir("busy", [(256, 256)] * 40)
        for i in range(40):
            a = np.full((256, 256), 200, np.uint8)
            yy, xx = np.mgrid[:256, :256]
            for k in range(60):
                cx, cy = (k * 37 + i) % 250 + 3, (k * 53 + 2 * i) % 250 + 3
                a[(xx - cx) ** 2 + (yy - cy) ** 2 < 9] = 40
            Image.fromarray(a).save(os.path.join(busy, f"f{i:04d}.png"))
        tryit("output on a full disk (16 KiB tmpfs)", ["measure", busy, "--fps", "100"], out=os.path.join(small, "o"))
    finally:
        subprocess.run(["umount", small])

# ---- measure --resume: an interrupted run (real SIGINT once detection is under way), then refusals.
# "files left" lists the interrupted run's own tables, which every refusal must leave as they were.
import glob
import time

plume = os.path.join(work, "plume")
subprocess.run([spume, "synth", "plume", "--out", plume, "--frames", "80", "--no-png", "--quiet"], check=True)
pv = os.path.join(plume, "video.mkv")
run = os.path.join(work, "run")
p = subprocess.Popen([spume, "measure", pv, "--out", run, "--no-report", "--quiet", "--threads", "1"],
                     stderr=subprocess.DEVNULL)
while p.poll() is None and not glob.glob(os.path.join(run, ".bubbles.csv.*.partial")):
    time.sleep(0.01)
time.sleep(0.3)
p.send_signal(signal.SIGINT)
p.wait()
if p.returncode == 130:
    def copy_run(name, edit=None):
        d = os.path.join(work, name)
        shutil.copytree(run, d)
        if edit:
            f, how = edit
            b = bytearray(open(os.path.join(d, f), "rb").read())
            if how == "flip":
                b[len(b) // 2] ^= 0x40
            elif how == "random":
                b = bytearray(np.random.default_rng(9).bytes(4096))
            elif how == "escape":
                # An escape sequence in a saved setting, the checksum made to agree (see fnv_fix).
                i = b.index(b"threshold=") + len(b"threshold=")
                b[i:i + 4] = b"\x1b[2J"[:4]
                fnv_fix(b)
            elif how == "totals":
                # The saved frame count (first field of the running totals, after the text blocks,
                # v[6], three hashes and the totals' size) set to the largest int64, checksum agreeing.
                v = 20
                for _ in range(2):
                    v += 4 + struct.unpack_from("<I", b, v)[0]
                struct.pack_into("<q", b, v + 76, 2**63 - 1)
                fnv_fix(b)
            elif how == "nan":
                # The first detection's x made NaN in the spill, with the checkpoint's record of the
                # spill (its FNV-1a) and the checkpoint's own checksum made to agree.
                off = 0
                while struct.unpack_from("<i", b, off + 16)[0] == 0:
                    off += 24
                b[off + 24:off + 32] = struct.pack("<d", float("nan"))
                ck = bytearray(open(os.path.join(d, "resume.checkpoint"), "rb").read())
                v = 20
                for _ in range(2):
                    v += 4 + struct.unpack_from("<I", ck, v)[0]
                struct.pack_into("<Q", ck, v + 48, fnv(bytes(b)))
                fnv_fix(ck)
                open(os.path.join(d, "resume.checkpoint"), "wb").write(bytes(ck))
            else:
                b = b[: len(b) // 3]
            open(os.path.join(d, f), "wb").write(bytes(b))
        return d

    def fnv(data):
        """FNV-1a 64 (Fowler, Noll, Vo), the checksum resume.c uses."""
        h = 0xCBF29CE484222325
        for c in data:
            h = ((h ^ c) * 0x100000001B3) & 0xFFFFFFFFFFFFFFFF
        return h

    def fnv_fix(b):
        """A checkpoint's last 8 bytes: FNV-1a 64 of every byte before them (native order, here little)."""
        struct.pack_into("<Q", b, len(b) - 8, fnv(bytes(b[:-8])))

    tryit("--resume, no such output folder", ["measure", pv, "--resume"], out=os.path.join(work, "nowhere"))
    os.makedirs(os.path.join(work, "fresh"))
    tryit("--resume, folder without a run", ["measure", pv, "--resume"], out=os.path.join(work, "fresh"))
    done = os.path.join(work, "done")
    subprocess.run([spume, "measure", pv, "--out", done, "--no-report", "--quiet"], check=True)
    tryit("--resume, run complete already", ["measure", pv, "--resume"], out=done)
    tryit("--resume with another option", ["measure", pv, "--resume", "--threshold", "0.6"], out=copy_run("r1"))
    tryit("--resume on another input", ["measure", clip, "--resume"], out=copy_run("r2"))
    tryit("--resume, checkpoint with one byte flipped", ["measure", pv, "--resume"],
          out=copy_run("r3", ("resume.checkpoint", "flip")))
    tryit("--resume, checkpoint cut to a third", ["measure", pv, "--resume"],
          out=copy_run("r4", ("resume.checkpoint", "cut")))
    tryit("--resume, linker spill with one byte flipped", ["measure", pv, "--resume"],
          out=copy_run("r5", ("resume.links", "flip")))
    tryit("--resume, bubbles.csv cut after the interrupt", ["measure", pv, "--resume"],
          out=copy_run("r6", ("bubbles.csv", "cut")))
    tryit("--resume, checkpoint replaced by random bytes", ["measure", pv, "--resume"],
          out=copy_run("r7", ("resume.checkpoint", "random")))
    tryit("--resume, checkpoint with an escape sequence in a setting, checksum made to agree",
          ["measure", pv, "--resume"], out=copy_run("r8", ("resume.checkpoint", "escape")))
    tryit("--resume, checkpoint whose saved frame count is 2^63-1, checksum made to agree",
          ["measure", pv, "--resume"], out=copy_run("r10", ("resume.checkpoint", "totals")))
    tryit("--resume, spill with a NaN position, checksums made to agree", ["measure", pv, "--resume"],
          out=copy_run("r9", ("resume.links", "nan")))
else:
    rows.append(("--resume refusals", "measure ... --resume", "skipped", "the run was not interrupted", "none"))

# ---- audio (listen)
tryit("listen: video without an audio track", ["listen", clip])
silent = os.path.join(work, "silent.wav")
with wave.open(silent, "wb") as sw:
    sw.setnchannels(1)
    sw.setsampwidth(2)
    sw.setframerate(48000)
    sw.writeframes(b"\0" * 96000)
tryit("listen: silent WAV", ["listen", silent])
w = open(wav, "rb").read()
tryit("listen: WAV cut in half", ["listen", put("halfwav.wav", w[: len(w) // 2])])
tryit("listen: WAV header claiming 1e9 Hz", ["listen", put("rate.wav", w[:24] + struct.pack("<I", 1000000000) +
                                                           w[28:])])
tryit("listen: channel 5 of a mono file", ["listen", wav, "--channel", "5"])
tryit("listen: liquid preset that is not JSON", ["listen", wav, "--liquid", put("oil.json", b"{rho: 870")])
tryit("listen: liquid preset with an absurd density",
      ["listen", wav, "--liquid", put("dense.json", b'{"name":"x","model":"fixed","temp_c":20,"rho_kg_m3":1e9,'
                                                    b'"mu_pa_s":0.001,"sigma_n_m":0.07}')])

# ---- calibration
tryit("calibrate: blank image", ["calibrate", put("blank.pgm", b"P5\n64 48\n255\n" + b"\xc8" * 3072),
                                 "--pitch-mm", "1", "--out", os.path.join(work, "cal.json")])
tryit("calibrate: negative pitch", ["calibrate", os.path.join(work, "blank.pgm"), "--pitch-mm", "-1", "--out",
                                    os.path.join(work, "cal.json")])

print("| bad input | command | exit | answer (stderr) | files left (final or partial) |")
print("| --- | --- | --- | --- | --- |")
for what, cmd, code, ans, left in rows:
    print(f"| {what} | `spume {cmd}` | {code} | {ans} | {left} |")
shutil.rmtree(work)
