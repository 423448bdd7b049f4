#!/usr/bin/python3
"""Still-frame decoding against Pillow / OpenCV / numpy: every delivered pixel must be identical.

References (the outside world this test checks against):
  - Pillow (Debian python3-pil): Image.open(...).convert('L') for 8-bit PNG of every colour type and
    for TIFF; Image.draft('L', size) for JPEG (libjpeg's own grayscale output = the coded luma).
    Pillow's RGB -> L rule is L = (19595 R + 38470 G + 7471 B + 0x8000) >> 16; this test checks
    that numerically first, so a different Pillow would be noticed here, not in the C code.
  - 16-bit grey PNG/TIFF: the samples as numpy reads them through Pillow / OpenCV.
  - 16-bit colour PNG: the project's documented rule (the same weights on 16-bit samples,
    src/io/source_internal.h) applied by numpy to the raw samples OpenCV reads (IMREAD_UNCHANGED).
  - 1/2/4-bit grey PNG (written here by a small encoder): Pillow's convert('L') scaling.
Fixtures are made at test time in a temporary directory.
"""
import argparse
import os
import struct
import subprocess
import sys
import tempfile
import zlib

import cv2
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


def decode(path, *extra):
    """Run the probe; return (frames as list of arrays, index/time lines, info line)."""
    dump = path + ".dump"
    r = subprocess.run([PROBE, path, "--dump", dump, *extra], capture_output=True, text=True)
    if r.returncode != 0:
        raise RuntimeError("%s: probe failed (%d): %s" % (path, r.returncode, r.stderr.strip()))
    info = dict(kv.split("=", 1) for kv in r.stderr.split("\n")[0].split()[1:])
    lines = r.stdout.split("\n")
    n = int(lines[0].split()[1])
    times = [tuple(l.split()) for l in lines[1:1 + n]]
    w, h = map(int, info["size"].split("x"))
    b = int(info["bytes"])
    raw = np.fromfile(dump, dtype=np.uint8 if b == 1 else "<u2")
    os.remove(dump)
    check(raw.size == n * w * h, "%s: dump holds %d samples, want %d" % (path, raw.size, n * w * h))
    frames = [raw[i * w * h:(i + 1) * w * h].reshape(h, w) for i in range(n)]
    return frames, times, info


def same(path, got, want, what):
    ok = got.shape == want.shape and np.array_equal(got.astype(np.int64), want.astype(np.int64))
    detail = ""
    if not ok and got.shape == want.shape:
        d = np.abs(got.astype(np.int64) - want.astype(np.int64))
        detail = " (%d pixels differ, max %d)" % (np.count_nonzero(d), d.max())
    elif not ok:
        detail = " (shape %s vs %s)" % (got.shape, want.shape)
    check(ok, "%s: %s%s" % (os.path.basename(path), what, detail))


def luma(r, g, b):
    r, g, b = (np.asarray(c, dtype=np.int64) for c in (r, g, b))
    return (r * 19595 + g * 38470 + b * 7471 + 0x8000) >> 16


# Minimal PNG encoder for what Pillow cannot write: low-bit grey and Adam7 interlacing.
def png_chunk(tag, data):
    return struct.pack(">I", len(data)) + tag + data + struct.pack(">I", zlib.crc32(tag + data) & 0xFFFFFFFF)


def pack_rows(a, depth, channels):
    """Rows of samples to PNG scanlines (filter byte 0), big-endian / bit-packed."""
    out = []
    for row in a:
        if depth < 8:
            per = 8 // depth
            vals = list(row) + [0] * ((-len(row)) % per)
            bs = bytearray()
            for i in range(0, len(vals), per):
                byte = 0
                for v in vals[i:i + per]:
                    byte = (byte << depth) | int(v)
                bs.append(byte)
            out.append(b"\0" + bytes(bs))
        elif depth == 8:
            out.append(b"\0" + row.astype(np.uint8).tobytes())
        else:
            out.append(b"\0" + row.astype(">u2").tobytes())
    return b"".join(out)


def write_png(path, a, depth, ctype, interlace=False):
    h, w = a.shape[:2]
    channels = {0: 1, 2: 3, 4: 2, 6: 4}[ctype]
    if interlace:
        raw = b""
        for x0, y0, dx, dy in [(0, 0, 8, 8), (4, 0, 8, 8), (0, 4, 4, 8), (2, 0, 4, 4), (0, 2, 2, 4), (1, 0, 2, 2), (0, 1, 1, 2)]:
            sub = a[y0::dy, x0::dx]
            if sub.shape[0] and sub.shape[1]:
                raw += pack_rows(sub.reshape(sub.shape[0], -1), depth, channels)
    else:
        raw = pack_rows(a.reshape(h, -1), depth, channels)
    ihdr = struct.pack(">IIBBBBB", w, h, depth, ctype, 0, 0, 1 if interlace else 0)
    with open(path, "wb") as f:
        f.write(b"\x89PNG\r\n\x1a\n" + png_chunk(b"IHDR", ihdr) + png_chunk(b"IDAT", zlib.compress(raw)) + png_chunk(b"IEND", b""))


