#!/usr/bin/python3
"""Bad input to the frame sources: every case must exit with status 2 (SP_ERR_INPUT) and one line
naming the offending file and the problem.

Absurd sizes must be refused before any allocation: those cases run under an address-space limit
(RLIMIT_AS) far below what the claimed frame would need, so an attempt to allocate it would end as an
out-of-memory failure (status 1) instead of the expected status 2.
Fixtures are generated at test time (Pillow, ffmpeg, and hand-patched headers).
"""
import argparse
import os
import resource
import shutil
import struct
import subprocess
import sys
import tempfile
import zlib

import numpy as np
from PIL import Image

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


def limit_as():
    resource.setrlimit(resource.RLIMIT_AS, (1 << 30, 1 << 30))  # 1 GiB


# An AddressSanitizer build (scripts/sanitize.sh) reserves terabytes of shadow address space at start,
# so RLIMIT_AS would kill it before main; its allocator's own cap does the same job there: any single
# allocation above 1 GiB fails (returns NULL, so status 1) instead of succeeding.
ASAN = b"__asan_init" in open(PROBE, "rb").read()


def limited_env():
    e = dict(os.environ)
    opts = e.get("ASAN_OPTIONS", "")
    e["ASAN_OPTIONS"] = (opts + ":" if opts else "") + "max_allocation_size_mb=1024:allocator_may_return_null=1"
    return e


def bad(label, path, names, words=(), extra=(), limited=False):
    """Expect status 2 and one error line naming `names` (the file at fault) and containing words."""
    if limited and ASAN:
        r = subprocess.run([PROBE, path, *extra], capture_output=True, text=True, env=limited_env())
    else:
        r = subprocess.run([PROBE, path, *extra], capture_output=True, text=True,
                           preexec_fn=limit_as if limited else None)
    lines = [l for l in r.stderr.split("\n") if l and not l.startswith("info ")]
    msg = lines[-1] if lines else ""
    check(r.returncode == 2, "%s: exit %d, want 2 (%s)" % (label, r.returncode, msg))
    check(len(lines) == 1, "%s: %d error lines, want 1" % (label, len(lines)))
    check(names in msg, "%s: message does not name %s: %r" % (label, names, msg))
    for w in words:
        check(w.lower() in msg.lower(), "%s: message lacks %r: %r" % (label, w, msg))
    print("ok  %-28s %s" % (label, msg))


def chunk(tag, data):
    return struct.pack(">I", len(data)) + tag + data + struct.pack(">I", zlib.crc32(tag + data) & 0xFFFFFFFF)


def png_claiming(path, w, h):
    """A PNG with a valid IHDR (correct CRC) claiming w x h and a tiny IDAT."""
    ihdr = struct.pack(">IIBBBBB", w, h, 8, 0, 0, 0, 0)
    with open(path, "wb") as f:
        f.write(b"\x89PNG\r\n\x1a\n" + chunk(b"IHDR", ihdr) + chunk(b"IDAT", zlib.compress(b"\0" * 64)) + chunk(b"IEND", b""))


def cut(src, dst, frac=0.5):
    data = open(src, "rb").read()
    open(dst, "wb").write(data[:int(len(data) * frac)])


def grey(h, w, seed=0, dtype=np.uint8):
    return np.random.default_rng(seed).integers(0, 256 if dtype == np.uint8 else 65536, (h, w)).astype(dtype)


tmp = tempfile.mkdtemp(prefix="spume_errors_")
T = lambda *p: os.path.join(tmp, *p)

# Missing, empty, wrong content.
bad("missing file", T("nothere.mkv"), T("nothere.mkv"), ["no such file"])
open(T("empty.mp4"), "wb").close()
bad("empty file", T("empty.mp4"), T("empty.mp4"), ["empty"])
open(T("text.mp4"), "w").write("this is not a video\n" * 20)
bad("text named .mp4", T("text.mp4"), T("text.mp4"))

# Truncated MP4, cut in half: index at the end (absent) and at the front (samples missing).
def mp4(path, *flags):
    src = np.concatenate([grey(64, 96, i)[None] for i in range(30)])
    subprocess.run(["ffmpeg", "-v", "error", "-y", "-f", "rawvideo", "-pix_fmt", "gray", "-s", "96x64", "-framerate", "25",
                    "-i", "-", "-c:v", "libx264", "-pix_fmt", "yuv420p", *flags, path], input=src.tobytes(), check=True)


