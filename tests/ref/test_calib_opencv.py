"""Dot-grid calibration on rendered targets with known truth, and against OpenCV on the same images.

Drives build/probe_synth_target (renders a target + truth JSON) and build/probe_calib_run.

1. Truth sweep: rotations -30..30 deg, scales 0.015..0.045 mm/px, perspective up to 7% across
   the half-frame, radial k1 in {0, +0.02, -0.03}, dark and light dots, vignetting, noise. Checks
   (the brief's targets): scale within 0.2 %, rotation within 0.1 deg. Honest uncertainty: the
   true error lies within 2 u in at least 7 of 8 cases, and u stays below 0.1 % of the scale so
   the check cannot pass by inflating u. Radial distortion present -> found (|k1 - true| < 0.003).
2. OpenCV reference (Debian python3-opencv, run with /usr/bin/python3):
   - cv2.findCirclesGrid (SimpleBlobDetector centres, symmetric grid) on a finite 11x8 grid:
     its centres and ours agree within 0.1 px (both measured at ~0.03 px from the truth; the
     tolerance leaves room for OpenCV's threshold-stack centroids).
   - cv2.findHomography (plain least squares, method 0) from grid mm to OpenCV's centres, and
     our homography: the two map every grid node to within 0.1 px of each other.
"""
import argparse
import json
import math
import os
import subprocess
import sys
import tempfile

import numpy as np
import cv2

FAIL = []


def check(cond, msg):
    print(("ok   " if cond else "FAIL ") + msg)
    if not cond:
        FAIL.append(msg)


def render(build, path, **kw):
    args = [os.path.join(build, "probe_synth_target"), path] + ["%s=%s" % kv for kv in kw.items()]
    subprocess.run(args, check=True)
    with open(path[:-4] + "_truth.json") as f:
        return json.load(f)


def calibrate(build, path, pitch, terms=-1):
    out = subprocess.run([os.path.join(build, "probe_calib_run"), path, str(pitch), str(terms)],
                         capture_output=True, text=True)
    lines = out.stdout.splitlines()
    if out.returncode != 0 or not lines or lines[0].startswith("ERROR"):
        raise RuntimeError("%s: %s %s" % (path, out.stdout[:300], out.stderr[:300]))
    r = {}
    s = [float(v) for v in lines[0].split()[1:]]
    r["s"], r["u"], r["rot"], r["urot"] = s
    f = lines[1].split()
    r["found"], r["used"], r["rms"], r["max"], r["terms"] = int(f[1]), int(f[2]), float(f[3]), float(f[4]), int(f[5])
    r["k1"] = float(f[6])
    r["H"] = np.array([float(v) for v in lines[2].split()[1:]]).reshape(3, 3)
    r["dots"] = np.array([[float(v) for v in l.split()[1:]] for l in lines if l.startswith("dot ")])
    return r


