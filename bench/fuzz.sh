#!/usr/bin/env bash
# Runs every libFuzzer target of tests/fuzz for a chosen time and prints the
# executions and findings of each (docs/robustness.md records the figures).
#   bench/fuzz.sh [SECONDS_PER_TARGET] [PARALLEL_TARGETS]   (default 120, 2)
# Builds with clang into build-fuzz (-DHEFT_FUZZ=ON). New corpus entries go to
# build-fuzz/corpus-work/<target>; a crash leaves its reproducer in
# build-fuzz/findings/<target>: add it to tests/fuzz/corpus/<target> with the fix.
set -euo pipefail
root=$(cd "$(dirname "$0")/.." && pwd)
seconds=${1:-120}
parallel=${2:-2}
bash "$root/.ci/ensure-packages.sh"
build="${HEFT_FUZZ_BUILD_DIR:-$root/build-fuzz}"
cmake -S "$root" -B "$build" -DCMAKE_BUILD_TYPE=RelWithDebInfo -DCMAKE_CXX_COMPILER=clang++ -DHEFT_FUZZ=ON >/dev/null
cmake --build "$build" -j "$(nproc)" --target fuzz_targets >/dev/null
targets=$(cd "$root/tests/fuzz" && ls *_fuzz.cpp | sed 's/_fuzz.cpp//')
run_one() {
  local t=$1
  mkdir -p "$build/corpus-work/$t" "$build/findings/$t"
  ASAN_OPTIONS=detect_leaks=1:allocator_may_return_null=1 UBSAN_OPTIONS=halt_on_error=1:print_stacktrace=1 \
    "$build/tests/fuzz/${t}_fuzz" -max_total_time="$seconds" -print_final_stats=1 -max_len=65536 \
    -artifact_prefix="$build/findings/$t/" "$build/corpus-work/$t" "$root/tests/fuzz/corpus/$t" \
    >"$build/findings/$t.log" 2>&1 || true
  local runs findings
  runs=$(awk '/stat::number_of_executed_units/ { print $NF }' "$build/findings/$t.log")
  findings=$(find "$build/findings/$t" -type f | wc -l)
  printf '%-12s %12s executions  %d finding(s)\n' "$t" "${runs:-?}" "$findings"
}
export -f run_one
export build root seconds
printf '%s\n' $targets | xargs -P "$parallel" -I{} bash -c 'run_one {}'