if b"libx264" in subprocess.run(["ffmpeg", "-hide_banner", "-encoders"], capture_output=True).stdout:
    mp4(T("whole.mp4"))
    cut(T("whole.mp4"), T("half.mp4"))
    bad("truncated mp4", T("half.mp4"), T("half.mp4"))
    mp4(T("whole_fs.mp4"), "-movflags", "+faststart")
    cut(T("whole_fs.mp4"), T("half_fs.mp4"))
    bad("truncated mp4 (faststart)", T("half_fs.mp4"), T("half_fs.mp4"))
else:
    print("note: no libx264 encoder; the truncated-MP4 cases use MJPEG in MOV")
    subprocess.run(["ffmpeg", "-v", "error", "-f", "lavfi", "-i", "testsrc=size=96x64:rate=25", "-frames:v", "30",
                    "-c:v", "mjpeg", T("whole.mov")], check=True)
    cut(T("whole.mov"), T("half.mov"))
    bad("truncated mov", T("half.mov"), T("half.mov"))

# Truncated and corrupt stills, alone and inside a sequence.
Image.fromarray(grey(40, 50)).save(T("good.png"))
cut(T("good.png"), T("trunc.png"))
bad("truncated png", T("trunc.png"), T("trunc.png"), ["png"])
Image.fromarray(np.stack([grey(40, 50, s) for s in range(3)], -1)).save(T("good.jpg"), quality=90)
cut(T("good.jpg"), T("trunc.jpg"))
bad("truncated jpeg", T("trunc.jpg"), T("trunc.jpg"), ["jpeg"])
Image.fromarray(grey(40, 50, 0, np.uint16)).save(T("good.tif"))
cut(T("good.tif"), T("trunc.tif"), 0.3)
bad("truncated tiff", T("trunc.tif"), T("trunc.tif"))
os.mkdir(T("seqtrunc"))
for k in range(4):
    Image.fromarray(grey(40, 50, k)).save(T("seqtrunc", "f%d.png" % k))
cut(T("seqtrunc", "f2.png"), T("seqtrunc", "f2.png.tmp"))
os.replace(T("seqtrunc", "f2.png.tmp"), T("seqtrunc", "f2.png"))
bad("truncated frame in dir", T("seqtrunc"), T("seqtrunc", "f2.png"), extra=["--fps", "10"])
os.mkdir(T("seqtext"))
Image.fromarray(grey(40, 50)).save(T("seqtext", "a0.png"))
open(T("seqtext", "a1.png"), "w").write("not an image")
bad("text named .png in dir", T("seqtext"), T("seqtext", "a1.png"), extra=["--fps", "10"])

# Absurd dimensions, refused before allocating (run under a 1 GiB address-space limit).
png_claiming(T("huge.png"), 100000, 100000)
bad("png 100000x100000", T("huge.png"), T("huge.png"), ["100000x100000", "cap"], limited=True)
png_claiming(T("toomany.png"), 9000, 9000)  # each side under SP_MAX_DIM, 81 Mpx over SP_MAX_PIXELS
bad("png over SP_MAX_PIXELS", T("toomany.png"), T("toomany.png"), ["9000x9000", "cap"], limited=True)
j = bytearray(open(T("good.jpg"), "rb").read())
sof = j.find(b"\xff\xc0")
j[sof + 5:sof + 9] = struct.pack(">HH", 65000, 65000)  # height, width in SOF0
open(T("huge.jpg"), "wb").write(j)
bad("jpeg 65000x65000", T("huge.jpg"), T("huge.jpg"), ["65000x65000", "cap"], limited=True)
t = bytearray(open(T("good.tif"), "rb").read())
le = t[:2] == b"II"
ifd = struct.unpack("<I" if le else ">I", t[4:8])[0]
ntag = struct.unpack("<H" if le else ">H", t[ifd:ifd + 2])[0]
for i in range(ntag):
    e = ifd + 2 + 12 * i
    tag, typ = struct.unpack("<HH" if le else ">HH", t[e:e + 4])
    if tag in (256, 257):
        t[e + 2:e + 12] = struct.pack("<HII" if le else ">HII", 4, 1, 100000)
open(T("huge.tif"), "wb").write(t)
bad("tiff 100000x100000", T("huge.tif"), T("huge.tif"), ["100000x100000"], limited=True)

