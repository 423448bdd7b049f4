"""Bad inputs: each exits with status 2, prints one line on stderr naming the file and the problem,
and leaves no file under a final output name."""
import os
import shutil
import struct
import subprocess
import zlib

import numpy as np
from PIL import Image

from common import Checks, build_dir, spume, tmpdir

build = build_dir()
work = tmpdir("bad")
c = Checks()
FINAL = ("bubbles.csv", "frames.csv", "summary.json")


def png_chunk(tag, data):
    return struct.pack(">I", len(data)) + tag + data + struct.pack(">I", zlib.crc32(tag + data) & 0xFFFFFFFF)


def write_frames(d, sizes):
    os.makedirs(d, exist_ok=True)
    rng = np.random.default_rng(1)
    for i, (w, h) in enumerate(sizes):
        Image.fromarray(rng.integers(100, 200, (h, w), dtype=np.uint8)).save(os.path.join(d, f"f{i:04d}.png"))


def expect_bad(name, args, needle):
    out = os.path.join(work, "out-" + name.replace(" ", "-"))
    p = spume(build, "measure", *args, "--out", out, "--quiet", check=False)
    lines = [l for l in p.stderr.splitlines() if l.strip()]
    print(f"  [{name}] exit {p.returncode}: {p.stderr.strip()}")
    c.check(p.returncode == 2, f"{name}: exit status 2")
    c.check(len(lines) == 1, f"{name}: one line on stderr")
    c.check(needle in p.stderr, f"{name}: message names '{needle}'")
    left = [f for f in FINAL if os.path.exists(os.path.join(out, f))]
    c.check(not left, f"{name}: no final output file left ({left})")
    stray = [f for f in os.listdir(out)] if os.path.isdir(out) else []
    c.check(not stray, f"{name}: no temporary file left ({stray})")


good = os.path.join(work, "good")
write_frames(good, [(64, 48)] * 4)

missing = os.path.join(work, "nothing-here.mkv")
expect_bad("missing file", [missing, "--fps", "100"], missing)

empty = os.path.join(work, "empty.mkv")
open(empty, "wb").close()
expect_bad("empty file", [empty], empty)

trunc_png = os.path.join(work, "truncpng")
write_frames(trunc_png, [(64, 48)] * 4)
victim = os.path.join(trunc_png, "f0002.png")
data = open(victim, "rb").read()
open(victim, "wb").write(data[: len(data) // 2])
expect_bad("truncated PNG", [trunc_png, "--fps", "100"], "f0002.png")

mp4 = os.path.join(work, "clip.mp4")
subprocess.run(["ffmpeg", "-loglevel", "error", "-y", "-f", "lavfi", "-i", "testsrc=size=128x96:rate=25",
                "-frames:v", "50", "-c:v", "mpeg4", mp4], check=True)
data = open(mp4, "rb").read()
trunc_mp4 = os.path.join(work, "truncated.mp4")
open(trunc_mp4, "wb").write(data[: len(data) // 3])
expect_bad("truncated MP4", [trunc_mp4], trunc_mp4)

text = os.path.join(work, "notes.mp4")
open(text, "w").write("this is a lab notebook entry, not a video\n" * 20)
expect_bad("text named .mp4", [text], text)

expect_bad("stills without --fps", [good], "--fps")

mixed = os.path.join(work, "mixed")
write_frames(mixed, [(64, 48), (64, 48), (80, 48), (64, 48)])
expect_bad("frame size change", [mixed, "--fps", "100"], "f0002.png")

huge = os.path.join(work, "huge")
os.makedirs(huge)
ihdr = struct.pack(">IIBBBBB", 100000, 100000, 8, 0, 0, 0, 0)
blob = b"\x89PNG\r\n\x1a\n" + png_chunk(b"IHDR", ihdr) + png_chunk(b"IDAT", zlib.compress(b"\0" * 100)) + \
    png_chunk(b"IEND", b"")
open(os.path.join(huge, "f0000.png"), "wb").write(blob)
expect_bad("absurd dimensions", [huge, "--fps", "100"], "f0000.png")

# Unwritable output directory: its parent is a regular file, so it can never be created.
afile = os.path.join(work, "afile")
open(afile, "w").close()
p = spume(build, "measure", good, "--fps", "100", "--out", os.path.join(afile, "sub"), "--quiet", check=False)
print(f"  [unwritable output] exit {p.returncode}: {p.stderr.strip()}")
c.check(p.returncode == 2, "unwritable output directory: exit status 2")
c.check(afile in p.stderr and len(p.stderr.strip().splitlines()) == 1, "unwritable output: one line naming it")

expect_bad("ROI outside the frame", [good, "--fps", "100", "--roi", "40,40,64,64"], good)
expect_bad("unknown option", [good, "--fps", "100", "--frobnicate"], "--frobnicate")

# And the good input works, as a control.
p = spume(build, "measure", good, "--fps", "100", "--out", os.path.join(work, "ok"), "--quiet", check=False)
c.check(p.returncode == 0, f"control: good stills measured (exit {p.returncode}: {p.stderr.strip()})")
shutil.rmtree(work)
c.done()
