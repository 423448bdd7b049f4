#!/usr/bin/env bash
# Sanitizer pass: build everything with AddressSanitizer + UndefinedBehaviorSanitizer (Debug) in
# build-asan and run the whole ctest suite there. Any sanitizer report fails the test that hit it
# (UBSan is built with -fno-sanitize-recover, ASan aborts on the first error).
# Usage: scripts/sanitize.sh [extra ctest arguments, e.g. -R ref.]
set -euo pipefail
here=$(cd "$(dirname "$0")/.." && pwd)
build=${SPUME_ASAN_BUILD:-$here/build-asan}
jobs=$(nproc)

# -O1 on top of Debug: the sanitizers' own advice, and it keeps the heavier tests inside their
# ctest time limits (plain -O0 + ASan is 3-5x slower) without hiding anything from ASan or UBSan.
cmake -S "$here" -B "$build" -DSPUME_SANITIZE=ON -DCMAKE_BUILD_TYPE=Debug -DCMAKE_C_FLAGS_DEBUG="-g -O1" >/dev/null
cmake --build "$build" -j"$jobs"

# detect_leaks: every open has a close, so a leak is a bug. The Python tests load uninstrumented
# libraries into an uninstrumented interpreter and only drive our instrumented probes as child
# processes, so nothing needs LD_PRELOAD. halt_on_error keeps the first report readable.
export ASAN_OPTIONS=${ASAN_OPTIONS:-detect_leaks=1:halt_on_error=1:abort_on_error=0:strict_string_checks=1:detect_stack_use_after_return=1:check_initialization_order=1}
export UBSAN_OPTIONS=${UBSAN_OPTIONS:-print_stacktrace=1:halt_on_error=1}
# OpenMP's runtime keeps thread stacks alive until exit; that is not ours to free.
supp="$here/scripts/lsan.supp"
if [ -f "$supp" ]; then export LSAN_OPTIONS=${LSAN_OPTIONS:-suppressions=$supp}; fi

cd "$build"
ctest --output-on-failure -j"$jobs" --timeout 1500 "$@"
