#!/usr/bin/python3
"""Reference test of the synthesiser's files against outside readers.

- Pillow, OpenCV and the PNG chunks themselves: frames are grey PNGs of the right size, mode and
  bit depth (8-bit, or 16-bit with an sBIT of 12 and every value within 12 bits).
- ffprobe/ffmpeg: video.mkv is FFV1 (gray / gray16le), has the right frame count, frame times are
  index/fps, and it decodes to exactly the PNG frames (lossless).
- The truth tables keep the CONTRACT's conventions (y_mm upward from the bottom-left pixel centre,
  d_area/d_vol/aspect definitions, tilt in (-90, 90]), tracks agree with their rows, and the
  truth agrees with the picture: scikit-image measures the large in-focus bubbles of a sizing frame
  (area, centroid, second-moment axes and tilt) where the truth puts them.
"""
import argparse
import csv
import json
import math
import os
import struct
import subprocess
import sys
import tempfile

import cv2
import numpy as np
from PIL import Image
from scipy import ndimage
from skimage import measure

failures = []


def check(cond, msg):
    if not cond:
        failures.append(msg)
        print("FAIL:", msg)


def run(probe, scenario, out, *opts):
    r = subprocess.run([probe, scenario, out, *opts], capture_output=True, text=True, timeout=300)
    if r.returncode != 0:
        print(r.stderr)
        sys.exit(f"probe_synth_run {scenario} failed with {r.returncode}")


def png_chunks(path):
    """(IHDR bit depth, colour type, sBIT grey bits or None) read straight from the chunks."""
    with open(path, "rb") as f:
        data = f.read()
    assert data[:8] == b"\x89PNG\r\n\x1a\n"
    pos, depth, ctype, sbit = 8, None, None, None
    while pos < len(data):
        n, kind = struct.unpack(">I4s", data[pos:pos + 8])
        body = data[pos + 8:pos + 8 + n]
        if kind == b"IHDR":
            depth, ctype = body[8], body[9]
        elif kind == b"sBIT":
            sbit = body[0]
        elif kind == b"IDAT":
            break
        pos += 12 + n
    return depth, ctype, sbit


def check_frames(out, scene):
    w, h, n, bits = scene["width"], scene["height"], scene["frames"], scene["bits"]
    names = sorted(os.listdir(os.path.join(out, "frames")))
    check(names == [f"frame_{i:05d}.png" for i in range(n)], f"{out}: frame files {names[:3]}... for {n} frames")
    arrays = []
    for i in range(n):
        p = os.path.join(out, "frames", f"frame_{i:05d}.png")
        im = Image.open(p)
        check(im.size == (w, h), f"{p}: Pillow size {im.size}")
        depth, ctype, sbit = png_chunks(p)
        check(ctype == 0, f"{p}: PNG colour type {ctype}, want 0 (grey)")
        if scene["bytes"] == 1:
            check(im.mode == "L" and depth == 8, f"{p}: mode {im.mode} depth {depth}, want L / 8")
        else:
            # Pillow 9 opens 16-bit grey as "I", later versions as "I;16"
            check(im.mode in ("I", "I;16") and depth == 16, f"{p}: mode {im.mode} depth {depth}, want 16-bit")
            check(sbit == bits, f"{p}: sBIT {sbit}, want {bits}")
        a = cv2.imread(p, cv2.IMREAD_UNCHANGED)
        check(a is not None and a.shape == (h, w), f"{p}: OpenCV shape {None if a is None else a.shape}")
        check(a.dtype == (np.uint8 if scene["bytes"] == 1 else np.uint16), f"{p}: OpenCV dtype {a.dtype}")
        check(np.array_equal(np.asarray(im).astype(np.int64), a.astype(np.int64)), f"{p}: Pillow and OpenCV differ")
        check(int(a.max()) <= (1 << bits) - 1, f"{p}: value {a.max()} beyond {bits} bits")
        # the light fills most of the range: centre of a lit frame above half scale
        check(np.percentile(a, 90) > 0.5 * ((1 << bits) - 1), f"{p}: frame too dark for {bits} bits")
        arrays.append(a)
    return arrays


