#!/usr/bin/env bash
# Set up (packages, build), synthesise the demo recording and measure it.
set -euo pipefail
here=$(cd "$(dirname "$0")/.." && pwd)
"$here/scripts/setup.sh"
spume="$here/build/spume"
out="$here/demo"
"$spume" synth plume --out "$out/scene"
scale=$(sed -n 's/.*"mm_per_px": *\([0-9.eE+-]*\).*/\1/p' "$out/scene/scene.json" | head -n 1)
"$spume" measure "$out/scene/video.mkv" --out "$out/result" --scale "$scale"
echo
echo "demo: per-bubble table  $out/result/bubbles.csv"
echo "demo: run summary       $out/result/summary.json"
echo "demo: synthetic truth   $out/scene/truth_bubbles.csv"
head -n 4 "$out/result/bubbles.csv"
