#!/usr/bin/python3
"""End to end: `spume synth target` renders dot-grid targets with known truth, `spume calibrate` measures
them, and the calibration file is compared with the truth JSON.

- Grid mode on several targets (rotation, perspective, radial distortion, vignetting, 16-bit, light dots):
  "mm_per_px" within 0.2% and "rotation_deg" within 0.1 deg of the truth, "mm_per_px_uncertainty" present,
  positive, and covering the true error (|error| <= 3 u).
- The rendered PNG read by PIL (an outside decoder): size and bit depth as asked.
- Two-point mode on two true dot centres a known number of pitches apart: the scale against the truth, the
  uncertainty against the formula of docs/methods-calib.md recomputed here, the rotation against atan2.
- Bad inputs and options: exit 2, one line on stderr naming the file or the option, no file left.
"""
import json
import math
import os
import shutil
import sys

import numpy as np
from PIL import Image

sys.path.insert(0, os.path.dirname(os.path.abspath(__file__)))
from common import Checks, build_dir, read_json, spume, tmpdir  # noqa: E402

BUILD = build_dir()
C = Checks()
tmp = tmpdir("calibrate")


def fold45(a):
    """A square grid looks the same turned by 90 deg: report rotations in (-45, 45]."""
    a = math.fmod(a, 90.0)
    if a > 45:
        a -= 90
    if a <= -45:
        a += 90
    return a


def one_line_err(p, label, words):
    lines = [l for l in p.stderr.split("\n") if l]
    ok = p.returncode == 2 and len(lines) == 1 and all(w in lines[0] for w in words)
    C.check(ok, f"{label}: exit {p.returncode}, {lines}")


# ------------------------------------------------------------------ grid mode
cases = [
    ("plain", []),
    ("turned", ["--rotation", "7.5", "--scale", "0.031"]),
    ("tilted", ["--rotation", "-3", "--perspective", "0.04,-0.02", "--distortion", "0.02", "--vignette", "0.6",
                "--bytes", "2"]),
    ("light", ["--light-dots", "--rotation", "31", "--pitch-mm", "2", "--dot-mm", "0.8", "--scale", "0.05",
               "--blur", "1.2", "--noise", "0.02", "--size", "800x600", "--seed", "5"]),
    ("finite", ["--grid", "9x7", "--rotation", "-12", "--size", "640x480"]),
]
for name, opts in cases:
    d = os.path.join(tmp, name)
    p = spume(BUILD, "synth", "target", "--out", d, *opts, check=False)
    C.check(p.returncode == 0, f"{name}: synth target exits 0 ({p.stderr.strip()})")
    if p.returncode:
        continue
    png, truth_path = os.path.join(d, "target.png"), os.path.join(d, "target_truth.json")
    truth = read_json(truth_path)
    im = Image.open(png)
    size = next((o for o in zip(opts, opts[1:]) if o[0] == "--size"), (None, "1024x768"))[1]
    w, h = map(int, size.split("x"))
    sixteen = "--bytes" in opts
    C.check(im.size == (w, h) and (im.mode in ("I;16", "I;16B", "I") if sixteen else im.mode == "L"),
            f"{name}: PIL reads {im.size} {im.mode}")
    a = np.asarray(im).astype(float)
    full = 65535 if sixteen else 255
    dark_frac = float(np.mean(a < 0.5 * a.max()))
    light = "--light-dots" in opts
    C.check((dark_frac > 0.5) if light else (dark_frac < 0.5),
            f"{name}: {'light dots on dark' if light else 'dark dots on light'} (dark fraction {dark_frac:.2f})")
    C.check(a.max() <= full and a.max() > 0.5 * full, f"{name}: levels use the {8 * (2 if sixteen else 1)}-bit range")

    pitch = truth["pitch_mm"]
    cal = os.path.join(d, "cal.json")
    p = spume(BUILD, "calibrate", png, "--pitch-mm", pitch, "--out", cal, check=False)
    C.check(p.returncode == 0, f"{name}: calibrate exits 0 ({p.stderr.strip()})")
    if p.returncode:
        continue
    lines = [l for l in p.stderr.split("\n") if l]
    C.check(len(lines) == 1 and "mm/px" in lines[0] and "rotation" in lines[0] and "residuals" in lines[0],
            f"{name}: one summary line with scale, rotation and residuals")
    print(lines[0] if lines else "")
    c = read_json(cal)
    for key in ("mm_per_px", "mm_per_px_uncertainty", "rotation_deg"):  # CONTRACT.md
        C.check(isinstance(c.get(key), (int, float)), f"{name}: calibration file has number {key}")
    s, u, rot = c["mm_per_px"], c["mm_per_px_uncertainty"], c["rotation_deg"]
    err = s / truth["mm_per_px"] - 1
    derr = fold45(rot - truth["rotation_deg"])
    print(f"{name}: scale {s:.8g} (truth {truth['mm_per_px']}, error {err:+.2e}, u/s {u / s:.1e}), "
          f"rotation {rot:.4f} (truth {truth['rotation_deg']}, error {derr:+.4f} deg)")
    C.check(abs(err) < 0.002, f"{name}: mm_per_px within 0.2% of the truth")
    C.check(abs(derr) < 0.1, f"{name}: rotation_deg within 0.1 deg of the truth")
    C.check(0 < u < 0.002 * s, f"{name}: uncertainty positive and below 0.2%")
    C.check(abs(s - truth["mm_per_px"]) <= 3 * u, f"{name}: true error within 3 u")
    C.check(c.get("dots") == ("light" if light else "dark"), f"{name}: dot polarity found ({c.get('dots')})")
    C.check(not [f for f in os.listdir(d) if f.startswith(".") or "partial" in f], f"{name}: no temporary file")
    # Forcing the polarity the image has gives the same answer; the opposite one fails cleanly.
    if name == "light":
        p = spume(BUILD, "calibrate", png, "--pitch-mm", pitch, "--dots", "light", "--out", cal + "2", check=False)
        C.check(p.returncode == 0 and read_json(cal + "2")["mm_per_px"] == s, "--dots light agrees with auto")