def scene(h, w, seed, channels=None, maxv=255):
    """A random smooth-plus-noise picture so every value range is used."""
    rng = np.random.default_rng(seed)
    shape = (h, w) if channels is None else (h, w, channels)
    yy, xx = np.mgrid[0:h, 0:w]
    base = (xx * 7 + yy * 3) % (maxv + 1)
    if channels is not None:
        base = np.stack([np.roll(base, 5 * c, axis=1) for c in range(channels)], axis=-1)
    noise = rng.integers(0, maxv + 1, shape)
    return np.where(rng.random(shape) < 0.5, base, noise).astype(np.uint16 if maxv > 255 else np.uint8)


tmp = tempfile.mkdtemp(prefix="spume_pillow_")

# 0. The documented luma rule is Pillow's (Debian Pillow, checked here on every RGB triple class).
rgb = scene(61, 67, 1, 3)
check(np.array_equal(np.asarray(Image.fromarray(rgb, "RGB").convert("L")), luma(rgb[..., 0], rgb[..., 1], rgb[..., 2])),
      "Pillow's RGB->L is (19595R+38470G+7471B+0x8000)>>16")

# 1. PNG written by Pillow in each mode; reference: Pillow convert('L') (8-bit), raw samples (16-bit).
W, H = 53, 37  # odd sizes: no row happens to be a multiple of anything
pngs = {}
pngs["L"] = Image.fromarray(scene(H, W, 2), "L")
pngs["RGB"] = Image.fromarray(scene(H, W, 3, 3), "RGB")
pngs["RGBA"] = Image.fromarray(scene(H, W, 4, 4), "RGBA")
pngs["LA"] = Image.fromarray(scene(H, W, 5, 2), "LA")
pngs["P"] = Image.fromarray(scene(H, W, 6, 3), "RGB").quantize(colors=200)
pal = Image.fromarray(scene(H, W, 7, 3), "RGB").quantize(colors=16)
pal.info["transparency"] = 3
pngs["P_trns"] = pal
pngs["1"] = Image.fromarray(scene(H, W, 8) > 127).convert("1")
for name, im in pngs.items():
    p = os.path.join(tmp, "pil_%s.png" % name)
    im.save(p, **({"transparency": 3} if name == "P_trns" else {}))
    frames, _, info = decode(p)
    check(info["bytes"] == "1" and info["bits"] == "8", "%s: 8-bit output" % p)
    same(p, frames[0], np.asarray(Image.open(p).convert("L")), "PNG %s vs Pillow convert('L')" % name)

# 16-bit grey PNG: Pillow writes mode I;16; reference = the samples Pillow and OpenCV read.
g16 = scene(H, W, 9, maxv=65535)
p = os.path.join(tmp, "g16.png")
Image.fromarray(g16).save(p)
frames, _, info = decode(p)
check(info["bytes"] == "2" and info["bits"] == "16", "g16.png: 16-bit output")
same(p, frames[0], np.asarray(Image.open(p)), "16-bit grey vs Pillow samples")
same(p, frames[0], cv2.imread(p, cv2.IMREAD_UNCHANGED), "16-bit grey vs OpenCV samples")

# 16-bit colour PNG (OpenCV writes it from BGR arrays): documented 16-bit luma on raw samples.
for name, ch in (("rgb16", 3), ("rgba16", 4)):
    c16 = scene(H, W, 10 + ch, ch, maxv=65535)
    p = os.path.join(tmp, name + ".png")
    cv2.imwrite(p, c16)
    raw = cv2.imread(p, cv2.IMREAD_UNCHANGED)  # B, G, R(, A)
    check(raw.dtype == np.uint16 and raw.shape[2] == ch, "%s: OpenCV wrote 16-bit colour" % p)
    frames, _, info = decode(p)
    check(info["bytes"] == "2", "%s: 16-bit output" % p)
    same(p, frames[0], luma(raw[..., 2], raw[..., 1], raw[..., 0]), "16-bit colour vs numpy luma of raw samples")

# Low-bit grey and interlaced PNG from the encoder above; reference: Pillow convert('L').
for depth in (1, 2, 4):
    a = scene(H, W, 20 + depth) % (1 << depth)
    for inter in (False, True):
        p = os.path.join(tmp, "grey%d%s.png" % (depth, "i" if inter else ""))
        write_png(p, a, depth, 0, inter)
        frames, _, _ = decode(p)
        same(p, frames[0], np.asarray(Image.open(p).convert("L")), "%d-bit grey%s vs Pillow" % (depth, " Adam7" if inter else ""))
