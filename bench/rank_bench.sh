#!/usr/bin/env bash
# rank_bench: the whole heft rank job on simulated surveys of 10^4, 10^5 and
# 10^6 stars (2 % with companions), both cores, curves for the 1,000 most
# significant stars at rank's default grid; prints heft's per-stage times and
# the peak RSS. Usage: bench/rank_bench.sh [sizes="10000 100000 1000000"]
# [draws per separation and round, default rank's own]
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
heft=${HEFT:-$here/../build/heft}
work=$(mktemp -d /tmp/heft-rank-bench.XXXXXX)
draws=()
[ -n "${2:-}" ] && draws=(--draws "$2")
for n in ${1:-10000 100000 1000000}; do
  "$heft" simulate -q --stars "$n" --seed 31337 --companion-fraction 0.02 -o "$work/stars.csv"
  start=$(date +%s.%N)
  "$heft" rank "$work/stars.csv" --date 2027.5 --iwa 80 --owa 2000 --target-mass 5,80 --max-curves 1000 \
    "${draws[@]}" -o "$work/ranked.csv" 2> "$work/err.txt" &
  pid=$!
  peak=0
  while kill -0 "$pid" 2>/dev/null; do
    rss=$(awk '/VmHWM/ { print $2 }' "/proc/$pid/status" 2>/dev/null || echo 0)
    [ "${rss:-0}" -gt "$peak" ] && peak=$rss
    sleep 0.2
  done
  wait "$pid" || true
  end=$(date +%s.%N)
  curves=$(awk -F, 'NR > 2 && $6 != ""' "$work/ranked.csv" | wc -l)
  printf '%8d stars: %6.1f s total, %d curves, peak RSS %d MiB\n' "$n" "$(echo "$end - $start" | bc)" "$curves" $((peak / 1024))
  grep 'time:' "$work/err.txt" | sed 's/^/          /'
done
rm -rf "$work"