def check_video(out, scene, arrays):
    path = os.path.join(out, "video.mkv")
    w, h, n, fps = scene["width"], scene["height"], scene["frames"], scene["fps"]
    r = subprocess.run(["ffprobe", "-v", "error", "-select_streams", "v:0", "-count_frames", "-show_entries",
                        "stream=codec_name,pix_fmt,width,height,nb_read_frames", "-of", "json", path],
                       capture_output=True, text=True, check=True)
    st = json.loads(r.stdout)["streams"][0]
    pix = "gray" if scene["bytes"] == 1 else "gray16le"
    check(st["codec_name"] == "ffv1", f"{path}: codec {st['codec_name']}")
    check(st["pix_fmt"] == pix, f"{path}: pix_fmt {st['pix_fmt']}, want {pix}")
    check((st["width"], st["height"]) == (w, h), f"{path}: size {st['width']}x{st['height']}")
    check(int(st["nb_read_frames"]) == n, f"{path}: {st['nb_read_frames']} frames, want {n}")
    r = subprocess.run(["ffprobe", "-v", "error", "-select_streams", "v:0", "-show_entries",
                        "frame=best_effort_timestamp_time", "-of", "csv=p=0", path],
                       capture_output=True, text=True, check=True)
    times = [float(x.strip().strip(",")) for x in r.stdout.split() if x.strip()]
    check(len(times) == n, f"{path}: {len(times)} frame times")
    # Matroska stores milliseconds: index/fps to within half a millisecond
    bad = [(i, t) for i, t in enumerate(times) if abs(t - i / fps) > 0.0005 + 1e-9]
    check(not bad, f"{path}: frame times not index/fps: {bad[:3]}")
    r = subprocess.run(["ffmpeg", "-v", "error", "-i", path, "-f", "rawvideo", "-pix_fmt", pix, "-"],
                       capture_output=True, check=True)
    dt = np.uint8 if scene["bytes"] == 1 else np.dtype("<u2")
    dec = np.frombuffer(r.stdout, dtype=dt).reshape(-1, h, w)
    check(dec.shape[0] == n, f"{path}: decoded {dec.shape[0]} frames")
    for i in range(min(n, dec.shape[0])):
        check(np.array_equal(dec[i].astype(np.int64), arrays[i].astype(np.int64)),
              f"{path}: frame {i} differs from the PNG (FFV1 is lossless)")


def read_csv(path):
    with open(path, newline="") as f:
        return list(csv.DictReader(f))


