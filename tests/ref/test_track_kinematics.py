"""Per-track kinematics (probe_track_kin) against numpy / scipy on invented tracks.

References (Debian python3-numpy / python3-scipy):
  - numpy.polyfit degree 1: velocity (slope of x_mm, y_mm against t) and growth (slope of d_vol_mm
    over rows with edge = 0); degree 2: acceleration = 2 × leading coefficient.
  - scipy.stats.linregress(...).stderr: standard errors of those slopes (n − 2 degrees of freedom).
  - numpy.median: d_vol_mm over non-edge rows.
  - scipy.stats.circmean of 2θ, halved: axial mean of the tilt.
  - scipy.signal.lombscargle (precenter=False, normalize=False): the periodogram itself at 40
    frequencies per track (relative 1e-9), and its peak on a 4× finer grid than ours over the same
    band: our refined peak must sit in the same lobe (within one of our grid steps) with a power no
    lower than scipy's best grid value (1e-9), i.e. the local search only climbs.
  - numpy.linalg.lstsq of the detrended x on [cos ωt, sin ωt] at our frequency: amplitude (1e-8).
Tolerances are rounding-level because each reference computes the same estimator.
Conventions from CONTRACT.md: y_mm = (height − 1 − y_px) · s, so a rising bubble has vy > 0.
"""
import argparse
import math
import os
import subprocess
import sys

import numpy as np
from scipy import signal, stats


