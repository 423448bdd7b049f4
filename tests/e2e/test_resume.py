"""measure --resume: a run interrupted by SIGINT/SIGTERM and resumed (once, or interrupted again and
resumed twice) ends with tables byte-identical to an uninterrupted run with the same options, and
summary.json equal; the checkpoint files are gone afterwards. --resume refuses (exit 2, one line naming
the file, DIR untouched) when there is nothing to resume, the run is complete, the options or the input
differ, or the checkpoint, its spill or the tables were damaged.

The signal is real: the test waits until detection is under way (the temporary bubbles table appears,
which happens after the background pass and, on resume, after the replay), then sends it; with one
worker thread the run has several seconds of frames left, so the signal lands mid-run."""
import hashlib
import os
import shutil
import signal
import subprocess

from common import Checks, build_dir, read_json, signal_when_measuring, spume, tmpdir

build = build_dir()
exe = os.path.join(build, "spume")
work = tmpdir("resume")
c = Checks()
TABLES = ("bubbles.csv", "frames.csv", "tracks.csv", "sites.csv")
RUN_ONLY = {"elapsed_s", "wall_s"}  # keys about the run itself, if ever added; none today

scene = os.path.join(work, "scene")
spume(build, "synth", "plume", "--out", scene, "--frames", "150", "--quiet")
other = os.path.join(work, "other")
spume(build, "synth", "plume", "--out", other, "--frames", "20", "--seed", "7", "--no-png", "--quiet")
meta = read_json(os.path.join(scene, "scene.json"))
video = os.path.join(scene, "video.mkv")
scale = ["--scale", str(meta["mm_per_px"])]


def snapshot(d):
    """Names, sizes and content hashes of everything in d (None if d is missing)."""
    if not os.path.isdir(d):
        return None
    out = {}
    for f in sorted(os.listdir(d)):
        p = os.path.join(d, f)
        if os.path.isfile(p):
            out[f] = hashlib.sha256(open(p, "rb").read()).hexdigest()
    return out


def interrupted_run(args, out, sig, tag, delay=0.4):
    """Start measure, wait until detection runs, send sig `delay` s later; True when it stopped with
    status 130."""
    p = subprocess.Popen([exe, "measure", *args, "--out", out, "--no-report", "--quiet", "--threads", "1"],
                         stderr=subprocess.PIPE, text=True)
    signal_when_measuring(p, out, delay, sig)
    try:
        _, err = p.communicate(timeout=300)
    except subprocess.TimeoutExpired:
        p.kill()
        c.check(False, f"{tag}: the run stopped after {sig.name}")
        return False
    ok = p.returncode == 130
    c.check(ok, f"{tag}: {sig.name} mid-run gives exit status 130 ({p.returncode}): {err.strip()}")
    if ok:
        s = read_json(os.path.join(out, "summary.json"))
        c.check(s["complete"] is False and os.path.exists(os.path.join(out, "resume.checkpoint")),
                f"{tag}: incomplete tables and a checkpoint, next frame {s.get('next_frame')}")
        c.check("--resume" in err, f"{tag}: the message tells how to resume")
        hidden = [f for f in os.listdir(out) if f.startswith(".")]
        c.check(not hidden, f"{tag}: no temporary file left ({hidden})")
    return ok


def resume(args, out, report=False):
    extra = [] if report else ["--no-report"]
    return subprocess.run([exe, "measure", *args, "--out", out, "--resume", "--quiet", "--threads", "2", *extra],
                          capture_output=True, text=True)


def same_as_clean(out, clean, tag):
    for t in TABLES:
        a, b = os.path.join(out, t), os.path.join(clean, t)
        c.check(os.path.exists(a) and open(a, "rb").read() == open(b, "rb").read(),
                f"{tag}: {t} byte-identical to the uninterrupted run")
    sa, sb = read_json(os.path.join(out, "summary.json")), read_json(os.path.join(clean, "summary.json"))
    for k in RUN_ONLY:
        sa.pop(k, None)
        sb.pop(k, None)
    diff = sorted(k for k in set(sa) | set(sb) if sa.get(k) != sb.get(k))
    c.check(not diff and sa["complete"] is True, f"{tag}: summary.json equal, complete (differing keys {diff})")
    left = [f for f in os.listdir(out) if f.startswith(".") or f.startswith("resume.")]
    c.check(not left, f"{tag}: checkpoint and spill removed ({left})")


def clean_run(args, out):
    spume(build, "measure", *args, "--out", out, "--no-report", "--quiet", "--threads", "2")