# ------------------------------------------------------------------ two-point mode
d = os.path.join(tmp, "plain")
truth = read_json(os.path.join(d, "target_truth.json"))
dots = {(int(q[0]), int(q[1])): (q[4], q[5]) for q in truth["dots"]}
row = [i for (i, j) in dots if j == 0]
i1, i2 = min(row), max(row)
(x1, y1), (x2, y2) = dots[(i1, 0)], dots[(i2, 0)]
L = (i2 - i1) * truth["pitch_mm"]
pts = f"{x1:.4f},{y1:.4f},{x2:.4f},{y2:.4f}"
cal = os.path.join(tmp, "two.json")
p = spume(BUILD, "calibrate", os.path.join(d, "target.png"), "--points", pts, "--length-mm", L, "--out", cal,
          check=False)
C.check(p.returncode == 0, f"two-point: exits 0 ({p.stderr.strip()})")
c = read_json(cal) if p.returncode == 0 else {}
dist = math.hypot(x2 - x1, y2 - y1)
# docs/methods-calib.md: u(s)/s = sqrt((sqrt(2) u_p / d)^2 + (u(L)/L)^2), u_p = 0.5 px by default.
u_expect = L / dist * math.sqrt(2) * 0.5 / dist
rot_expect = math.degrees(math.atan2(-(y2 - y1), x2 - x1))
print(f"two-point: {i2 - i1} pitches over {dist:.2f} px: scale {c.get('mm_per_px')} (truth {truth['mm_per_px']}), "
      f"u {c.get('mm_per_px_uncertainty')} (formula {u_expect:.6g}), rotation {c.get('rotation_deg')}")
C.check(c.get("method") == "two_point", "two-point: method recorded")
C.check(abs(c.get("mm_per_px", 0) / truth["mm_per_px"] - 1) < 0.002, "two-point: scale within 0.2% of the truth")
C.check(abs(c.get("mm_per_px_uncertainty", 0) / u_expect - 1) < 1e-9, "two-point: uncertainty as the formula")
C.check(abs(c.get("rotation_deg", 99) - rot_expect) < 1e-9 and abs(c.get("rotation_deg", 99)) < 0.1,
        "two-point: rotation is the line's direction (truth 0)")
p = spume(BUILD, "calibrate", os.path.join(d, "target.png"), "--points", pts, "--length-mm", L, "--length-u-mm",
          0.01, "--point-u-px", 0.2, "--out", cal, check=False)
