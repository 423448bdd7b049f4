#!/usr/bin/env bash
# Build the libFuzzer targets of tests/fuzz/ with clang (-fsanitize=fuzzer,address,undefined) in
# their own build directory and run each for a set time.
#
# Usage: scripts/fuzz.sh [-t SECONDS] [-j JOBS] [TARGET...]
#   -t  seconds per target (default 60); TARGET names like fuzz_png (default: all)
# Seeds: generated here (tiny valid files of each format, made with ffmpeg and Pillow; fuzz_checkpoint
# writes its own from a real interrupted run), plus anything
# under fixtures/fuzz/<target>/ and fixtures/fuzz-regress/<target>/. Crashes land in
# build-fuzz/crashes/<target>/; copy a fixed one to fixtures/fuzz-regress/<target>/ so that
# tests/ref/test_fuzz_regress.py replays it in the ordinary suite. Exit status: 1 if any target found
# a crash, a leak, a timeout or an out-of-memory.
set -euo pipefail
here=$(cd "$(dirname "$0")/.." && pwd)
build=${SPUME_FUZZ_BUILD:-$here/build-fuzz}
secs=60
jobs=1
while getopts "t:j:" opt; do
  case $opt in
    t) secs=$OPTARG ;;
    j) jobs=$OPTARG ;;
    *) echo "usage: $0 [-t SECONDS] [-j JOBS] [TARGET...]" >&2; exit 2 ;;
  esac
