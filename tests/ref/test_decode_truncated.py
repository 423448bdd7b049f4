"""A video cut short must be refused, not measured in part: Matroska files carry no frame count,
only a duration, so the reader compares the frames decoded with the duration at the stream's rate.
Files made by the ffmpeg program (FFV1 and H.264 in Matroska); ffprobe gives the true frame count of
the whole files as the control."""
import argparse
import os
import subprocess
import sys
import tempfile

ap = argparse.ArgumentParser()
ap.add_argument("--build", required=True)
probe = os.path.join(os.path.abspath(ap.parse_args().build), "probe_io_decode")
passed = failed = 0


def check(ok, what):
    global passed, failed
    passed += bool(ok)
    failed += not ok
    print(("ok   " if ok else "FAIL ") + what)


with tempfile.TemporaryDirectory(prefix="spume-trunc-") as d:
    for name, enc in (("ffv1.mkv", ["-c:v", "ffv1"]), ("h264.mkv", ["-c:v", "libx264", "-pix_fmt", "yuv420p"])):
        full = os.path.join(d, name)
        subprocess.run(["ffmpeg", "-nostdin", "-loglevel", "error", "-y", "-f", "lavfi", "-i",
                        "testsrc2=size=160x120:rate=25", "-frames:v", "60", *enc, full], check=True)
        n = int(subprocess.run(["ffprobe", "-v", "error", "-count_frames", "-select_streams", "v:0", "-show_entries",
                                "stream=nb_read_frames", "-of", "csv=p=0", full], capture_output=True, text=True,
                               check=True).stdout.strip())
        p = subprocess.run([probe, full], capture_output=True, text=True)
        got = p.stdout.splitlines()[0] if p.stdout else ""
        check(p.returncode == 0 and got == f"frames {n}", f"{name} whole: {got!r}, ffprobe counts {n}")
        data = open(full, "rb").read()
        for frac in (0.33, 0.7):
            cut = os.path.join(d, f"cut{int(frac * 100)}-{name}")
            open(cut, "wb").write(data[: int(len(data) * frac)])
            p = subprocess.run([probe, cut], capture_output=True, text=True)
            err = p.stderr.strip().splitlines()[-1] if p.stderr.strip() else ""
            check(p.returncode == 2 and "truncated" in err and os.path.basename(cut) in err,
                  f"{name} cut at {frac:.0%}: exit {p.returncode}, {err!r}")
print(f"{passed} passed, {failed} failed")
sys.exit(1 if failed else 0)
