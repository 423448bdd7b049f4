"""Nucleation sites end to end on the synthetic glass-wall scene (issue: tracks, sites, statistics).

Acceptance: every site found; rate_hz within 3% and growth_mm_s within 10% of the scene's truth
(truth_sites.csv, computed by the scene from its own generated births)."""
import math
import os

from common import Checks, build_dir, read_csv, read_json, spume, tmpdir

build = build_dir()
work = tmpdir("nucleation")
scene = os.path.join(work, "scene")
out = os.path.join(work, "out")
spume(build, "synth", "nucleation", "--out", scene, "--no-png", "--quiet")
meta = read_json(os.path.join(scene, "scene.json"))
spume(build, "measure", os.path.join(scene, "video.mkv"), "--scale", meta["mm_per_px"], "--out", out,
      "--liquid", "carbonated", "--no-report", "--quiet")
truth = read_csv(os.path.join(scene, "truth_sites.csv"))
found = read_csv(os.path.join(out, "sites.csv"))
summ = read_json(os.path.join(out, "summary.json"))
c = Checks()
used = set()
for t in truth:
    tx, ty, td = float(t["x_mm"]), float(t["y_mm"]), float(t["d_detach_mm"])
    best = min(found, key=lambda f: math.hypot(float(f["x_mm"]) - tx, float(f["y_mm"]) - ty), default=None)
    dist = math.hypot(float(best["x_mm"]) - tx, float(best["y_mm"]) - ty) if best else float("inf")
    ok = best is not None and dist <= td
    c.check(ok, f"site at ({tx:.3f}, {ty:.3f}) mm found ({dist:.4f} mm away)")
    if not ok:
        continue
    used.add(best["site"])
    rr = float(best["rate_hz"]) / float(t["rate_hz"]) - 1
    rg = float(best["growth_mm_s"]) / float(t["growth_mm_s"]) - 1
    c.check(abs(rr) <= 0.03, f"  rate {float(best['rate_hz']):.3f} Hz vs {float(t['rate_hz']):.3f} ({100 * rr:+.2f}%)")
    c.check(abs(rg) <= 0.10,
            f"  growth {float(best['growth_mm_s']):.4f} mm/s vs {float(t['growth_mm_s']):.4f} ({100 * rg:+.2f}%)")
extra = [f for f in found if f["site"] not in used]
c.check(not extra, f"no site where the scene has none ({len(extra)} extra)")
qc = summ["sites"]
c.check(qc["active_sites"] == len(found), "summary: active sites equals sites.csv rows")
total = sum(float(t["rate_hz"]) for t in truth)
c.check(abs(qc["bubbles_per_s"] / total - 1) <= 0.03,
        f"summary: bubbles per second {qc['bubbles_per_s']:.2f} vs truth {total:.2f}")
c.check(qc["gas_volume_flux_mm3_s"] > 0, "summary: gas volume flux reported")
c.done()