def sweep(build, tmp):
    rng = np.random.default_rng(20240611)
    cases = []
    for k in range(8):
        cases.append(dict(width=640, height=480, rotation_deg=float(rng.uniform(-30, 30)),
                          mm_per_px=float(rng.uniform(0.015, 0.045)),
                          persp_x=float(rng.uniform(-0.07, 0.07)), persp_y=float(rng.uniform(-0.07, 0.07)),
                          k1=[0, 0.02, 0, -0.03][k % 4], light_dots=k % 3 == 2,
                          vignette=[1, 0.6][k % 2], noise=[0.005, 0.02][(k // 2) % 2], seed=k + 1))
    cases[0]["rotation_deg"], cases[1]["rotation_deg"] = -30.0, 30.0
    within2 = 0
    for k, c in enumerate(cases):
        c = dict(c, light_dots=int(c["light_dots"]))
        path = os.path.join(tmp, "sweep%d.png" % k)
        t = render(build, path, **c)
        r = calibrate(build, path, 1.0)
        es = (r["s"] - t["mm_per_px"]) / t["mm_per_px"]
        er = r["rot"] - t["rotation_deg"]
        print("case %d: rot %.2f scale %.4f persp %.3f,%.3f k1 %.2f -> rel.err %.2e (u %.2e), rot.err %.5f"
              " (u %.5f), terms %d k1 %.4f, rms %.4f px, %d dots"
              % (k, c["rotation_deg"], c["mm_per_px"], c["persp_x"], c["persp_y"], c["k1"], es,
                 r["u"] / r["s"], er, r["urot"], r["terms"], r["k1"], r["rms"], r["used"]))
        check(abs(es) < 2e-3, "case %d: scale within 0.2%% (%.2e)" % (k, es))
        check(abs(er) < 0.1, "case %d: rotation within 0.1 deg (%.5f)" % (k, er))
        check(r["u"] / r["s"] < 1e-3, "case %d: uncertainty below 0.1%% (%.2e)" % (k, r["u"] / r["s"]))
        within2 += abs(r["s"] - t["mm_per_px"]) <= 2 * r["u"] and abs(er) <= 2 * r["urot"]
        if c["k1"] != 0:
            check(r["terms"] >= 1 and abs(r["k1"] - c["k1"]) < 3e-3,
                  "case %d: distortion found (k1 %.4f vs %.4f)" % (k, r["k1"], c["k1"]))
        else:
            check(r["terms"] == 0 or abs(r["k1"]) < 2e-3, "case %d: no spurious distortion (k1 %.4f)" % (k, r["k1"]))
    check(within2 >= 7, "true error within 2 u in %d of 8 cases" % within2)


def opencv(build, tmp):
    for k, (rot, px, py, light) in enumerate([(10, 0.04, -0.03, 0), (-25, -0.02, 0.05, 0), (3, 0.0, 0.0, 1)]):
        path = os.path.join(tmp, "cv%d.png" % k)
        t = render(build, path, cols=11, rows=8, rotation_deg=rot, persp_x=px, persp_y=py, width=640,
                   height=480, mm_per_px=0.03, offset_x=0, offset_y=0, light_dots=light, seed=7 + k)
        img = cv2.imread(path, cv2.IMREAD_GRAYSCALE)
        if light:
            img = 255 - img  # SimpleBlobDetector looks for dark blobs by default
        ok, cvc = cv2.findCirclesGrid(img, (11, 8), flags=cv2.CALIB_CB_SYMMETRIC_GRID)
        check(bool(ok), "target %d: OpenCV finds the 11x8 grid" % k)
        if not ok:
            continue
        cvc = cvc.reshape(-1, 2).astype(np.float64)
        r = calibrate(build, path, 1.0)
        mine = r["dots"][:, 2:4]
        check(len(mine) == 88, "target %d: we index all 88 dots (%d)" % (k, len(mine)))
        d = np.sqrt(((mine[:, None, :] - cvc[None, :, :]) ** 2).sum(-1))
        near = d.min(1)
        tr = np.array([p[4:6] for p in t["dots"]])
        dt_m = np.sqrt(((mine[:, None, :] - tr[None, :, :]) ** 2).sum(-1)).min(1)
        dt_c = np.sqrt(((cvc[:, None, :] - tr[None, :, :]) ** 2).sum(-1)).min(1)
        print("target %d: ours vs OpenCV max %.4f px; to truth: ours max %.4f rms %.4f, OpenCV max %.4f rms %.4f"
              % (k, near.max(), dt_m.max(), math.sqrt((dt_m ** 2).mean()), dt_c.max(),
                 math.sqrt((dt_c ** 2).mean())))
        check(near.max() < 0.1, "target %d: centres agree with cv2.findCirclesGrid within 0.1 px" % k)
        # Homography from grid mm to OpenCV's centres (matched to our indices), against ours.
        grid = r["dots"][:, 0:2] * 1.0
        match = cvc[d.argmin(1)]
        Hcv, _ = cv2.findHomography(grid.astype(np.float64), match, 0)
        pts = np.hstack([grid, np.ones((len(grid), 1))])
        pm = pts @ r["H"].T
        pm = pm[:, :2] / pm[:, 2:]
        pc = pts @ Hcv.T
        pc = pc[:, :2] / pc[:, 2:]
        dh = np.sqrt(((pm - pc) ** 2).sum(1)).max()
        print("target %d: homographies (ours, cv2.findHomography) differ by at most %.4f px over the grid" % (k, dh))
        check(dh < 0.1, "target %d: homography agrees with cv2.findHomography within 0.1 px" % k)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--build", required=True)
    args = ap.parse_args()
    with tempfile.TemporaryDirectory(prefix="spume_calib_") as tmp:
        sweep(args.build, tmp)
        opencv(args.build, tmp)
    print("%d failed" % len(FAIL))
    return 1 if FAIL else 0


if __name__ == "__main__":
    sys.exit(main())
