"""Replays hostile inputs through the fuzz targets (tests/fuzz/fuzz_*.c, built without libFuzzer into
probe_acoustic_fuzz_replay, probe_calib_fuzz_replay, probe_detect_fuzz_replay and
probe_pipeline_fuzz_replay) and demands a clean answer for each: exit 0,
meaning every file was read or refused within the error contract (status 1/2, one line naming the
file). A crash, a sanitizer report (in the build-asan suite) or an abort on a broken contract fails.

Inputs: every file under fixtures/fuzz-regress/<target>/ (inputs the fuzzer once crashed on, kept
after the fix), plus damaged copies of small valid files made here with Pillow and ffmpeg: truncated
at several lengths and with bytes overwritten at seeded positions. The checkpoint target's valid
files are its own: the probe writes them (SPUME_FUZZ_DUMP_SEEDS) from the interrupted run it makes;
their first byte (the harness's selector) is kept intact in the damaged copies."""
import argparse
import os
import subprocess
import sys
import tempfile

import numpy as np
from PIL import Image

HERE = os.path.dirname(os.path.abspath(__file__))
ROOT = os.path.dirname(os.path.dirname(HERE))
REGRESS = os.path.join(ROOT, "fixtures", "fuzz-regress")
BUILD = None

PROBE = {"png": "acoustic", "jpeg": "acoustic", "ffimage": "acoustic", "video": "acoustic",
         "audio": "acoustic", "liquid": "acoustic", "calfile": "calib", "checkpoint": "pipeline",
         "detect": "detect"}


def valid_seeds(d):
    """A few valid files per target, written into d; returns {target: [paths]}."""
    rng = np.random.default_rng(11)
    g = (rng.random((20, 24)) * 255).astype(np.uint8)
    g16 = (rng.random((20, 24)) * 4095).astype(np.uint16)
    rgb = (rng.random((14, 17, 3)) * 255).astype(np.uint8)
    out = {k: [] for k in PROBE}

    def save(target, name, im, **kw):
        p = os.path.join(d, name)
        im.save(p, **kw)
        out[target].append(p)

    save("png", "g8.png", Image.fromarray(g))
    save("png", "g16.png", Image.fromarray(g16, mode="I;16"))
    save("png", "pal.png", Image.fromarray(rgb).convert("P"))
    save("jpeg", "g.jpg", Image.fromarray(g), quality=85)
    save("jpeg", "prog.jpg", Image.fromarray(rgb), quality=70, progressive=True)
    save("ffimage", "g16.tif", Image.fromarray(g16, mode="I;16"))
    save("ffimage", "rgb.bmp", Image.fromarray(rgb))
    save("ffimage", "g.pgm", Image.fromarray(g))
    for name, args in (("raw.nut", ["-pix_fmt", "gray", "-c:v", "rawvideo", "-f", "nut"]),
                       ("ffv1.mkv", ["-pix_fmt", "gray16le", "-c:v", "ffv1", "-f", "matroska"]),
                       ("mjpeg.avi", ["-c:v", "mjpeg", "-f", "avi"])):
        p = os.path.join(d, name)
        subprocess.run(["ffmpeg", "-nostdin", "-loglevel", "error", "-y", "-f", "lavfi", "-i",
                        "testsrc2=size=40x30:rate=10:duration=0.5", *args, p], check=True)
        out["video"].append(p)
    for name, args in (("s16.wav", ["-c:a", "pcm_s16le", "-f", "wav"]),
                       ("a.flac", ["-c:a", "flac", "-f", "flac"])):
        p = os.path.join(d, name)
        subprocess.run(["ffmpeg", "-nostdin", "-loglevel", "error", "-y", "-f", "lavfi", "-i",
                        "sine=frequency=900:sample_rate=8000:duration=0.2", "-ac", "2", *args, p], check=True)
        out["audio"].append(p)
    for name, text in (("cal.json", '{"mm_per_px": 0.02, "mm_per_px_uncertainty": 0.0002, "rotation_deg": 1.5,'
                                     ' "homography": [1,0,0,0,1,0,0,0,1]}'),):
        p = os.path.join(d, name)
        open(p, "w").write(text)
        out["calfile"].append(p)
    p = os.path.join(d, "oil.json")
    open(p, "w").write('{"name": "oil", "model": "fixed", "temp_c": 20, "rho_kg_m3": 870, '
                       '"mu_pa_s": 0.05, "sigma_n_m": 0.03}')
    out["liquid"].append(p)
    # Detection frames (fuzz_detect's four header bytes: width-1, height-1, option bits, background
    # mode): bubble-like rings over light, 8- and 16-bit, every option bit; damaged copies change
    # sizes, options and pixels, and the planned and plain passes must still agree bit for bit.
    yy, xx = np.mgrid[0:40, 0:56]
    ring = np.full((40, 56), 200.0)
    for cx, cy, r in ((14, 12, 8), (36, 24, 11), (50, 5, 6), (28, 20, 6)):
        rr = np.hypot(xx - cx, yy - cy)
        ring = np.where(rr < r, np.where(rr < 0.4 * r, 190.0, 40.0), ring)
    for flags, mode in ((0, 0), (2, 1), (4, 2), (8, 3), (16, 1), (1, 0), (1 | 32, 1), (6 | 64, 2)):
        px = (ring * 15).astype("<u2").tobytes() if flags & 1 else ring.astype(np.uint8).tobytes()
        p = os.path.join(d, f"rings-{flags}-{mode}")
        open(p, "wb").write(bytes([55, 39, flags, mode]) + px)
        out["detect"].append(p)
    sd = os.path.join(d, "ckseeds")
    os.mkdir(sd)
    empty = os.path.join(d, "empty-input")
    open(empty, "wb").close()
    subprocess.run([os.path.join(BUILD, "probe_pipeline_fuzz_replay"), "checkpoint", empty], check=True,
                   capture_output=True, env=dict(os.environ, SPUME_FUZZ_DUMP_SEEDS=sd), timeout=600)
    out["checkpoint"] = sorted(os.path.join(sd, f) for f in os.listdir(sd))
    if len(out["checkpoint"]) != 4:
        raise SystemExit(f"checkpoint seeds: expected 4, got {out['checkpoint']}")
    return out


