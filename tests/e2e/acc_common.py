"""Helpers for the accuracy tests: run the detection probe on PNG frames (converted to PGM with PIL)
and match detections to synth truth."""
import os
import subprocess

import numpy as np
from PIL import Image


def to_pgm(png, pgm):
    a = np.array(Image.open(png))
    if a.ndim == 3:
        raise SystemExit(f"{png}: expected grey frames")
    h, w = a.shape
    if a.dtype == np.uint16:
        body, maxv = a.astype(">u2").tobytes(), 65535
    else:
        body, maxv = a.astype(np.uint8).tobytes(), 255
    with open(pgm, "wb") as f:
        f.write(f"P5\n{w} {h}\n{maxv}\n".encode() + body)


def probe_frames(build, bg_png, frame_pngs, work, extra=()):
    """Detections per frame as a list of dicts (see tests/tools/detect_frames.c)."""
    bg = os.path.join(work, "bg.pgm")
    to_pgm(bg_png, bg)
    pgms = []
    for i, f in enumerate(frame_pngs):
        p = os.path.join(work, f"f{i:05d}.pgm")
        to_pgm(f, p)
        pgms.append(p)
    out = subprocess.run([os.path.join(build, "probe_detect_frames"), *extra, bg, *pgms], capture_output=True,
                         text=True, check=True).stdout.split("\n")
    head = out[0].split()
    rows = []
    for line in out[1:]:
        if line.strip():
            rows.append({k: float(v) for k, v in zip(head, line.split())})
    return rows
