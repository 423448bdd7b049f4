"""measure --calib: the scale comes from a calibration file written by spume calibrate (on a
synthetic dot-grid target of known scale), sizes follow it, and a calibration whose distortion was
measured on images of another size is refused."""
import os

from common import Checks, build_dir, read_csv, read_json, spume, tmpdir

build = build_dir()
work = tmpdir("mcal")
c = Checks()
scene = os.path.join(work, "scene")
spume(build, "synth", "sizing", "--out", scene, "--frames", "3", "--no-video", "--quiet")
meta = read_json(os.path.join(scene, "scene.json"))
size = f"{meta['width']}x{meta['height']}"
tgt = os.path.join(work, "target")
spume(build, "synth", "target", "--out", tgt, "--size", size, "--scale", meta["mm_per_px"], "--rotation", "3",
      "--quiet")
cal = os.path.join(work, "cal.json")
spume(build, "calibrate", os.path.join(tgt, "target.png"), "--pitch-mm", "1", "--out", cal, "--quiet")
calj = read_json(cal)
common = ["--fps", meta["fps"], "--background", os.path.join(scene, "empty_field.png"), "--no-report", "--quiet"]
a = os.path.join(work, "a")
b = os.path.join(work, "b")
spume(build, "measure", os.path.join(scene, "frames"), "--out", a, "--calib", cal, *common)
spume(build, "measure", os.path.join(scene, "frames"), "--out", b, "--scale", meta["mm_per_px"], *common)
sa, sb = read_json(os.path.join(a, "summary.json")), read_json(os.path.join(b, "summary.json"))
c.check(abs(sa["mm_per_px"] / meta["mm_per_px"] - 1) < 0.002,
        f"scale from the file {sa['mm_per_px']:.6g} within 0.2% of the target's {meta['mm_per_px']}")
c.check(sa["calibration"]["source"] == "file" and sa["calibration"]["file"] == cal, "summary names the file")
ra, rb = read_csv(os.path.join(a, "bubbles.csv")), read_csv(os.path.join(b, "bubbles.csv"))
c.check(len(ra) == len(rb) and len(ra) > 100, f"same detections ({len(ra)})")
ratio = [float(x["d_vol_mm"]) / float(y["d_vol_mm"]) for x, y in zip(ra, rb)]
k = sa["mm_per_px"] / meta["mm_per_px"]
c.check(all(abs(r - k) < 1e-4 for r in ratio), "diameters scale with the calibrated mm/px")
u = [float(x["u_d_mm"]) for x in ra]
c.check(all(v > 0 for v in u), "every bubble carries a diameter uncertainty in mm")

# A distortion measured on other images: refused, naming the file.
tgt2 = os.path.join(work, "target2")
spume(build, "synth", "target", "--out", tgt2, "--size", "800x600", "--scale", "0.03", "--distortion", "0.03",
      "--quiet")
cal2 = os.path.join(work, "cal2.json")
spume(build, "calibrate", os.path.join(tgt2, "target.png"), "--pitch-mm", "1", "--out", cal2, "--quiet")
if read_json(cal2).get("distortion", {}).get("terms", 0):
    p = spume(build, "measure", os.path.join(scene, "frames"), "--out", os.path.join(work, "c"), "--calib", cal2,
              *common, check=False)
    c.check(p.returncode == 2 and cal2 in p.stderr, f"mismatched distortion refused: {p.stderr.strip()}")
else:
    c.check(False, "the distorted target's calibration records its distortion")
p = spume(build, "measure", os.path.join(scene, "frames"), "--out", os.path.join(work, "d"), "--calib", cal,
          "--scale", "0.02", *common, check=False)
c.check(p.returncode == 2, "--scale with --calib is refused")
c.done()
