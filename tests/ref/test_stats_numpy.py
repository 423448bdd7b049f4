#!/usr/bin/python3
"""Size statistics (src/stats/sizestats.c) against numpy, through probe_stats_size.

Checks (invented data: log-normal bubble sizes, small and tied samples):
  * number percentiles, rules 'linear', 'hazen' and 'inverted_cdf', against numpy.percentile with
    the same method (Hyndman & Fan 1996 types 7, 5, 1), relative 1e-12;
  * weighted inverted-CDF percentiles with integer weights against numpy.percentile of the sample
    repeated by its weights (method 'inverted_cdf'), exactly;
  * volume-weighted Hazen percentiles (dv10/50/90) against numpy.interp over the documented
    midpoint positions (C_i − w_i/2)/W, relative 1e-12;
  * ISO 9276-2 moment-ratio means D[p,q] against numpy sums, D[0,0] against scipy.stats.gmean;
    REFERENCES.md d = {1, 2, 3} mm → D[3,2] 2.57143, D[4,3] 2.72222, D[3,0] 2.2894;
  * number and volume histograms against numpy.histogram(bins=edges, weights=d**k), values placed
    exactly on edges included;
  * the percentile bootstrap: the resamples are regenerated here from the documented counter-based
    generator (splitmix64), their d10/d32/d43/dv50 computed with numpy and the interval taken with
    numpy.percentile; identical output at 1 and 2 threads.
"""
import argparse
import os
import subprocess
import sys

import numpy as np
from scipy.stats import gmean

M64 = (1 << 64) - 1
FAIL = []


def check(cond, msg):
    if not cond:
        FAIL.append(msg)
        print("FAIL " + msg)


def run(build, args, x, w=None):
    exe = os.path.join(build, "probe_stats_size")
    if w is None:
        text = "".join("%.17g\n" % v for v in x)
    else:
        text = "".join("%.17g %.17g\n" % (v, u) for v, u in zip(x, w))
    p = subprocess.run([exe] + [str(a) for a in args], input=text, capture_output=True, text=True)
    if p.returncode != 0:
        raise AssertionError("probe %s failed: %s" % (args, p.stderr))
    return p.stdout


def floats(out):
    return np.array([float(line.split()[-1]) for line in out.strip().splitlines()])


def close(a, b, rtol=1e-12):
    return np.allclose(a, b, rtol=rtol, atol=0)


def samples(rng):
    yield "n=1", np.array([1.7])
    yield "n=2", np.array([2.0, 1.0])
    yield "REFERENCES 1,2,3", np.array([1.0, 2.0, 3.0])
    for k in range(12):
        n = int(rng.integers(3, 3000))
        yield "lognormal n=%d" % n, rng.lognormal(np.log(1.5), rng.uniform(0.1, 0.8), n)
    for k in range(4):
        n = int(rng.integers(5, 500))
        yield "tied n=%d" % n, np.round(rng.lognormal(0.3, 0.4, n), 1) + 0.1


def hazen_weighted(x, w, f):
    o = np.lexsort((w, x))
    xs, ws = x[o], w[o]
    keep = ws > 0
    xs, ws = xs[keep], ws[keep]
    pos = (np.cumsum(ws) - ws / 2) / ws.sum()
    return np.interp(f, pos, xs)


def mix(z):
    z = (z + 0x9E3779B97F4A7C15) & M64
    z = ((z ^ (z >> 30)) * 0xBF58476D1CE4E5B9) & M64
    z = ((z ^ (z >> 27)) * 0x94D049BB133111EB) & M64
    return z ^ (z >> 31)


