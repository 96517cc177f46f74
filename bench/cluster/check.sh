#!/usr/bin/env bash
# Tries both cluster recipes of docs/scaling.md on this machine and checks
# that each gives the single run's table byte for byte:
#   1. GNU parallel (Debian package `parallel`), 4 shards on the local cores;
#   2. a Slurm array job on the single-node cluster of start_slurm.sh.
# Usage: bench/cluster/check.sh [stars=20000]   (not part of the test suite)
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
bash "$here/../../.ci/ensure-packages.sh" "$here/../../.ci/bench-packages.txt"
heft=${HEFT:-$here/../../build/heft}
n=${1:-20000}
work=$(mktemp -d /tmp/heft-cluster.XXXXXX)
opts="--date 2027.5 --iwa 80 --owa 2000 --target-mass 5,80"
"$heft" simulate -q --stars "$n" --seed 5150 --companion-fraction 0.05 -o "$work/stars.csv"
t0=$(date +%s.%N)
"$heft" rank "$work/stars.csv" $opts -q -o "$work/single.csv"
t1=$(date +%s.%N)
echo "single run: $(echo "$t1 - $t0" | bc) s"

# 1. GNU parallel: one job per shard, two at a time.
parallel -j 2 "$heft" rank "$work/stars.csv" $opts -q -j 1 --shard {}/4 -o "$work/par-{}.csv" ::: 1 2 3 4
"$heft" merge -q "$work"/par-{1,2,3,4}.csv -o "$work/parallel.csv"
cmp "$work/single.csv" "$work/parallel.csv" && echo "GNU parallel, 4 shards: identical to the single run"
t2=$(date +%s.%N)
echo "GNU parallel: $(echo "$t2 - $t1" | bc) s"

# 2. Slurm array job, then the merge.
sinfo >/dev/null 2>&1 || bash "$here/start_slurm.sh"
cd "$work"
# Options hold commas, which --export=VAR=... would split: export instead.
export STARS="$work/stars.csv" PARTS="$work/slurm" HEFT="$heft" RANK_OPTS="$opts"
sbatch --wait --array=1-4 --cpus-per-task=1 --export=ALL "$here/rank_array.sbatch" >/dev/null
"$heft" merge -q "$work"/slurm/part-{1,2,3,4}.csv -o "$work/slurm.csv"
cmp "$work/single.csv" "$work/slurm.csv" && echo "Slurm array job, 4 tasks: identical to the single run"
t3=$(date +%s.%N)
echo "Slurm: $(echo "$t3 - $t2" | bc) s"
rm -rf "$work"