def damaged(path, d, rng):
    """Truncations and seeded byte overwrites of one valid file."""
    data = open(path, "rb").read()
    base = os.path.basename(path)
    keep = 1 if base.startswith("seed-") else 0  # the checkpoint target's selector byte
    made = []
    for frac in (0.1, 0.5, 0.9):
        p = os.path.join(d, f"trunc{int(frac * 100)}-{base}")
        open(p, "wb").write(data[: max(1 + keep, int(len(data) * frac))])
        made.append(p)
    for k in range(4):
        b = bytearray(data)
        # Headers hold the sizes: half the hits land in the first 64 bytes.
        for _ in range(4):
            i = int(rng.integers(keep, min(64, len(b)))) if rng.random() < 0.5 else int(rng.integers(keep, len(b)))
            b[i] = int(rng.choice([0x00, 0xFF, 0x7F, 0x80, int(rng.integers(0, 256))]))
        p = os.path.join(d, f"flip{k}-{base}")
        open(p, "wb").write(bytes(b))
        made.append(p)
    return made


def run(build, target, files):
    exe = os.path.join(build, f"probe_{PROBE[target]}_fuzz_replay")
    return subprocess.run([exe, target, *files], capture_output=True, text=True, timeout=600)


def main():
    ap = argparse.ArgumentParser()
    ap.add_argument("--build", required=True)
    global BUILD
    build = BUILD = os.path.abspath(ap.parse_args().build)
    passed = failed = 0
    rng = np.random.default_rng(2026)
    with tempfile.TemporaryDirectory(prefix="spume-fuzzregress-") as d:
        seeds = valid_seeds(d)
        for target in PROBE:
            files = list(seeds[target])
            for s in seeds[target]:
                files += damaged(s, d, rng)
            rdir = os.path.join(REGRESS, f"fuzz_{target}")
            kept = sorted(os.path.join(rdir, f) for f in os.listdir(rdir)) if os.path.isdir(rdir) else []
            files += kept
            p = run(build, target, files)
            if p.returncode == 0 and p.stdout.count("\nok ") + p.stdout.startswith("ok ") == len(files):
                passed += 1
                print(f"ok   {target}: {len(files)} inputs ({len(kept)} kept crash inputs) handled")
                continue
            # Find the file(s) responsible, one run each.
            bad = [f for f in files if run(build, target, [f]).returncode != 0]
            failed += 1
            print(f"FAIL {target}: exit {p.returncode}; failing inputs: {bad[:10]}")
            sys.stdout.write(p.stderr[-3000:])
    print(f"{passed} passed, {failed} failed")
    return 1 if failed else 0


if __name__ == "__main__":
    sys.exit(main())
