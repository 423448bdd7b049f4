"""Assignment solver (probe_track_assign) against scipy.optimize.linear_sum_assignment.

scipy (Debian python3-scipy) solves the same rectangular linear assignment problem (Crouse 2016's
variant of Jonker & Volgenant 1987). Optimal assignments need not be unique, so the totals are
compared (relative 1e-9) and our assignment is checked to be valid: distinct columns, allowed
entries, min(rows, cols) pairs, and its own costs add up to the reported total. 400 invented
matrices: square and rectangular both ways, integer costs with many ties, real costs, wide value
ranges, and forbidden (+inf) entries; infeasible cases must be reported by both.
Also the published example from REFERENCES.md: [[4,1,3],[2,0,5],[3,2,2]] -> columns (1, 0, 2),
total 5 (Kuhn 1955 / Munkres 1957 worked example).
"""
import argparse
import os
import subprocess
import sys

import numpy as np
from scipy.optimize import linear_sum_assignment


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--build", required=True)
    args = ap.parse_args()
    probe = os.path.join(args.build, "probe_track_assign")
    rng = np.random.default_rng(20240611)

    mats = [np.array([[4, 1, 3], [2, 0, 5], [3, 2, 2]], dtype=float)]
    for k in range(400):
        nr = int(rng.integers(1, 60))
        nc = int(rng.integers(1, 60)) if k % 4 else nr
        kind = k % 5
        if kind == 0:
            c = rng.integers(0, 4, size=(nr, nc)).astype(float)  # many ties
        elif kind == 1:
            c = rng.uniform(-1e3, 1e3, size=(nr, nc))
        elif kind == 2:
            c = np.exp(rng.uniform(-10, 10, size=(nr, nc)))  # wide dynamic range
        else:
            c = rng.uniform(0, 1, size=(nr, nc))
        if k % 3 == 0:
            p = rng.uniform(0.2, 0.9)
            c[rng.uniform(size=c.shape) < p] = np.inf
        mats.append(c)

    text = "".join(f"{c.shape[0]} {c.shape[1]}\n" + "\n".join(" ".join(repr(float(v)) if np.isfinite(v) else "inf"
                                                                         for v in row) for row in c) + "\n"
                   for c in mats)
    out = subprocess.run([probe], input=text, capture_output=True, text=True, check=True).stdout.splitlines()
    if len(out) != len(mats):
        print(f"probe answered {len(out)} of {len(mats)} problems")
        return 1

    fails = 0
    feasible = infeasible = 0
    worst = 0.0
    for k, (c, line) in enumerate(zip(mats, out)):
        try:
            r, col = linear_sum_assignment(c)
            ref = float(c[r, col].sum())
        except ValueError:
            ref = None
        f = line.split()
        if ref is None:
            infeasible += 1
            if f[0] != "FAIL":
                print(f"matrix {k}: scipy finds it infeasible, probe says {line[:80]}")
                fails += 1
            continue
        feasible += 1
        if f[0] != "OK":
            print(f"matrix {k} ({c.shape}): probe failed: {line}")
            fails += 1
            continue
        tot = float(f[1])
        cols = [int(v) for v in f[2:]]
        rel = abs(tot - ref) / max(1.0, abs(ref))
        worst = max(worst, rel)
        used = [j for j in cols if j >= 0]
        own = sum(c[i, j] for i, j in enumerate(cols) if j >= 0)
        ok = (len(cols) == c.shape[0] and len(used) == min(c.shape) and len(set(used)) == len(used)
              and np.isfinite(own) and abs(own - tot) <= 1e-9 * max(1.0, abs(tot)) and rel <= 1e-9)
        if not ok:
            print(f"matrix {k} ({c.shape}): total {tot!r} vs scipy {ref!r}, own sum {own!r}")
            fails += 1
    if out[0].split()[2:] != ["1", "0", "2"] or float(out[0].split()[1]) != 5.0:
        print(f"published example: {out[0]}")
        fails += 1
    print(f"{feasible} feasible problems, worst relative difference of totals {worst:.3g}; "
          f"{infeasible} infeasible; {fails} failures")
    return 1 if fails else 0


if __name__ == "__main__":
    sys.exit(main())
