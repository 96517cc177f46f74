#!/usr/bin/env bash
# screen_compare: `heft screen -j 1` against the plain pandas/numpy script
# bench/screen_numpy.py on the same simulated star table, one core each
# (BLAS and OpenMP held to one thread). Prints CPU seconds (user + system,
# best of three runs), stars per CPU second and the ratio, and heft's wall
# time on every core (best of three); checks that the
# two chi-squared columns agree (they differ by heft's perspective and RV
# terms).
#
# Needs Debian's python3-pandas (not a test dependency: apt-get install
# python3-pandas). Usage: bench/screen_compare.sh [STARS=300000] [BUILD=build]
set -euo pipefail
root=$(cd "$(dirname "$0")/.." && pwd)
n=${1:-300000}
heft="${2:-$root/build}/heft"
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
cores=$(nproc)  # before OMP_NUM_THREADS, which nproc honours
export OMP_NUM_THREADS=1 OPENBLAS_NUM_THREADS=1 MKL_NUM_THREADS=1
"$heft" simulate -q --stars "$n" --seed 5 -o "$work/stars.csv"
echo "table: $n stars, $(($(stat -c %s "$work/stars.csv") / 1000000)) MB"
# CPU seconds (user + system) of a command, best of three.
cpu() {
  local best=
  for _ in 1 2 3; do
    local t
    /usr/bin/time -o "$work/time" -f '%U %S' "$@" >/dev/null 2>&1
    t=$(awk '{ print $1 + $2 }' "$work/time")
    best=$(awk -v a="$t" -v b="${best:-1e99}" 'BEGIN { print (a < b) ? a : b }')
  done
  echo "$best"
}
t_heft=$(cpu "$heft" screen -q -j 1 "$work/stars.csv" -o "$work/heft.csv")
t_np=$(cpu /usr/bin/python3 "$root/bench/screen_numpy.py" "$work/stars.csv" "$work/numpy.csv")
# Wall seconds of heft on every core (rows read beside the parallel work), best of three.
wall_all=1e99
for _ in 1 2 3; do
  /usr/bin/time -o "$work/time" -f '%e' env OMP_NUM_THREADS="$cores" "$heft" screen -q "$work/stars.csv" \
    -o "$work/heft_all.csv" >/dev/null 2>&1
  wall_all=$(awk -v a="$(cat "$work/time")" -v b="$wall_all" 'BEGIN { print (a < b) ? a : b }')
done
cmp -s "$work/heft.csv" "$work/heft_all.csv" || echo "heft: output differs between -j 1 and all cores" >&2
awk -v n="$n" -v h="$t_heft" -v p="$t_np" -v w="$wall_all" -v c="$cores" 'BEGIN {
  printf "heft screen -j 1: %.2f CPU s, %.0f stars/s\n", h, n / h
  printf "pandas/numpy:     %.2f CPU s, %.0f stars/s\n", p, n / p
  printf "ratio: %.1fx\n", p / h
  printf "heft screen on %d cores: %.2f s wall, %.0f stars/s, %.1fx the script'"'"'s one-core CPU time\n", c, w, n / w, p / w }'
# How close the two chi2_joint are (the baseline has no perspective or RV term).
/usr/bin/python3 - "$work/heft.csv" "$work/numpy.csv" <<'PY'
import sys
import numpy as np
import pandas as pd
h = pd.read_csv(sys.argv[1], comment="#", usecols=["id", "chi2_joint"])
p = pd.read_csv(sys.argv[2], usecols=["id", "chi2_joint"])
m = h.merge(p, on="id", suffixes=("_heft", "_numpy"))
rel = np.abs(m.chi2_joint_heft - m.chi2_joint_numpy) / np.maximum(m.chi2_joint_heft, 1.0)
print(f"chi2_joint: {len(m)} stars compared; within 1 % for {np.mean(rel < 0.01) * 100:.1f} %, "
      f"within 10 % for {np.mean(rel < 0.1) * 100:.1f} %")
PY
