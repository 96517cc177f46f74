#!/usr/bin/env bash
# Builds heft and runs the whole test suite through ctest; first the fuzz
# targets of tests/fuzz over their seed corpora (clang, sanitized build in
# build-fuzz, regression mode: seconds), then the suite.
set -euo pipefail
root=$(cd "$(dirname "$0")/.." && pwd)
bash "$root/.ci/ensure-packages.sh"
build="${HEFT_BUILD_DIR:-$root/build}"
fuzz="${HEFT_FUZZ_BUILD_DIR:-$root/build-fuzz}"
echo "== fuzz targets over their seed corpora (sanitized clang build in $fuzz)"
cmake -S "$root" -B "$fuzz" -DCMAKE_BUILD_TYPE=RelWithDebInfo -DCMAKE_CXX_COMPILER=clang++ -DHEFT_FUZZ=ON >/dev/null
cmake --build "$fuzz" -j "$(nproc)" --target fuzz_targets >/dev/null
if ! ctest --test-dir "$fuzz" --output-on-failure -j "$(nproc)" >"$fuzz/corpus-check.log" 2>&1; then
  cat "$fuzz/corpus-check.log"
  exit 1
fi
echo "fuzz corpora clean: $(grep -c 'Passed' "$fuzz/corpus-check.log") targets (log: $fuzz/corpus-check.log)"
echo "== test suite"
cmake -S "$root" -B "$build" -DCMAKE_BUILD_TYPE=Release >/dev/null
cmake --build "$build" -j "$(nproc)"
cd "$build"
ctest --output-on-failure -j "$(nproc)"
