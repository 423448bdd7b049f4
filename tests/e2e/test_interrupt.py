"""SIGINT and SIGTERM during measure: the run finishes the frames in hand and either writes valid
tables marked incomplete in summary.json (with the frame it would go on from), or, when stopped
before any frame was analysed, writes nothing; exit status 130 either way, and no temporary file
is left behind. When the signal lands depends on the machine's speed, so both outcomes are accepted
and each is checked for what it must guarantee."""
import csv
import json
import os
import signal
import subprocess
import time

from common import Checks, build_dir, read_json, signal_when_measuring, spume, tmpdir

build = build_dir()
work = tmpdir("interrupt")
c = Checks()
scene = os.path.join(work, "scene")
spume(build, "synth", "plume", "--out", scene, "--frames", "300", "--no-png", "--quiet")
meta = read_json(os.path.join(scene, "scene.json"))
# The first signal comes at once (before any frame, on most machines); the others a little after the
# detection pass has opened its partial tables, so they land mid-run however fast the machine is.
for sig, delay, after_tables in ((signal.SIGINT, 0.2, False), (signal.SIGTERM, 0.3, True),
                                 (signal.SIGINT, 0.8, True)):
    out = os.path.join(work, f"out-{sig.name}-{delay}")
    p = subprocess.Popen([os.path.join(build, "spume"), "measure", os.path.join(scene, "video.mkv"), "--out", out,
                          "--scale", str(meta["mm_per_px"]), "--no-report", "--quiet"],
                         stderr=subprocess.PIPE, text=True)
    if after_tables:
        signal_when_measuring(p, out, delay, sig)
    else:
        time.sleep(delay)
        p.send_signal(sig)
    try:
        _, err = p.communicate(timeout=300)
    except subprocess.TimeoutExpired:
        p.kill()
        c.check(False, f"{sig.name} after {delay} s: the run stopped")
        continue
    tag = f"{sig.name} after {delay} s"
    if p.returncode == 0:
        print(f"  [{tag}] the run finished before the signal; nothing to check")
        continue
    c.check(p.returncode == 130, f"{tag}: exit status 130 ({p.returncode}): {err.strip()}")
    left = [f for f in os.listdir(out) if f.startswith(".")] if os.path.isdir(out) else []
    c.check(not left, f"{tag}: no temporary file left ({left})")
    summ = os.path.join(out, "summary.json")
    if not os.path.exists(summ):
        c.check("nothing written" in err and not (os.path.isdir(out) and os.listdir(out)),
                f"{tag}: stopped before any frame: says so and writes nothing")
        continue
    s = json.load(open(summ))
    rows = list(csv.DictReader(open(os.path.join(out, "frames.csv"))))
    c.check(s["complete"] is False, f"{tag}: summary.json marked incomplete")
    c.check(s["frames"] == len(rows) and 0 < len(rows) < 300, f"{tag}: {len(rows)} frames, consistent")
    c.check(s["next_frame"] == int(rows[-1]["frame"]) + 1, f"{tag}: next_frame {s['next_frame']}")
    bub = list(csv.DictReader(open(os.path.join(out, "bubbles.csv"))))
    c.check(len(bub) == s["detections"] and all(int(b["frame"]) < s["next_frame"] for b in bub),
            f"{tag}: bubbles.csv complete up to the stop ({len(bub)} rows)")
    tracks = list(csv.DictReader(open(os.path.join(out, "tracks.csv"))))
    c.check(len(tracks) == s["tracks"], f"{tag}: tracks.csv has its {len(tracks)} tracks")
c.done()