def resample_indices(seed, b, n):
    key = mix(seed ^ mix(b))
    reject = (-n) % (1 << 64) % n
    k = 0
    out = []
    while len(out) < n:
        u = mix((key + k * 0xD1B54A32D192ED03) & M64)
        k += 1
        if u >= reject:
            out.append(u % n)
    return np.array(out)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--build", required=True)
    a = ap.parse_args()
    rng = np.random.default_rng(20240611)
    pcts = [0, 0.1, 1, 5, 10, 25, 33.3, 50, 66.7, 75, 90, 95, 99, 99.9, 100]

    for name, d in samples(rng):
        for rule, method in (("linear", "linear"), ("hazen", "hazen"), ("icdf", "inverted_cdf")):
            c = floats(run(a.build, ["pct", rule] + pcts, d))
            ref = np.percentile(d, pcts, method=method)
            check(close(c, ref), "%s: %s percentiles %s vs numpy %s" % (name, rule, c, ref))
        # integer weights ≡ repetition, inverted CDF
        w = rng.integers(0, 6, len(d)).astype(float)
        if w.sum() == 0:
            w[0] = 1
        c = floats(run(a.build, ["pct", "icdf"] + pcts, d, w))
        ref = np.percentile(np.repeat(d, w.astype(int)), pcts, method="inverted_cdf")
        check(np.array_equal(c, ref), "%s: weighted inverted CDF %s vs numpy repeat %s" % (name, c, ref))
        # volume-weighted Hazen
        c = floats(run(a.build, ["vpct", "hazen"] + pcts, d))
        ref = hazen_weighted(d, d ** 3, np.array(pcts) / 100)
        check(close(c, ref), "%s: volume Hazen %s vs %s" % (name, c, ref))
        # moment-ratio means
        for p, q in ((1, 0), (2, 0), (3, 0), (3, 2), (4, 3), (2, 1), (1.5, 0.5)):
            c = floats(run(a.build, ["mean", p, q], d))[0]
            ref = ((d ** p).sum() / (d ** q).sum()) ** (1 / (p - q))
            check(close(c, ref), "%s: D[%g,%g] %.15g vs %.15g" % (name, p, q, c, ref))
        c = floats(run(a.build, ["mean", 0, 0], d))[0]
        check(close(c, gmean(d)), "%s: D[0,0] %.15g vs gmean %.15g" % (name, c, gmean(d)))
        # histograms, linear and log edges, some values exactly on edges
        lo, hi = np.percentile(d, [5, 95]) if len(d) > 3 else (d.min(), d.max() + 1)
        for edges in (np.linspace(lo, hi, 13), np.geomspace(lo, hi, 9)):
            dd = np.concatenate([d, edges[[0, 3, -1]]])
            for k in (0, 3):
                out = run(a.build, ["hist", k] + ["%.17g" % e for e in edges], dd).strip().splitlines()
                c = np.array([float(v) for v in out[:-1]])
                ref, _ = np.histogram(dd, bins=edges, weights=dd ** k)
                outside = (dd ** k)[(dd < edges[0]) | (dd > edges[-1])].sum()
                check(close(c, ref, 1e-12 if k else 0), "%s: histogram k=%d %s vs %s" % (name, k, c, ref))
                check(close(float(out[-1].split()[1]), outside, 1e-12), "%s: outside weight" % name)

    # REFERENCES.md, ISO 9276-2
    s = [float(v) for v in run(a.build, ["summary"], [1, 2, 3]).split()]
    check(abs(s[3] - 2.57143) < 5e-6 and abs(s[4] - 2.72222) < 5e-6 and abs(s[2] - 2.2894) < 5e-5,
          "REFERENCES D[3,2], D[4,3], D[3,0]: %s" % s)

    # bootstrap, reproduced
    d = rng.lognormal(np.log(1.2), 0.4, 57)
    B, seed = 300, 12345
    outs = [run(a.build, ["boot", B, seed, 0.9, t], d) for t in (1, 2)]
    check(outs[0] == outs[1], "bootstrap output differs between 1 and 2 threads")
    lines = outs[0].strip().splitlines()
    ci = np.array([[float(v) for v in line.split()] for line in lines[:4]])
    reps = np.array([float(v) for v in lines[4:]]).reshape(4, B)
    ds = np.sort(d)
    mine = np.empty((4, B))
    for b in range(B):
        r = ds[resample_indices(seed, b, len(ds))]
        mine[0, b] = r.mean()
        mine[1, b] = (r ** 3).sum() / (r ** 2).sum()
        mine[2, b] = (r ** 4).sum() / (r ** 3).sum()
        mine[3, b] = hazen_weighted(r, r ** 3, 0.5)
    check(close(reps, mine, 1e-11), "bootstrap replicates differ from the Python regeneration (max rel %.3g)" %
          np.max(np.abs(reps / mine - 1)))
    est = [d.mean(), (d ** 3).sum() / (d ** 2).sum(), (d ** 4).sum() / (d ** 3).sum(), hazen_weighted(d, d ** 3, 0.5)]
    for k, nm in enumerate(("d10", "d32", "d43", "dv50")):
        lo, hi = np.percentile(mine[k], [5, 95])
        check(close(ci[k], [est[k], lo, hi], 1e-11), "bootstrap %s: %s vs %s" % (nm, ci[k], [est[k], lo, hi]))
        print("bootstrap %s: %.4f [%.4f, %.4f] (90%%, B=%d, n=%d)" % (nm, ci[k][0], ci[k][1], ci[k][2], B, len(d)))

    if FAIL:
        print("%d failures" % len(FAIL))
        return 1
    print("ok")
    return 0


if __name__ == "__main__":
    sys.exit(main())