def check_truth(out, scene, rising):
    bub = read_csv(os.path.join(out, "truth_bubbles.csv"))
    trk = read_csv(os.path.join(out, "truth_tracks.csv"))
    need = "frame,t_s,track,x_px,y_px,x_mm,y_mm,major_mm,minor_mm,tilt_deg,d_area_mm,d_vol_mm,aspect,edge".split(",")
    need += ["major_px", "minor_px", "z_mm", "in_focus", "overlap"]
    check(bub and all(c in bub[0] for c in need), f"{out}: truth_bubbles.csv lacks columns")
    tneed = "track,frame_first,frame_last,n,d_vol_mm,growth_mm_s,vx_mm_s,vy_mm_s,speed_mm_s,site".split(",")
    check(trk and all(c in trk[0] for c in tneed), f"{out}: truth_tracks.csv lacks columns")
    s, h, fps, n = scene["mm_per_px"], scene["height"], scene["fps"], scene["frames"]
    per_track = {}
    for r in bub:
        f = int(r["frame"])
        x, y = float(r["x_px"]), float(r["y_px"])
        M, m = float(r["major_mm"]), float(r["minor_mm"])
        ok = (0 <= f < n and abs(float(r["t_s"]) - f / fps) < 1e-6 and int(r["track"]) >= 1
              and abs(float(r["x_mm"]) - x * s) < 2e-4 and abs(float(r["y_mm"]) - (h - 1 - y) * s) < 2e-4
              and abs(float(r["d_area_mm"]) - math.sqrt(M * m)) < 2e-4
              and abs(float(r["d_vol_mm"]) - (M * M * m) ** (1 / 3)) < 2e-4
              and abs(float(r["aspect"]) - m / M) < 2e-4 and 0 < float(r["aspect"]) <= 1
              and -90 < float(r["tilt_deg"]) <= 90 and abs(float(r["major_px"]) * s - M) < 2e-4
              and int(r["in_focus"]) == (abs(float(r["z_mm"])) <= scene["dof_mm"] / 2 + 1e-4)
              and r["edge"] in ("0", "1") and r["overlap"] in ("0", "1"))
        if not ok:
            check(False, f"{out}: row breaks the conventions: {r}")
            break
        per_track.setdefault(int(r["track"]), []).append((f / fps, float(r["x_mm"]), float(r["y_mm"]), f))
    check(sorted(per_track) == sorted(int(t["track"]) for t in trk), f"{out}: tracks and rows disagree on ids")
    for t in trk:
        rows = per_track.get(int(t["track"]), [])
        fr = [r[3] for r in rows]
        check(len(rows) == int(t["n"]) and fr and min(fr) == int(t["frame_first"]) and max(fr) == int(t["frame_last"]),
              f"{out}: track {t['track']} extent disagrees with its rows")
        if len(rows) >= 3:
            tt = np.array([r[0] for r in rows])
            vx = np.polyfit(tt, [r[1] for r in rows], 1)[0]
            vy = np.polyfit(tt, [r[2] for r in rows], 1)[0]
            check(abs(vx - float(t["vx_mm_s"])) < 0.01 + 1e-4 * abs(vx) and abs(vy - float(t["vy_mm_s"])) < 0.01 + 1e-4 * abs(vy),
                  f"{out}: track {t['track']} velocity {t['vx_mm_s']},{t['vy_mm_s']} vs numpy {vx:.4f},{vy:.4f}")
            if rising:
                # the scenario's promise: rise speed 0.2-0.3 m/s, positive upward
                check(195 <= vy <= 305, f"{out}: track {t['track']} rises at {vy:.1f} mm/s")
    return bub


