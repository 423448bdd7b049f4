#!/usr/bin/python3
"""The damped-sinusoid estimator against scipy.optimize.curve_fit (a different least-squares
implementation, given the true parameters as its start) on the same synthetic pings, SNR 10-40 dB:
both should land on the same least-squares optimum, so their frequencies must agree to a small fraction
of the Cramer-Rao standard deviation and their decay rates closely; and both must sit near the truth.
"""
import argparse
import os
import subprocess
import sys
import tempfile

import numpy as np
from scipy.optimize import curve_fit

ap = argparse.ArgumentParser()
ap.add_argument("--build", required=True)
args = ap.parse_args()
PROBE = os.path.join(args.build, "probe_acoustic_fit")
failures = []


def check(cond, what):
    if not cond:
        failures.append(what)
        print("FAIL:", what)


def model(t, A, beta, f, phi):
    return A * np.exp(-beta * t) * np.cos(2 * np.pi * f * t + phi)


fs = 48000
rng = np.random.default_rng(99)
cases = [(1700, 174.1, 2000), (4000, 500, 600), (9000, 1500, 200), (1100, 110, 2600)]
with tempfile.TemporaryDirectory() as tmp:
    for f0, b0, n in cases:
        for snr in (10, 20, 30, 40):
            sd = np.sqrt(1 / (2 * 10 ** (snr / 10)))
            t = np.arange(n) / fs
            segs, truths = [], []
            for k in range(20):
                phi = rng.uniform(-np.pi, np.pi)
                segs.append(model(t, 1, b0, f0, phi) + rng.normal(0, sd, n))
                truths.append(phi)
            path = os.path.join(tmp, "s.f32")
            np.concatenate(segs).astype("<f4").tofile(path)
            r = subprocess.run([PROBE, path, str(fs), "300", "22000", str(n)], capture_output=True, text=True)
            check(r.returncode == 0, "probe failed: %s" % r.stderr)
            ours = np.loadtxt(r.stdout.splitlines())
            df, db, dtrue = [], [], []
            for k, seg in enumerate(segs):
                x32 = seg.astype(np.float32).astype(np.float64)  # the probe saw float32 samples
                p, _ = curve_fit(model, t, x32, p0=[1, b0, f0, truths[k]], maxfev=20000)
                A, beta, f, phi = p
                if A < 0:
                    A, phi = -A, phi + np.pi
                df.append(ours[k, 0] - f)
                db.append((ours[k, 1] - beta) / beta)
                dtrue.append(ours[k, 0] - f0)
            df, db = np.array(df), np.array(db)
            # CRB for this case (REFERENCES.md, Fisher matrix of the damped model), computed with numpy.
            J = np.stack([np.exp(-b0 * t) * np.cos(2 * np.pi * f0 * t),
                          -t * np.exp(-b0 * t) * np.cos(2 * np.pi * f0 * t),
                          -2 * np.pi * t * np.exp(-b0 * t) * np.sin(2 * np.pi * f0 * t),
                          -np.exp(-b0 * t) * np.sin(2 * np.pi * f0 * t)], 1)
            crb = np.sqrt(np.linalg.inv(J.T @ J / sd ** 2)[2, 2])
            print("f %5d beta %6.1f SNR %2d: max |f_ours - f_scipy| %.2e Hz (CRB %.3f Hz), max |dbeta|/beta %.2e, "
                  "rms error vs truth %.3f Hz" % (f0, b0, snr, np.max(np.abs(df)), crb, np.max(np.abs(db)),
                                                  np.sqrt(np.mean(np.square(dtrue)))))
            check(np.max(np.abs(df)) < 0.01 * crb, "f %d SNR %d: frequency differs from scipy by %.3g Hz" %
                  (f0, snr, np.max(np.abs(df))))
            check(np.max(np.abs(db)) < 1e-3, "f %d SNR %d: decay differs from scipy by %.3g" % (f0, snr,
                                                                                             np.max(np.abs(db))))
            check(np.sqrt(np.mean(np.square(dtrue))) < 2 * crb, "f %d SNR %d: error vs truth beyond 2 CRB" % (f0, snr))
print("%d failures" % len(failures))
sys.exit(1 if failures else 0)