def close(a, b, rel, absol=0.0):
    if np.isnan(a) and np.isnan(b):
        return True
    return abs(a - b) <= max(absol, rel * max(abs(a), abs(b)))


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--build", required=True)
    args = ap.parse_args()
    probe = os.path.join(args.build, "probe_track_kin")
    rng = np.random.default_rng(20240612)

    tracks = []
    for k in range(120):
        fps = float(rng.choice([60, 250, 1000, 5000]))
        nfr = int(rng.integers(12, 500))
        keep = rng.uniform(size=nfr) > rng.uniform(0, 0.3)  # gaps: uneven sampling
        keep[:2] = True
        fr = np.nonzero(keep)[0] + int(rng.integers(0, 10000))
        t = fr / fps
        tt = t - t[0]
        dur = tt[-1] if tt[-1] > 0 else 1 / fps
        f_osc = rng.uniform(3, 10) / dur  # 3..10 cycles over the track
        amp = rng.uniform(0.5, 8)
        x = (rng.uniform(50, 900) + rng.normal(0, 80) * tt + amp * np.sin(2 * np.pi * f_osc * tt + rng.uniform(0, 6))
             + rng.normal(0, 0.05 * amp, t.size))
        y = rng.uniform(300, 1000) - rng.uniform(20, 400) * tt - 0.5 * rng.normal(0, 100) * tt ** 2 \
            + rng.normal(0, 0.3, t.size)
        d = rng.uniform(5, 60) + rng.normal(0, 5) * tt + rng.normal(0, 0.3, t.size)
        edge = (rng.uniform(size=t.size) < 0.1).astype(int)
        aspect = rng.uniform(0.4, 1.0, t.size)
        tilt = np.where(rng.uniform(size=t.size) < 0.5, rng.normal(85, 5, t.size), rng.normal(-85, 5, t.size))
        tilt = (tilt + 90) % 180 - 90
        tilt[tilt == -90] = 90
        tracks.append(dict(fr=fr, t=t, x=x, y=y, d=d, edge=edge, aspect=aspect, tilt=tilt,
                           s=float(rng.choice([0.0, 0.01, 0.05])), h=int(rng.integers(1000, 1200))))

    text = []
    for tr in tracks:
        text.append(f"K {tr['t'].size} {tr['s']!r} {tr['h']}\n")
        for i in range(tr["t"].size):
            text.append(f"{tr['fr'][i]} {tr['t'][i]!r} {tr['x'][i]!r} {tr['y'][i]!r} {tr['d'][i]!r} "
                        f"{tr['aspect'][i]!r} {tr['tilt'][i]!r} {tr['edge'][i]}\n")
    # Periodogram at given frequencies on the detrended x of the first 30 tracks.
    ls_cases = []
    for tr in tracks[:30]:
        tt = tr["t"] - tr["t"][0]
        r = tr["x"] - np.polyval(np.polyfit(tt, tr["x"], 1), tt)
        w = 2 * np.pi * rng.uniform(0.1, 0.5 / np.median(np.diff(tt)), 40)
        ls_cases.append((tt, r, w))
        text.append(f"L {tt.size} {w.size}\n" + "".join(f"{a!r} {b!r}\n" for a, b in zip(tt, r))
                    + " ".join(repr(v) for v in w) + "\n")
    out = subprocess.run([probe], input="".join(text), capture_output=True, text=True, check=True).stdout.splitlines()

    fails = 0
    worst = {}

    def check(name, got, want, rel, absol=0.0):
        nonlocal fails
        if not close(got, want, rel, absol):
            print(f"track {k}: {name}: {got!r} vs reference {want!r}")
            fails += 1
        elif np.isfinite(want) and want != 0:
            worst[name] = max(worst.get(name, 0.0), abs(got - want) / abs(want))

    for k, tr in enumerate(tracks):
        f = out[k].split()
        if f[0] == "FAIL":
            print(f"track {k}: {out[k]}")
            fails += 1
            continue
        (vx, vy, vxse, vyse, ax, ay, dvol, gr, grse, oamp, ofreq, opow, tiltm, aspm, xb, yb, d0) = map(float, f)
        s = tr["s"] if tr["s"] > 0 else 1.0
        t = tr["t"] - tr["t"][0]
        xm = tr["x"] * s
        ym = (tr["h"] - 1 - tr["y"]) * s
        check("vx", vx, np.polyfit(t, xm, 1)[0], 1e-9, 1e-12)
        check("vy", vy, np.polyfit(t, ym, 1)[0], 1e-9, 1e-12)
        check("vx_se", vxse, stats.linregress(t, xm).stderr, 1e-7, 1e-12)
        check("vy_se", vyse, stats.linregress(t, ym).stderr, 1e-7, 1e-12)
        check("ax", ax, 2 * np.polyfit(t, xm, 2)[0], 1e-6, 1e-9)
        check("ay", ay, 2 * np.polyfit(t, ym, 2)[0], 1e-6, 1e-9)
        clean = tr["edge"] == 0
        dm = tr["d"][clean] * s
        tc = t[clean]
        check("d_vol median", dvol, np.median(dm) if dm.size else np.nan, 1e-12)
        check("growth", gr, np.polyfit(tc, dm, 1)[0] if dm.size >= 2 else np.nan, 1e-8, 1e-12)
        check("growth_se", grse, stats.linregress(tc, dm).stderr if dm.size >= 3 else np.nan, 1e-7, 1e-12)
        th = np.radians(tr["tilt"])
        ref_tilt = math.degrees(stats.circmean(2 * th, high=np.pi, low=-np.pi) / 2)
        if ref_tilt <= -90:
            ref_tilt += 180
        dt = (tiltm - ref_tilt + 90) % 180 - 90  # axial angles: compare modulo 180
        check("tilt axial mean", dt, 0.0, 0, 1e-9)
        check("aspect mean", aspm, tr["aspect"].mean(), 1e-12)
        check("birth x", xb, xm[0], 1e-12)
        check("birth y", yb, ym[0], 1e-12, 1e-12)
        check("first d", d0, tr["d"][0] * s, 1e-12)

        # Oscillation: same band and grid rules as the library (see kinematics.c / methods-track.md).
        n = t.size
        r = xm - np.polyval(np.polyfit(t, xm, 1), t)
        T = t[-1]
        step = np.median(np.diff(t))
        flo, fhi = 1.5 / T, 0.5 / step
        if n < 8 or fhi <= flo:
            check("osc amp (too short)", oamp, 0.0, 0, 0)
            continue
        df = 1 / (5 * T)
        ngrid = min(int(math.floor((fhi - flo) / df)) + 1, max(64, int(2e7 // n)))
        fhi = flo + (ngrid - 1) * df
        fine = np.linspace(flo, fhi, 4 * (ngrid - 1) + 1)
        p = signal.lombscargle(t, r, 2 * np.pi * fine)
        fbest = fine[np.argmax(p)]
        pbest = p.max()
        pown = signal.lombscargle(t, r, np.array([2 * np.pi * ofreq]))[0]
        if abs(ofreq - fbest) > df:
            print(f"track {k}: oscillation peak {ofreq!r} Hz, scipy fine-grid peak {fbest!r} Hz (step {df:.3g})")
            fails += 1
        if pown < pbest * (1 - 1e-9):
            print(f"track {k}: power at our peak {pown!r} below scipy's grid best {pbest!r}")
            fails += 1
        check("osc power share", opow, 2 * pown / (r @ r), 1e-8)
        A = np.column_stack([np.cos(2 * np.pi * ofreq * t), np.sin(2 * np.pi * ofreq * t)])
        coef = np.linalg.lstsq(A, r, rcond=None)[0]
        check("osc amplitude", oamp, math.hypot(*coef), 1e-8, 1e-12)

    base = len(tracks)
    for c, (tt, r, w) in enumerate(ls_cases):
        k = base + c
        got = np.array([float(v) for v in out[base + 2 * c].split()])
        ref = signal.lombscargle(tt, r, w)
        rel = np.max(np.abs(got - ref) / np.maximum(ref.max() * 1e-6, np.abs(ref)))
        worst["lombscargle"] = max(worst.get("lombscargle", 0.0), rel)
        if rel > 1e-9:
            print(f"periodogram case {c}: relative difference {rel:.3g}")
            fails += 1
        ab = [tuple(map(float, v.split(":"))) for v in out[base + 2 * c + 1].split()]
        for (a, b), wi, pi in zip(ab, w, ref):
            A = np.column_stack([np.cos(wi * tt), np.sin(wi * tt)])
            coef = np.linalg.lstsq(A, r, rcond=None)[0]
            if not close(math.hypot(a, b), math.hypot(*coef), 1e-7, 1e-12):
                print(f"periodogram case {c}: LS amplitude {math.hypot(a, b)!r} vs {math.hypot(*coef)!r}")
                fails += 1
                break

    print("worst relative differences: " + ", ".join(f"{k} {v:.2g}" for k, v in sorted(worst.items())))
    print(f"{len(tracks)} tracks, {len(ls_cases)} periodograms, {fails} failures")
    return 1 if fails else 0


if __name__ == "__main__":
    sys.exit(main())