# ---- A: video, interrupted once; refusals tried on it first; resumed with the report built.
argsA = [video, *scale]
cleanA = os.path.join(work, "cleanA")
clean_run(argsA, cleanA)
outA = os.path.join(work, "outA")
if interrupted_run(argsA, outA, signal.SIGINT, "A"):
    def refused(args, d, want, tag):
        before = snapshot(d)
        p = resume(args, d)
        lines = p.stderr.strip().splitlines()
        c.check(p.returncode == 2 and len(lines) == 1 and want in lines[0] and snapshot(d) == before,
                f"refuses {tag}: exit {p.returncode}, DIR untouched: {p.stderr.strip()}")

    refused(argsA + ["--threshold", "0.6"], outA, "options differ", "other options (--threshold)")
    refused(argsA + ["--no-track"], outA, "options differ", "other options (--no-track)")
    refused([os.path.join(other, "video.mkv"), *scale], outA, "not the interrupted run", "another input")
    refused(argsA, cleanA, "complete already", "a complete run")
    empty = os.path.join(work, "empty")
    os.makedirs(empty)
    refused(argsA, empty, "no interrupted run", "a folder without a run")
    missing = os.path.join(work, "missing")
    refused(argsA, missing, "nothing to resume", "a missing folder")
    c.check(not os.path.exists(missing), "refusal on a missing folder does not create it")

    def damaged(name, how, want, tag):
        d = os.path.join(work, "damaged-" + tag.replace(" ", "-"))
        shutil.copytree(outA, d)
        p = os.path.join(d, name)
        data = bytearray(open(p, "rb").read())
        if how == "flip":
            data[len(data) // 2] ^= 0x40
        elif how == "truncate":
            data = data[:len(data) // 3]
        else:
            data += b"1,2,3\n"
        open(p, "wb").write(bytes(data))
        refused(argsA, d, want, tag)

    damaged("resume.checkpoint", "flip", "damaged checkpoint", "checkpoint with a flipped byte")
    damaged("resume.checkpoint", "truncate", "damaged checkpoint", "truncated checkpoint")
    damaged("resume.links", "flip", "damaged checkpoint", "spill with a flipped byte")
    damaged("resume.links", "truncate", "resume.links", "truncated spill")
    damaged("bubbles.csv", "append", "changed since the interrupt", "bubbles.csv with a row appended")
    damaged("frames.csv", "flip", "changed since the interrupt", "frames.csv with a flipped byte")

    p = resume(argsA, outA, report=True)
    c.check(p.returncode == 0, f"A: resume exit 0 ({p.returncode}) {p.stderr.strip()}")
    same_as_clean(outA, cleanA, "A")
    c.check(os.path.exists(os.path.join(outA, "report.html")), "A: report built on the resumed run")
    p = resume(argsA, outA)
    c.check(p.returncode == 2 and "complete already" in p.stderr and
            os.path.exists(os.path.join(outA, "bubbles.csv")),
            "A: --resume again refuses and keeps the finished run")

# ---- B: video with background segments, interrupted twice (SIGINT, then SIGTERM), resumed twice.
argsB = [video, *scale, "--bg-segments", "3", "--max-gap", "2"]
cleanB = os.path.join(work, "cleanB")
clean_run(argsB, cleanB)
outB = os.path.join(work, "outB")
if interrupted_run(argsB, outB, signal.SIGINT, "B first"):
    n1 = read_json(os.path.join(outB, "summary.json"))["next_frame"]
    p = subprocess.Popen([exe, "measure", *argsB, "--out", outB, "--resume", "--no-report", "--quiet",
                          "--threads", "1"], stderr=subprocess.PIPE, text=True)
    signal_when_measuring(p, outB, 0.4, signal.SIGTERM)
    _, err = p.communicate(timeout=300)
    c.check(p.returncode == 130, f"B: resumed run interrupted again, exit 130 ({p.returncode}) {err.strip()}")
    if p.returncode == 130:
        n2 = read_json(os.path.join(outB, "summary.json"))["next_frame"]
        c.check(n2 >= n1, f"B: second stop at frame {n2}, first at {n1}")
        p = resume(argsB, outB)
        c.check(p.returncode == 0, f"B: second resume exit 0 ({p.returncode}) {p.stderr.strip()}")
        same_as_clean(outB, cleanB, "B")

# ---- C: still frames with a start, step and count, interrupted once.
frames = os.path.join(scene, "frames")
argsC = [frames, *scale, "--fps", str(meta.get("fps", 500)), "--start", "10", "--step", "2", "--count", "80"]
cleanC = os.path.join(work, "cleanC")
clean_run(argsC, cleanC)
outC = os.path.join(work, "outC")
# Its detection pass lasts about half a second here (70 PNG frames, one worker): signal early.
if interrupted_run(argsC, outC, signal.SIGINT, "C", delay=0.1):
    p = resume(argsC, outC)
    c.check(p.returncode == 0, f"C: resume exit 0 ({p.returncode}) {p.stderr.strip()}")
    same_as_clean(outC, cleanC, "C")
if not c.failed:
    shutil.rmtree(work)  # several copies of the run: kept only for a failure's post-mortem
c.done()