c = read_json(cal) if p.returncode == 0 else {}
u2 = L / dist * math.hypot(math.sqrt(2) * 0.2 / dist, 0.01 / L)
C.check(p.returncode == 0 and abs(c.get("mm_per_px_uncertainty", 0) / u2 - 1) < 1e-9,
        "two-point: --length-u-mm and --point-u-px enter the uncertainty")

# ------------------------------------------------------------------ bad inputs and options
png = os.path.join(tmp, "plain", "target.png")
out = os.path.join(tmp, "bad.json")
junk = os.path.join(tmp, "junk.png")
open(junk, "wb").write(np.random.default_rng(3).bytes(4000))
blank = os.path.join(tmp, "blank.png")
Image.fromarray(np.full((240, 320), 200, np.uint8)).save(blank)
noisy = os.path.join(tmp, "noise.png")
Image.fromarray(np.random.default_rng(4).integers(0, 256, (240, 320)).astype(np.uint8)).save(noisy)


def bad(label, args, words):
    p = spume(BUILD, "calibrate", *args, check=False)
    one_line_err(p, label, words)
    C.check(not os.path.exists(out), f"{label}: no calibration file left")


missing = os.path.join(tmp, "nope.png")
bad("missing image", [missing, "--pitch-mm", 1, "--out", out], [missing])
bad("not an image", [junk, "--pitch-mm", 1, "--out", out], [junk])
bad("blank image", [blank, "--pitch-mm", 1, "--out", out], [blank])
bad("noise image", [noisy, "--pitch-mm", 1, "--out", out], [noisy])
bad("zero pitch", [png, "--pitch-mm", 0, "--out", out], ["--pitch-mm"])
bad("pitch not a number", [png, "--pitch-mm", "1mm", "--out", out], ["--pitch-mm", "1mm"])
bad("both modes", [png, "--pitch-mm", 1, "--points", "1,1,100,1", "--length-mm", 2, "--out", out], ["--pitch-mm"])
bad("neither mode", [png, "--out", out], ["--pitch-mm"])
bad("points without length", [png, "--points", "1,1,100,1", "--out", out], ["--length-mm"])
bad("malformed points", [png, "--points", "1,1,100", "--length-mm", 2, "--out", out], ["--points", "1,1,100"])
bad("point outside", [png, "--points", "1,1,5000,1", "--length-mm", 2, "--out", out], [png, "outside"])
bad("points too close", [png, "--points", "10,10,10.5,10", "--length-mm", 2, "--out", out], [png])
bad("bad polarity", [png, "--pitch-mm", 1, "--dots", "grey", "--out", out], ["--dots", "grey"])
bad("bad distortion", [png, "--pitch-mm", 1, "--distortion", "3", "--out", out], ["--distortion"])
bad("unknown option", [png, "--pitch-mm", 1, "--out", out, "--fast"], ["--fast"])
bad("no --out", [png, "--pitch-mm", 1], ["--out"])
bad("no IMAGE", ["--pitch-mm", 1, "--out", out], ["IMAGE"])
p = spume(BUILD, "calibrate", png, "--pitch-mm", 1, "--out", os.path.join(junk, "cal.json"), check=False)
one_line_err(p, "unwritable output", [os.path.join(junk, "cal.json")])


def bad_target(label, args, words):
    d = os.path.join(tmp, "bad_target")
    p = spume(BUILD, "synth", "target", "--out", d, *args, check=False)
    one_line_err(p, f"synth target {label}", words)
    C.check(not os.path.exists(os.path.join(d, "target.png")), f"synth target {label}: no image left")


bad_target("strong perspective", ["--perspective", "0.9,0"], ["--perspective"])
bad_target("dots wider than the pitch", ["--dot-mm", "2"], ["--dot-mm"])
bad_target("tiny image", ["--size", "10x10"], ["--size"])
bad_target("pitch under 4 px", ["--scale", "0.5"], ["pitch"])
bad_target("bad distortion", ["--distortion", "0.1,"], ["--distortion"])
p = spume(BUILD, "synth", "target", check=False)
one_line_err(p, "synth target without --out", ["--out"])
p = spume(BUILD, "help", "calibrate", check=False)
C.check(p.returncode == 0 and "--points" in p.stdout and "--pitch-mm" in p.stdout, "spume help calibrate")
p = spume(BUILD, "synth", "target", "--help", check=False)
C.check(p.returncode == 0 and "--perspective" in p.stdout, "spume synth target --help")

shutil.rmtree(tmp, ignore_errors=True)
C.done()
