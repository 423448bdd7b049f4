"""Outputs (bubbles, frames, tracks, sites, summary) are byte-identical at 1 and 2 threads
(OMP_NUM_THREADS and --threads), on the plume video and on 16-bit still frames."""
import filecmp
import os

from common import Checks, build_dir, read_json, spume, tmpdir

build = build_dir()
work = tmpdir("threads")
c = Checks()
scene = os.path.join(work, "plume")
spume(build, "synth", "plume", "--out", scene, "--frames", "60", "--quiet")
meta = read_json(os.path.join(scene, "scene.json"))
runs = []
for n in (1, 2):
    out = os.path.join(work, f"out{n}")
    spume(build, "measure", os.path.join(scene, "video.mkv"), "--out", out, "--scale", meta["mm_per_px"],
          "--no-report", "--quiet", env={"OMP_NUM_THREADS": str(n)})
    runs.append(out)
out3 = os.path.join(work, "out3")
spume(build, "measure", os.path.join(scene, "video.mkv"), "--out", out3, "--scale", meta["mm_per_px"],
      "--threads", "2", "--bg-segments", "3", "--no-report", "--quiet")
out4 = os.path.join(work, "out4")
spume(build, "measure", os.path.join(scene, "video.mkv"), "--out", out4, "--scale", meta["mm_per_px"],
      "--threads", "1", "--bg-segments", "3", "--no-report", "--quiet")
for name in ("bubbles.csv", "frames.csv", "tracks.csv", "sites.csv", "summary.json"):
    c.check(filecmp.cmp(os.path.join(runs[0], name), os.path.join(runs[1], name), shallow=False),
            f"{name} identical at OMP_NUM_THREADS=1 and 2")
    c.check(filecmp.cmp(os.path.join(out3, name), os.path.join(out4, name), shallow=False),
            f"{name} identical at --threads 1 and 2 with a drifting background")
rows = sum(1 for _ in open(os.path.join(runs[0], "bubbles.csv"))) - 1
c.check(rows > 100, f"the plume run found bubbles ({rows} rows)")

# 16-bit stills, 12 significant bits.
s16 = os.path.join(work, "s16")
spume(build, "synth", "plume", "--out", s16, "--frames", "30", "--bytes", "2", "--bits", "12", "--no-video",
      "--quiet")
outs = []
for n in (1, 2):
    out = os.path.join(work, f"s16out{n}")
    spume(build, "measure", os.path.join(s16, "frames"), "--fps", meta["fps"], "--out", out, "--threads", n,
          "--no-report", "--quiet")
    outs.append(out)
for name in ("bubbles.csv", "frames.csv", "tracks.csv", "sites.csv", "summary.json"):
    c.check(filecmp.cmp(os.path.join(outs[0], name), os.path.join(outs[1], name), shallow=False),
            f"16-bit stills: {name} identical at 1 and 2 threads")
c.done()