for name, arr, depth, ct in (("rgb8i", scene(H, W, 30, 3), 8, 2), ("g16i", scene(H, W, 31, maxv=65535), 16, 0),
                             ("la8i", scene(H, W, 32, 2), 8, 4)):
    p = os.path.join(tmp, name + ".png")
    write_png(p, arr, depth, ct, True)
    frames, _, _ = decode(p)
    want = np.asarray(Image.open(p).convert("L")) if depth == 8 else cv2.imread(p, cv2.IMREAD_UNCHANGED)
    same(p, frames[0], want, "Adam7 %s vs %s" % (name, "Pillow" if depth == 8 else "OpenCV"))

# 2. JPEG: baseline and progressive, grey and colour, several qualities and subsamplings.
# Reference: Pillow with draft('L', size), i.e. libjpeg's grayscale output at full scale.
for mode in ("L", "RGB"):
    src = Image.fromarray(scene(H * 2 + 1, W * 2 + 3, 40, None if mode == "L" else 3), mode)
    for q in (30, 75, 95):
        for prog in (False, True):
            for sub in ((0, 2) if mode == "RGB" else (0,)):
                p = os.path.join(tmp, "j_%s_q%d_%s_s%d.jpg" % (mode, q, "p" if prog else "b", sub))
                src.save(p, quality=q, progressive=prog, subsampling=sub)
                frames, _, info = decode(p)
                ref = Image.open(p)
                ref.draft("L", ref.size)
                check(ref.size == src.size and ref.mode == "L", "%s: Pillow draft kept full size in L" % p)
                same(p, frames[0], np.asarray(ref), "JPEG vs Pillow draft('L')")
                check(info["format"] == "jpeg", "%s: decoded by the JPEG reader" % p)

# 3. TIFF through libavcodec: grey 8/16 and RGB, uncompressed and deflate; reference Pillow.
for name, im in (("t8", Image.fromarray(scene(H, W, 50), "L")), ("t16", Image.fromarray(scene(H, W, 51, maxv=65535))),
                 ("trgb", Image.fromarray(scene(H, W, 52, 3), "RGB"))):
    for comp in (None, "tiff_deflate"):
        p = os.path.join(tmp, "%s_%s.tif" % (name, comp or "raw"))
        im.save(p, **({"compression": comp} if comp else {}))
        frames, _, info = decode(p)
        ref = Image.open(p)
        want = np.asarray(ref) if name == "t16" else np.asarray(ref.convert("L"))
        same(p, frames[0], want, "TIFF %s vs Pillow" % name)
        check(info["format"] == "tiff", "%s: decoded as tiff" % p)

# 4. Directories and patterns: natural order, selection, ROI, timing t = index / fps.
d = os.path.join(tmp, "seq")
os.mkdir(d)
nums = [0, 1, 2, 9, 10, 11, 100]
imgs = {}
for k in nums:
    a = scene(H, W, 60 + k)
    imgs[k] = a
    Image.fromarray(a, "L").save(os.path.join(d, "f%d.png" % k))
open(os.path.join(d, "notes.txt"), "w").write("not a frame\n")
frames, times, info = decode(d, "--fps", "40")
check(len(frames) == len(nums), "dir: %d frames, want %d" % (len(frames), len(nums)))
for i, k in enumerate(nums[:len(frames)]):
    same(d, frames[i], imgs[k], "dir frame %d is f%d.png (natural order)" % (i, k))
    check(times[i] == (str(i), "%.9f" % (i / 40)), "dir frame %d time %s" % (i, times[i]))
frames, times, _ = decode(d, "--fps", "40", "--start", "1", "--step", "2", "--count", "2", "--roi", "5,7,20,11")
check([t[0] for t in times] == ["1", "3"], "dir selection indices %s, want 1 3" % [t[0] for t in times])
if len(frames) == 2:
    same(d, frames[1], imgs[9][7:18, 5:25], "dir ROI crop of frame 3")

pd = os.path.join(tmp, "pat")
os.mkdir(pd)
for k in range(3, 9):
    Image.fromarray(imgs[0] + k, "L").save(os.path.join(pd, "img_%05d.png" % k))
Image.fromarray(imgs[0], "L").save(os.path.join(pd, "img_%05d.png" % 10))  # after a gap: not part
frames, times, info = decode(os.path.join(pd, "img_%05d.png"), "--fps", "8")
check(len(frames) == 6, "pattern: %d frames, want 6 (3..8)" % len(frames))
for i, fr in enumerate(frames):
    same(pd, fr, imgs[0] + 3 + i, "pattern frame %d" % i)
check(times[-1:] == [("5", "%.9f" % (5 / 8))], "pattern last time %s" % times[-1:])

print("%d checks, %d failures" % (checks, len(failures)))
if not failures:
    import shutil

    shutil.rmtree(tmp)
sys.exit(1 if failures else 0)