# Directories: empty, without images, unreadable.
os.mkdir(T("emptydir"))
bad("empty dir", T("emptydir"), T("emptydir"), ["no image files"], extra=["--fps", "10"])
os.mkdir(T("txtdir"))
open(T("txtdir", "readme.txt"), "w").write("x")
bad("dir without images", T("txtdir"), T("txtdir"), ["no image files"], extra=["--fps", "10"])
os.mkdir(T("locked"))
Image.fromarray(grey(8, 8)).save(T("locked", "f0.png"))
os.chmod(T("locked"), 0)
if os.geteuid() != 0:
    bad("unreadable dir", T("locked"), T("locked"), ["permission"], extra=["--fps", "10"])
else:
    print("note: running as root, which reads any directory; the unreadable-directory case checks a path "
          "through a regular file instead")
    bad("path through a file", T("good.png", "frames"), T("good.png", "frames"), ["not a directory"], extra=["--fps", "10"])
os.chmod(T("locked"), 0o755)

# Stills without a frame rate.
bad("dir without --fps", T("seqtrunc"), T("seqtrunc"), ["--fps"])
bad("pattern without --fps", T("seqtrunc", "f%d.png"), T("seqtrunc", "f%d.png"), ["--fps"])
bad("pattern with no files", T("seqtrunc", "g%03d.png"), T("seqtrunc", "g%03d.png"), ["pattern"], extra=["--fps", "5"])
bad("malformed pattern", T("x%s%d.png"), T("x%s%d.png"), ["pattern"], extra=["--fps", "5"])

# Size or depth change mid-sequence.
os.mkdir(T("sizes"))
for k in range(3):
    Image.fromarray(grey(40, 50 if k < 2 else 51, k)).save(T("sizes", "s%02d.png" % k))
bad("size change in dir", T("sizes"), T("sizes", "s02.png"), ["frame 2", "51x40"], extra=["--fps", "10"])
os.mkdir(T("depths"))
Image.fromarray(grey(40, 50)).save(T("depths", "d0.png"))
Image.fromarray(grey(40, 50, 1, np.uint16)).save(T("depths", "d1.png"))
bad("depth change in dir", T("depths"), T("depths", "d1.png"), ["16 bits"], extra=["--fps", "10"])

# Size change mid-video: two raw H.264 (or MPEG-2) elementary streams of different sizes, joined.
enc = "libx264" if b"libx264" in subprocess.run(["ffmpeg", "-hide_banner", "-encoders"], capture_output=True).stdout else "mpeg2video"
ext = "h264" if enc == "libx264" else "m2v"
for name, size in (("a", "96x64"), ("b", "80x64")):
    subprocess.run(["ffmpeg", "-v", "error", "-y", "-f", "lavfi", "-i", "testsrc=size=%s:rate=25" % size, "-frames:v", "5",
                    "-c:v", enc, "-pix_fmt", "yuv420p", "-bf", "0", T("%s.%s" % (name, ext))], check=True)
open(T("joined." + ext), "wb").write(open(T("a." + ext), "rb").read() + open(T("b." + ext), "rb").read())
bad("size change in video", T("joined." + ext), T("joined." + ext), ["frame 5", "80x64"])

# ROI outside the frame, bad selection.
bad("roi outside (video)", T("joined." + ext), T("joined." + ext), ["region of interest"], extra=["--roi", "90,0,10,10"])
bad("roi outside (stills)", T("sizes"), T("sizes"), ["region of interest"], extra=["--fps", "10", "--roi", "-1,0,5,5"])
bad("step 0", T("good.png"), T("good.png"), ["step"], extra=["--step", "0"])

# The good fixtures themselves decode (so the cases above fail for the reason they claim).
for p, extra in ((T("good.png"), []), (T("good.jpg"), []), (T("good.tif"), []), (T("a." + ext), []),
                 (T("sizes", "s%02d.png"), ["--fps", "10", "--count", "2"])):
    r = subprocess.run([PROBE, p, *extra], capture_output=True, text=True)
    check(r.returncode == 0, "%s: good fixture fails: %s" % (p, r.stderr.strip()))

print("%d checks, %d failures" % (checks, len(failures)))
if not failures:
    shutil.rmtree(tmp)
sys.exit(1 if failures else 0)
