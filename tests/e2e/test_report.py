"""End-to-end checks of `spume report` on synthesised scenes (invented data only).

- overlay ellipses lie on the true bubble outline of truth_bubbles.csv (mean distance <= 1 px);
- the annotated video has the input's frame count and frame times (ffprobe);
- report.html opens in headless Chromium with no console errors; every plot and table is present
  and non-empty (--dump-dom); the screenshot is not blank;
- the holdup plot's x ticks equal Heckbert's (1990) nice-number ticks computed here independently;
- bad input fails with exit 2 and one line naming the file.
"""
import csv
import json
import math
import os
import re
import shutil
import subprocess
import sys
import tempfile

import numpy as np
from PIL import Image
from scipy.spatial import cKDTree

sys.path.insert(0, os.path.dirname(__file__))
from common import build_dir, spume, read_csv  # noqa: E402

FAILS = []
PASSED = [0]


def check(cond, msg):
    print(("ok   " if cond else "FAIL ") + msg)
    if not cond:
        FAILS.append(msg)
    else:
        PASSED[0] += 1


def ffprobe_times(path):
    out = subprocess.run(["ffprobe", "-v", "error", "-select_streams", "v:0", "-show_entries",
                          "frame=pts_time", "-of", "csv=p=0", path], capture_output=True, text=True, check=True)
    return [float(x) for x in out.stdout.split() if x.strip()]


def nice(x, rnd):
    """Heckbert 1990, Graphics Gems I, 'Nice numbers for graph labels'."""
    e = math.floor(math.log10(x))
    f = x / 10 ** e
    if rnd:
        nf = 1 if f < 1.5 else 2 if f < 3 else 5 if f < 7 else 10
    else:
        nf = 1 if f <= 1 else 2 if f <= 2 else 5 if f <= 5 else 10
    return nf * 10 ** e


def heckbert_ticks(lo, hi, n):
    d = nice(nice(hi - lo, False) / (n - 1), True)
    t0, t1 = math.floor(lo / d) * d, math.ceil(hi / d) * d
    return [t0 + i * d for i in range(int(round((t1 - t0) / d)) + 1)]


def chromium():
    for c in ("chromium", "chromium-browser"):
        p = shutil.which(c)
        if p:
            return p
    return None


def browser(html, *extra):
    prof = tempfile.mkdtemp(prefix="spume-chromium-")
    cmd = [chromium(), "--headless", "--no-sandbox", "--disable-gpu", "--disable-background-networking",
           "--disable-component-update", "--disable-sync", "--no-first-run", f"--user-data-dir={prof}",
           "--enable-logging=stderr", "--v=0", *extra, "file://" + os.path.abspath(html)]
    try:
        return subprocess.run(cmd, capture_output=True, text=True, timeout=120)
    finally:
        shutil.rmtree(prof, ignore_errors=True)


def main():
    build = build_dir()
    work = tempfile.mkdtemp(prefix="spume-report-")
    try:
        run(build, work)
    finally:
        shutil.rmtree(work, ignore_errors=True)
    print(f"{PASSED[0]} passed, {len(FAILS)} failed")
    if FAILS:
        print("FAILED:", *FAILS, sep="\n  ")
        sys.exit(1)


