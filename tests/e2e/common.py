"""Shared helpers for the end-to-end tests: run the spume command, read CSV tables."""
import argparse
import csv
import json
import os
import subprocess
import sys
import tempfile
import time


def build_dir():
    ap = argparse.ArgumentParser()
    ap.add_argument("--build", required=True)
    args = ap.parse_args()
    return os.path.abspath(args.build)


def spume(build, *args, check=True, env=None):
    """Run build/spume with args; returns the CompletedProcess (text mode)."""
    e = dict(os.environ)
    if env:
        e.update(env)
    p = subprocess.run([os.path.join(build, "spume"), *map(str, args)], capture_output=True, text=True, env=e)
    if check and p.returncode != 0:
        sys.stderr.write(p.stderr)
        raise SystemExit(f"spume {' '.join(map(str, args))} exited {p.returncode}")
    return p


def read_csv(path):
    with open(path, newline="") as f:
        rows = list(csv.DictReader(f))
    return rows


def read_json(path):
    with open(path) as f:
        return json.load(f)


def tmpdir(prefix):
    return tempfile.mkdtemp(prefix=f"spume-{prefix}-")


class Checks:
    """Collects pass/fail lines and ends with 'N passed, N failed'."""

    def __init__(self):
        self.passed = 0
        self.failed = 0

    def check(self, ok, what):
        if ok:
            self.passed += 1
            print(f"ok   {what}")
        else:
            self.failed += 1
            print(f"FAIL {what}")

    def done(self):
        print(f"{self.passed} passed, {self.failed} failed")
        sys.exit(1 if self.failed else 0)


def signal_when_measuring(p, out, delay, sig, timeout=120):
    """Send sig to the measure process p `delay` seconds after its detection pass has opened its
    partial tables in `out` (or gave up waiting after `timeout` s), so the signal lands mid-run however
    fast the machine is; nothing is sent to a process that has already ended."""
    t0 = time.monotonic()
    while p.poll() is None and time.monotonic() - t0 < timeout:
        if os.path.isdir(out) and any(f.endswith(".partial") for f in os.listdir(out)):
            break
        time.sleep(0.01)
    time.sleep(delay)
    if p.poll() is None:
        p.send_signal(sig)
