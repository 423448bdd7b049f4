"""Matching truth bubbles to measured ones, frame by frame, for the tracking tests.

Per frame the pairing is one to one (each measured bubble stands for at most one truth bubble), the
assignment that minimises the summed centroid distance over the pairs allowed (scipy's
linear_sum_assignment), as the CLEAR MOT metrics do (Bernardin & Stiefelhagen 2008, "Evaluating
multiple object tracking performance"). A pair is allowed when the centroids lie within
max(2 px, 0.3 x truth minor_px). A nearest-centroid rule without the one-to-one constraint lets a
bubble hidden entirely behind another (its centre near the occluder's centroid) claim the occluder's
detection, and counts the occluder's track as that bubble's: an id switch no tracker could avoid.

For a truth bubble cut by the frame border (truth edge = 1) the truth centroid is the whole
bubble's, partly outside the frame, which no detector can report: what is seen, and measured, is the
part inside the frame. Such a row is compared by the centroid of the part of its true ellipse that
lies inside the frame (sampled on a 0.25 px grid), with the same tolerance; a row whose ellipse has
no part inside the frame takes no detection."""
from collections import defaultdict

import numpy as np
from scipy.optimize import linear_sum_assignment
from scipy.spatial import cKDTree


def visible_centroid(r, width, height, step=0.25):
    """Centroid of the part of truth row r's ellipse inside the frame [-0.5, w-0.5] x [-0.5, h-0.5],
    or None when none of it is. tilt_deg is counter-clockwise from +x with y up (rows run down)."""
    x, y = float(r["x_px"]), float(r["y_px"])
    a, b = float(r["major_px"]) / 2, float(r["minor_px"]) / 2
    t = np.radians(float(r["tilt_deg"]))
    x0, x1 = max(x - a, -0.5), min(x + a, width - 0.5)
    y0, y1 = max(y - a, -0.5), min(y + a, height - 0.5)
    if x1 <= x0 or y1 <= y0:
        return None
    gx, gy = np.meshgrid(np.arange(x0 + step / 2, x1, step), np.arange(y0 + step / 2, y1, step))
    dx, dy = gx - x, gy - y
    u = dx * np.cos(t) - dy * np.sin(t)
    v = dx * np.sin(t) + dy * np.cos(t)
    inside = (u / a) ** 2 + (v / b) ** 2 <= 1
    if not inside.any():
        return None
    return float(gx[inside].mean()), float(gy[inside].mean())


def match(truth, measured, width, height):
    """Returns {(frame, truth track): measured row} for the matched truth rows."""
    by_frame = defaultdict(list)
    for m in measured:
        by_frame[m["frame"]].append(m)
    truth_by_frame = defaultdict(list)
    for r in truth:
        truth_by_frame[r["frame"]].append(r)
    out = {}
    for f, rows in truth_by_frame.items():
        ms = by_frame.get(f)
        if not ms:
            continue
        tree = cKDTree([[float(m["x_px"]), float(m["y_px"])] for m in ms])
        cost = np.full((len(rows), len(ms)), np.inf)
        for i, r in enumerate(rows):
            p = (float(r["x_px"]), float(r["y_px"]))
            if r["edge"] == "1":
                p = visible_centroid(r, width, height)
                if p is None:
                    continue
            lim = max(2.0, 0.3 * float(r["minor_px"]))
            for j in tree.query_ball_point(p, lim):
                cost[i, j] = np.hypot(float(ms[j]["x_px"]) - p[0], float(ms[j]["y_px"]) - p[1])
        ok = np.isfinite(cost).any(axis=1)
        if not ok.any():
            continue
        rows_ok = np.flatnonzero(ok)
        sub = cost[rows_ok]
        cols_ok = np.flatnonzero(np.isfinite(sub).any(axis=0))
        sub = sub[:, cols_ok]
        big = 1e6  # forbidden pairs: dearer than any allowed set of pairs, dropped after solving
        ri, ci = linear_sum_assignment(np.where(np.isfinite(sub), sub, big))
        for i, j in zip(ri, ci):
            if np.isfinite(sub[i, j]):
                out[(f, rows[rows_ok[i]]["track"])] = ms[cols_ok[j]]
    return out


def sequences(truth, measured, width, height):
    """Per truth track, in frame order, the measured track id matched in each frame (None: none)."""
    m = match(truth, measured, width, height)
    seq = defaultdict(list)
    for r in sorted(truth, key=lambda r: int(r["frame"])):
        hit = m.get((r["frame"], r["track"]))
        seq[r["track"]].append(hit["track"] if hit else None)
    return seq
