#!/usr/bin/env bash
# Set up (packages, build), synthesise the demo recording and measure it.
set -euo pipefail
here=$(cd "$(dirname "$0")/.." && pwd)
"$here/scripts/setup.sh"
spume="$here/build/spume"
out="$here/demo"
"$spume" synth plume --out "$out/scene"
scale=$(sed -n 's/.*"mm_per_px": *\([0-9.eE+-]*\).*/\1/p' "$out/scene/scene.json" | head -n 1)
# --min-sharpness: the in-focus band of this scene's optics, as the traverse procedure of
# docs/methods-accuracy.md finds it (tests/e2e/test_tracking.py does it on the same scene).
"$spume" measure "$out/scene/video.mkv" --out "$out/result" --scale "$scale" --min-sharpness 0.4
echo
echo "demo: per-bubble table  $out/result/bubbles.csv"
echo "demo: run summary       $out/result/summary.json"
echo "demo: tracks and sites  $out/result/tracks.csv, $out/result/sites.csv"
echo "demo: report            $out/result/report.html"
echo "demo: synthetic truth   $out/scene/truth_bubbles.csv"
head -n 4 "$out/result/bubbles.csv"
