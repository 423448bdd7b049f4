#!/usr/bin/env bash
# Extra packages for the benchmarks only (not needed to build or test spume).
set -euo pipefail
SUDO=""; [ "$(id -u)" -eq 0 ] || SUDO=sudo
$SUDO apt-get update -qq
DEBIAN_FRONTEND=noninteractive $SUDO apt-get install -y -qq --no-install-recommends g++ libopencv-dev >/dev/null