def check_picture(out, scene, bub, frame0):
    """The truth sits on the picture: large in-focus isolated bubbles measured by scikit-image."""
    rows = [r for r in bub if r["frame"] == "0" and r["edge"] == "0" and r["in_focus"] == "1"
            and float(r["major_px"]) >= 30 and r["overlap"] == "0"]
    check(len(rows) >= 5, f"{out}: only {len(rows)} large in-focus bubbles to compare")
    img = frame0.astype(np.float64)
    hh, ww = img.shape
    checked = 0
    for r in rows:
        x, y = float(r["x_px"]), float(r["y_px"])
        a, b = float(r["major_px"]) / 2, float(r["minor_px"]) / 2
        tilt = float(r["tilt_deg"])
        R = int(math.ceil(a)) + 6
        x0, x1, y0, y1 = int(x) - R, int(x) + R + 1, int(y) - R, int(y) + R + 1
        if x0 < 0 or y0 < 0 or x1 > ww or y1 > hh:
            continue
        crop = img[y0:y1, x0:x1]
        bright = np.percentile(crop, 95)
        # 70 % of the light: crossed halfway through the outline pixels for shoulders of 0.3-0.5
        mask = ndimage.binary_fill_holes(crop < 0.7 * bright)
        lab = measure.label(mask)
        cl = lab[int(round(y)) - y0, int(round(x)) - x0]
        if cl == 0:
            check(False, f"{out}: no dark blob at the truth centre of track {r['track']}")
            continue
        reg = measure.regionprops((lab == cl).astype(np.uint8))[0]
        cy, cx = reg.centroid
        area = math.pi * a * b
        check(abs(reg.area - area) <= 0.03 * area + 2,
              f"{out}: track {r['track']}: skimage area {reg.area} vs truth {area:.1f}")
        check(math.hypot(cx + x0 - x, cy + y0 - y) < 0.5,
              f"{out}: track {r['track']}: skimage centroid {cx + x0:.2f},{cy + y0:.2f} vs {x:.2f},{y:.2f}")
        check(abs(reg.major_axis_length / 2 - a) < 0.03 * a + 0.5 and abs(reg.minor_axis_length / 2 - b) < 0.03 * b + 0.5,
              f"{out}: track {r['track']}: skimage axes {reg.major_axis_length:.2f},{reg.minor_axis_length:.2f} vs {2*a:.2f},{2*b:.2f}")
        if b / a < 0.8:
            yy, xx = np.nonzero(lab == cl)
            dx, dyu = xx - xx.mean(), -(yy - yy.mean())  # y up, as the CONTRACT's tilt
            th = 0.5 * math.degrees(math.atan2(2 * (dx * dyu).mean(), (dx * dx).mean() - (dyu * dyu).mean()))
            d = (th - tilt + 90) % 180 - 90
            check(abs(d) < 2.0, f"{out}: track {r['track']}: moments tilt {th:.2f} vs truth {tilt:.2f}")
        checked += 1
    check(checked >= 5, f"{out}: measured only {checked} bubbles")
    print(f"{out}: {checked} bubbles measured by scikit-image agree with the truth")


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--build", required=True)
    args = ap.parse_args()
    probe = os.path.join(args.build, "probe_synth_run")
    with tempfile.TemporaryDirectory(prefix="spume_ref_synth_") as tmp:
        plume = os.path.join(tmp, "plume")
        run(probe, "plume", plume, "--frames", "40", "--size", "320x400")
        scene = json.load(open(os.path.join(plume, "scene.json")))
        check(scene["scenario"] == "plume" and scene["frames"] == 40 and scene["bytes"] == 1 and scene["bits"] == 8,
              f"plume scene.json: {scene}")
        arr = check_frames(plume, scene)
        check_video(plume, scene, arr)
        check_truth(plume, scene, rising=True)

        sizing = os.path.join(tmp, "sizing")
        run(probe, "sizing", sizing, "--frames", "3", "--bytes", "2", "--bits", "12")
        scene = json.load(open(os.path.join(sizing, "scene.json")))
        check(scene["bytes"] == 2 and scene["bits"] == 12 and scene["frames"] == 3, f"sizing scene.json: {scene}")
        arr = check_frames(sizing, scene)
        check_video(sizing, scene, arr)
        bub = check_truth(sizing, scene, rising=False)
        f0 = [r for r in bub if r["frame"] == "0"]
        check(len(f0) >= 150, f"sizing: {len(f0)} bubbles, want at least 150")
        check(sum(r["edge"] == "1" for r in f0) >= 3, "sizing: too few bubbles cut by the edge")
        check(sum(r["in_focus"] == "0" for r in f0) >= 10, "sizing: too few out-of-focus bubbles")
        check(not any(r["overlap"] == "1" for r in f0), "sizing: bubbles overlap")
        d = np.array([float(r["d_vol_mm"]) / scene["mm_per_px"] for r in f0])
        check(d.min() < 6 and d.max() > 120, f"sizing: diameters {d.min():.1f}-{d.max():.1f} px, want 4-160")
        check_picture(sizing, scene, bub, arr[0])

    if failures:
        print(f"{len(failures)} check(s) failed")
        return 1
    print("synth outputs agree with Pillow, OpenCV, ffprobe, ffmpeg and scikit-image")
    return 0


if __name__ == "__main__":
    sys.exit(main())
