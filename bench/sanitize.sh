#!/usr/bin/env bash
# Builds heft and its tests with -fsanitize=address,undefined (GCC) into
# build-sanitize and runs the whole suite there through ctest. Slower than
# tests/run.sh; run it before a release or after touching a reader.
set -euo pipefail
root=$(cd "$(dirname "$0")/.." && pwd)
bash "$root/.ci/ensure-packages.sh"
build="${HEFT_SANITIZE_BUILD_DIR:-$root/build-sanitize}"
cmake -S "$root" -B "$build" -DCMAKE_BUILD_TYPE=RelWithDebInfo -DHEFT_SANITIZE=ON -DHEFT_BUILD_BENCH=OFF >/dev/null
cmake --build "$build" -j "$(nproc)"
cd "$build"
ASAN_OPTIONS=detect_leaks=1:abort_on_error=1 UBSAN_OPTIONS=halt_on_error=1:print_stacktrace=1 \
  ctest --output-on-failure -j "$(nproc)"