done
shift $((OPTIND - 1))
all=(fuzz_png fuzz_jpeg fuzz_ffimage fuzz_video fuzz_audio fuzz_calfile fuzz_liquid fuzz_checkpoint fuzz_detect)
targets=("$@")
[ ${#targets[@]} -gt 0 ] || targets=("${all[@]}")
py=/usr/bin/python3

# ---- library, instrumented for coverage (fuzzer-no-link) and sanitizers
san="-fsanitize=fuzzer-no-link,address,undefined -fno-sanitize-recover=undefined -fno-omit-frame-pointer -g"
CC=clang cmake -S "$here" -B "$build" -DCMAKE_BUILD_TYPE=RelWithDebInfo -DCMAKE_C_FLAGS="$san" >/dev/null
# Only the layers the chosen targets link are built (the calibration reader pulls in detect; the
# resume readers are driven through sp_measure, which pulls in every layer of the pipeline).
need=(spume_core spume_io spume_physics)
for t in "${targets[@]}"; do
  [ "$t" = fuzz_calfile ] && need+=(spume_detect spume_calib)
  [ "$t" = fuzz_detect ] && need+=(spume_detect)
  [ "$t" = fuzz_checkpoint ] && need+=(spume_detect spume_calib spume_stats spume_track spume_report spume_pipeline)
done
cmake --build "$build" -j"$(nproc)" --target "${need[@]}" >/dev/null

syslibs=$(pkg-config --libs libavformat libavcodec libavutil libswscale libswresample jansson libpng libjpeg)
for t in "${targets[@]}"; do
  src="$here/tests/fuzz/$t.c"
  [ -f "$src" ] || { echo "fuzz: no target $t" >&2; exit 2; }
  libs=("$build/libspume_io.a" "$build/libspume_physics.a" "$build/libspume_core.a")
  [ "$t" = fuzz_calfile ] && libs=("$build/libspume_calib.a" "$build/libspume_detect.a" "${libs[@]}")
  [ "$t" = fuzz_detect ] && libs=("$build/libspume_detect.a" "${libs[@]}")
  [ "$t" = fuzz_checkpoint ] && libs=("$build/libspume_pipeline.a" "$build/libspume_report.a"
    "$build/libspume_calib.a" "$build/libspume_track.a" "$build/libspume_detect.a" "$build/libspume_stats.a"
    "${libs[@]}")
  if [ ! -x "$build/$t" ] || [ "$src" -nt "$build/$t" ] || [ "$here/tests/fuzz/fuzz_common.h" -nt "$build/$t" ] ||
     [ -n "$(find "${libs[@]}" -newer "$build/$t" 2>/dev/null)" ]; then
    # shellcheck disable=SC2086
    clang -std=c11 -D_XOPEN_SOURCE=700 -O1 -g -fsanitize=fuzzer,address,undefined -fno-sanitize-recover=undefined \
      -fno-omit-frame-pointer -fopenmp -I"$here/src" -I"$here/tests/fuzz" "$src" -o "$build/$t" \
      "${libs[@]}" $syslibs -lm -lpthread
  fi
done

# ---- seeds: one small valid file per format the target reads
seeds="$build/seeds"
if [ ! -f "$seeds/.done" ]; then
  rm -rf "$seeds"
  mkdir -p "$seeds"/{fuzz_png,fuzz_jpeg,fuzz_ffimage,fuzz_video,fuzz_audio,fuzz_calfile,fuzz_liquid}
  "$py" - "$seeds" <<'PY'
import sys, os, io, json
import numpy as np
from PIL import Image
d = sys.argv[1]
rng = np.random.default_rng(7)
g = (rng.random((12, 16)) * 255).astype(np.uint8)
g16 = (rng.random((12, 16)) * 4095).astype(np.uint16)
rgb = (rng.random((10, 9, 3)) * 255).astype(np.uint8)
def save(sub, name, im, **kw):
    im.save(os.path.join(d, sub, name), **kw)
save("fuzz_png", "g8.png", Image.fromarray(g))
save("fuzz_png", "g16.png", Image.fromarray(g16, mode="I;16"))
save("fuzz_png", "rgb.png", Image.fromarray(rgb))
save("fuzz_png", "pal.png", Image.fromarray(rgb).convert("P"))
save("fuzz_png", "rgba.png", Image.fromarray(rgb).convert("RGBA"))
save("fuzz_png", "bw.png", Image.fromarray(g).convert("1"))
save("fuzz_jpeg", "g.jpg", Image.fromarray(g), quality=80)
save("fuzz_jpeg", "rgb.jpg", Image.fromarray(rgb), quality=80)
save("fuzz_jpeg", "prog.jpg", Image.fromarray(rgb), quality=60, progressive=True)
save("fuzz_ffimage", "g8.tif", Image.fromarray(g))
save("fuzz_ffimage", "g16.tif", Image.fromarray(g16, mode="I;16"))
save("fuzz_ffimage", "rgb_lzw.tif", Image.fromarray(rgb), compression="tiff_lzw")
save("fuzz_ffimage", "rgb.bmp", Image.fromarray(rgb))
save("fuzz_ffimage", "g.bmp", Image.fromarray(g))
save("fuzz_ffimage", "g.pgm", Image.fromarray(g))
save("fuzz_ffimage", "rgb.ppm", Image.fromarray(rgb))
open(os.path.join(d, "fuzz_ffimage", "g16.pgm"), "wb").write(b"P5\n16 12\n4095\n" + g16.astype(">u2").tobytes())
cal = {"mm_per_px": 0.0213, "mm_per_px_uncertainty": 0.0001, "rotation_deg": 0.4,
       "homography": [1, 0, 0, 0, 1, 0, 0, 0, 1],
       "distortion": {"model": "radial", "k1": 1e-3, "k2": 0, "centre_px": [320, 240], "norm_px": 400}}
json.dump(cal, open(os.path.join(d, "fuzz_calfile", "full.json"), "w"))
json.dump({"mm_per_px": 0.05, "mm_per_px_uncertainty": 0.0, "rotation_deg": 0}, open(os.path.join(d, "fuzz_calfile", "min.json"), "w"))
PY
  for f in "$here"/calib/liquids/*.json; do [ -f "$f" ] && cp "$f" "$seeds/fuzz_liquid/"; done
  printf '{"name":"oil","model":"fixed","temp_c":20,"rho_kg_m3":870,"mu_pa_s":0.05,"sigma_n_m":0.03}' \
    > "$seeds/fuzz_liquid/fixed.json"
  printf '{"name":"w","model":"water","temp_c":25}' > "$seeds/fuzz_liquid/water.json"
  ff() { ffmpeg -nostdin -loglevel error -y "$@"; }
  src="testsrc2=size=32x24:rate=10:duration=0.4"
  ff -f lavfi -i "$src" -pix_fmt gray -c:v rawvideo -f nut "$seeds/fuzz_video/raw_gray.nut"
  ff -f lavfi -i "$src" -pix_fmt gray16le -c:v rawvideo -f nut "$seeds/fuzz_video/raw_gray16.nut"
  ff -f lavfi -i "$src" -pix_fmt yuv420p -c:v ffv1 -f matroska "$seeds/fuzz_video/ffv1.mkv"
  ff -f lavfi -i "$src" -pix_fmt yuv420p -c:v libx264 -preset ultrafast -f mp4 "$seeds/fuzz_video/h264.mp4" || true
  ff -f lavfi -i "$src" -c:v mjpeg -f avi "$seeds/fuzz_video/mjpeg.avi"
  ff -f lavfi -i "$src" -pix_fmt rgb24 -c:v png -f matroska "$seeds/fuzz_video/png.mkv"
  ff -f lavfi -i "$src" -pix_fmt gray -c:v rawvideo -f avi "$seeds/fuzz_video/raw.avi"
  a="sine=frequency=1000:sample_rate=8000:duration=0.05"
  ff -f lavfi -i "$a" -c:a pcm_s16le -f wav "$seeds/fuzz_audio/s16.wav"
  ff -f lavfi -i "$a" -c:a pcm_u8 -f wav "$seeds/fuzz_audio/u8.wav"
  ff -f lavfi -i "$a" -c:a pcm_s24le -ac 2 -f wav "$seeds/fuzz_audio/s24_stereo.wav"
  ff -f lavfi -i "$a" -c:a pcm_f32le -f wav "$seeds/fuzz_audio/f32.wav"
  ff -f lavfi -i "$a" -c:a flac -f flac "$seeds/fuzz_audio/a.flac"
  ff -f lavfi -i "$a" -c:a pcm_s16le -f matroska "$seeds/fuzz_audio/pcm.mka"
  touch "$seeds/.done"
fi
# fuzz_checkpoint makes its own interrupted run; its seeds are that run's pristine resume files (each
# with the four selector bytes), written by the target itself on a first, empty input.
for t in "${targets[@]}"; do
  if [ "$t" = fuzz_checkpoint ] && [ ! -f "$seeds/fuzz_checkpoint/.done" ]; then
    mkdir -p "$seeds/fuzz_checkpoint"
    : > "$build/empty-input"
    SPUME_FUZZ_DUMP_SEEDS="$seeds/fuzz_checkpoint" ASAN_OPTIONS=detect_leaks=1 \
      "$build/fuzz_checkpoint" "$build/empty-input" > "$build/fuzz_checkpoint.seeds.log" 2>&1
    touch "$seeds/fuzz_checkpoint/.done"
  fi
done

# fuzz_detect: frames of a few bubble-like rings (dark rim, bright spot) over light, 8- and 16-bit,
# behind the target's four header bytes (width-1, height-1, option bits, background mode).
for t in "${targets[@]}"; do
  if [ "$t" = fuzz_detect ] && [ ! -f "$seeds/fuzz_detect/.done" ]; then
    mkdir -p "$seeds/fuzz_detect"
    "$py" - "$seeds/fuzz_detect" <<'PY'
import os, sys
import numpy as np
d = sys.argv[1]
yy, xx = np.mgrid[0:40, 0:56]
img = np.full((40, 56), 200.0)
for cx, cy, r in ((14, 12, 8), (36, 24, 11), (50, 5, 6), (28, 20, 6)):
    rr = np.hypot(xx - cx, yy - cy)
    img = np.where(rr < r, np.where(rr < 0.4 * r, 190.0, 40.0), img)
for flags, mode in ((0, 0), (2, 1), (4, 2), (8, 3), (16, 1), (1, 0), (1 | 32, 1)):
    if flags & 1:
        px = (img * 15).astype("<u2").tobytes()
    else:
        px = img.astype(np.uint8).tobytes()
    open(os.path.join(d, f"rings-{flags}-{mode}"), "wb").write(bytes([55, 39, flags, mode]) + px)
PY
    touch "$seeds/fuzz_detect/.done"
  fi
done

# ---- run
status=0
mkdir -p "$build/crashes"
par=()
[ "$jobs" -gt 1 ] && par=(-jobs="$jobs" -workers="$jobs")
for t in "${targets[@]}"; do
  corpus="$build/corpus/$t"
  crashes="$build/crashes/$t"
  mkdir -p "$corpus" "$crashes"
  dirs=("$corpus" "$seeds/$t")
  [ -d "$here/fixtures/fuzz/$t" ] && dirs+=("$here/fixtures/fuzz/$t")
  [ -d "$here/fixtures/fuzz-regress/$t" ] && dirs+=("$here/fixtures/fuzz-regress/$t")
  echo "fuzz: $t for ${secs}s"
  # Leak detection stays on; -rss_limit_mb bounds what a hostile header can make us allocate.
  if ! ASAN_OPTIONS=detect_leaks=1:allocator_may_return_null=1 \
       "$build/$t" -max_total_time="$secs" -timeout=20 -rss_limit_mb=2560 -max_len=65536 "${par[@]}" \
       -artifact_prefix="$crashes/" -print_final_stats=1 "${dirs[@]}" \
       > "$build/$t.log" 2>&1; then
    echo "fuzz: $t FAILED; see $build/$t.log and $crashes/" >&2
    grep -E "ERROR|SUMMARY|Test unit written" "$build/$t.log" | head -5 >&2 || true
    status=1
  else
    grep -E "stat::number_of_executed_units|stat::peak_rss_mb" "$build/$t.log" | tr '\n' ' ' || true
    echo
  fi
done
exit $status
