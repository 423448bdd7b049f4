#!/usr/bin/env bash
# Installs what spume needs on a Debian machine (as root) and builds it.
# Idempotent: packages already present are skipped, the build is incremental.
set -euo pipefail
here=$(cd "$(dirname "$0")/.." && pwd)
pkgs=(build-essential cmake pkg-config
      libavformat-dev libavcodec-dev libavutil-dev libswscale-dev
      libpng-dev libjpeg62-turbo-dev libjansson-dev libswresample-dev
      ffmpeg chromium python3 python3-numpy python3-scipy python3-skimage python3-pil python3-opencv)
missing=()
for p in "${pkgs[@]}"; do
  dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q "install ok installed" || missing+=("$p")
done
if [ ${#missing[@]} -gt 0 ]; then
  echo "setup: installing ${missing[*]}" >&2
  SUDO=""; [ "$(id -u)" -eq 0 ] || SUDO=sudo
  $SUDO apt-get update -qq
  DEBIAN_FRONTEND=noninteractive $SUDO apt-get install -y -qq --no-install-recommends "${missing[@]}" >/dev/null
fi
cmake -S "$here" -B "$here/build" -DCMAKE_BUILD_TYPE="${BUILD_TYPE:-Release}" >/dev/null
cmake --build "$here/build" -j"$(nproc)"