def run(build, work):
    s = os.path.join(work, "s")
    spume(build, "synth", "sizing", "--out", s, "--frames", 6, "--size", "640x480", "--quiet")
    scene = json.load(open(os.path.join(s, "scene.json")))
    m = os.path.join(s, "m")
    spume(build, "measure", os.path.join(s, "video.mkv"), "--scale", scene["mm_per_px"], "--background",
          os.path.join(s, "empty_field.png"), "--out", m, "--quiet")

    # Invented tracks, sites and acoustic pairs beside the measured tables, so that every plot is
    # drawn (these files come from the tracking and crosscheck stages in a full run).
    rng = np.random.default_rng(3)
    bub = read_csv(os.path.join(m, "bubbles.csv"))
    nt = 40
    with open(os.path.join(m, "tracks.csv"), "w") as f:
        f.write("track,frame_first,frame_last,n,d_vol_mm,vy_mm_s,aspect_mean,eo,site,t_first_s,speed_mm_s\n")
        for i in range(1, nt + 1):
            d = rng.uniform(0.5, 5)
            f.write(f"{i},0,5,6,{d:.4f},{150 + 40 * d + rng.normal(0, 20):.2f},"
                    f"{1 / (1 + 0.163 * (0.135 * d * d) ** 0.757):.4f},,{1 + i % 3},{i * 0.01:.3f},200\n")
    with open(os.path.join(m, "sites.csv"), "w") as f:
        f.write("site,x_mm,y_mm,n,rate_hz,d_detach_mm,growth_mm_s,interval_cv\n")
        for k in range(1, 4):
            f.write(f"{k},{k * 2.0},0.5,13,33.3,1.2,0.8,0.1\n")
    # give measured rows track ids so the growth plot and trails have data
    with open(os.path.join(m, "bubbles.csv")) as f:
        lines = f.read().splitlines()
    hdr = lines[0].split(",")
    ti = hdr.index("track")
    out = [lines[0]]
    for j, ln in enumerate(lines[1:]):
        c = ln.split(",")
        c[ti] = str(1 + j % nt)
        out.append(",".join(c))
    open(os.path.join(m, "bubbles.csv"), "w").write("\n".join(out) + "\n")
    with open(os.path.join(m, "pairs.csv"), "w") as f:
        f.write("track,t_video_s,t_audio_s,d_optical_mm,d_acoustic_mm\n")
        for i in range(1, 21):
            d = rng.uniform(1, 4)
            f.write(f"{i},{i * 0.01:.3f},{i * 0.01 + 0.002:.3f},{d:.4f},{d * 1.05 + rng.normal(0, 0.1):.4f}\n")

    q = spume(build, "report", m, "--quiet")
    check(q.stderr == "", "--quiet prints nothing on stderr")
    p = spume(build, "report", m, "--frames", "0,3", "--video", "--json")
    res = json.loads(p.stdout)
    check(res["overlays"] == 2, f"two overlay frames written ({res['overlays']})")
    check(res["plots"] == 9, f"nine plots ({res['plots']})")
    check("report.html" in p.stderr and "detections" in p.stderr, "short summary on stderr")

    # --- ellipse on the boundary: isolated-colour pixels added by the overlay vs the truth outline.
    truth = [r for r in read_csv(os.path.join(s, "truth_bubbles.csv")) if r["frame"] == "0"]
    pts = []
    for r in truth:
        x, y, a, b = float(r["x_px"]), float(r["y_px"]), float(r["major_px"]) / 2, float(r["minor_px"]) / 2
        th = math.radians(float(r["tilt_deg"]))
        ph = np.linspace(0, 2 * np.pi, max(64, int(2 * np.pi * a * 8)), endpoint=False)
        u, v = a * np.cos(ph), b * np.sin(ph)
        pts.append(np.c_[x + u * np.cos(th) - v * np.sin(th), y - (u * np.sin(th) + v * np.cos(th))])
    tree = cKDTree(np.vstack(pts))
    ov = np.asarray(Image.open(os.path.join(m, "overlays", "frame_00000.png")).convert("RGB")).astype(int)
    src = np.asarray(Image.open(os.path.join(s, "frames", "frame_00000.png")).convert("L")).astype(int)
    check(ov.shape[:2] == src.shape, "overlay PNG has the frame's size")
    mask = (ov[:, :, 0] == 0) & (ov[:, :, 1] == 200) & (ov[:, :, 2] == 130)
    ys, xs = np.nonzero(mask)
    dist, _ = tree.query(np.c_[xs, ys])
    check(len(xs) > 500, f"isolated outlines drawn ({len(xs)} px)")
    check(dist.mean() <= 1.0, f"mean distance of drawn ellipse pixels to the true outline {dist.mean():.3f} px <= 1")
    print(f"     median {np.median(dist):.3f} px, 95th percentile {np.percentile(dist, 95):.3f} px")
    # outside the drawn pixels the overlay is the frame itself (grey, unchanged)
    # (white digits with a black halo are the only grey drawing)
    grey = (ov[:, :, 0] == ov[:, :, 1]) & (ov[:, :, 1] == ov[:, :, 2]) & (ov[:, :, 0] != 0) & (ov[:, :, 0] != 255)
    same = ov[:, :, 0][grey] == src[grey]
    check(same.mean() > 0.99, f"undrawn pixels equal the frame ({same.mean():.4f})")

    # --- annotated video: frame count and times equal the input's (ffprobe).
    tin = ffprobe_times(os.path.join(s, "video.mkv"))
    tout = ffprobe_times(os.path.join(m, "overlay.mkv"))
    check(len(tin) == len(tout) == scene["frames"], f"video frames {len(tout)} == input {len(tin)}")
    check(len(tin) == len(tout) and all(abs(a - b) < 1e-6 for a, b in zip(tin, tout)), "video frame times equal")
    dec = subprocess.run(["ffmpeg", "-v", "error", "-i", os.path.join(m, "overlay.mkv"), "-frames:v", "1",
                          "-f", "rawvideo", "-pix_fmt", "rgb24", "-"], capture_output=True, check=True).stdout
    first = np.frombuffer(dec, np.uint8).reshape(ov.shape)
    check(np.array_equal(first, ov.astype(np.uint8)), "video frame 0 equals overlay PNG 0 (lossless)")

    # --- the page itself
    html = open(os.path.join(m, "report.html")).read()
    check(not re.search(r"(src|href)=\"(https?:)?//", html), "nothing fetched from a network")
    xt = re.search(r'data-kind="holdup">.*?<g class="xticks"[^>]*>(.*?)</g>', html, re.S)
    frames = read_csv(os.path.join(m, "frames.csv"))
    t = [float(r["t_s"]) for r in frames]
    want = heckbert_ticks(min(t), max(t), 8)
    got = [float(v) for v in re.findall(r'data-v="([^"]+)"', xt.group(1))] if xt else []
    check(len(got) == len(want) and all(abs(a - b) < 1e-9 for a, b in zip(got, want)),
          f"holdup x ticks {got} == Heckbert {want}")

    if not chromium():
        check(False, "chromium is installed (Debian package chromium)")
        return
    r = browser(os.path.join(m, "report.html"), "--dump-dom")
    dom = r.stdout
    errs = [ln for ln in r.stderr.splitlines() if "CONSOLE" in ln or "Uncaught" in ln]
    check(not errs, f"no console errors ({errs[:3]})")
    svgs = re.findall(r'<svg class="plot".*?</svg>', dom, re.S)
    check(len(svgs) == 9, f"9 plots in the DOM ({len(svgs)})")
    empty = [re.search(r'aria-label="([^"]*)"', g).group(1) for g in svgs
             if not re.search(r'<g class="data"[^>]*>\s*<(path|circle|rect|g|line)', g)]
    check(not empty, f"every plot has drawn data (empty: {empty})")
    tables = re.findall(r"<table.*?</table>", dom, re.S)
    check(len(tables) >= 6 and all("<td" in tb for tb in tables), f"{len(tables)} tables, none empty")
    imgs = re.findall(r'<img[^>]+src="data:image/png;base64,', dom)
    check(len(imgs) == 2, f"two overlay thumbnails embedded ({len(imgs)})")
    shot = os.path.join(work, "shot.png")
    r = browser(os.path.join(m, "report.html"), f"--screenshot={shot}", "--window-size=1280,2400",
                "--hide-scrollbars")
    check(os.path.exists(shot), "screenshot taken")
    if os.path.exists(shot):
        a = np.asarray(Image.open(shot).convert("L")).astype(float)
        check(a.std() > 20 and (a < 128).mean() > 0.01, f"screenshot not blank (std {a.std():.1f})")
        if os.environ.get("SPUME_KEEP_SHOT"):
            shutil.copy(shot, os.environ["SPUME_KEEP_SHOT"])

    # --- bad input
    bad = os.path.join(work, "bad")
    os.makedirs(bad)
    p = spume(build, "report", bad, check=False)
    check(p.returncode == 2 and "summary.json" in p.stderr and p.stderr.count("\n") == 1,
          f"missing summary.json: exit 2, one line ({p.returncode}: {p.stderr.strip()})")
    open(os.path.join(bad, "summary.json"), "w").write("{\"frames\": 3,")
    p = spume(build, "report", bad, check=False)
    check(p.returncode == 2 and "summary.json" in p.stderr, f"broken JSON: exit 2 ({p.stderr.strip()})")
    p = spume(build, "report", m, "--frames", "3-1", check=False)
    check(p.returncode == 2, "reversed --frames range is a usage error")
    p = spume(build, "report", m, "--frames", "0", "--input", os.path.join(work, "nothing.mkv"), check=False)
    check(p.returncode == 2 and "nothing.mkv" in p.stderr, f"missing recording with --frames: exit 2")


if __name__ == "__main__":
    main()
