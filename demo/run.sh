#!/usr/bin/env bash
# The main job on the bundled demo survey: configure, build (Release), then
# screen the Keth Moving Group for proper-motion anomalies and show the most
# significant stars.
set -euo pipefail
root=$(cd "$(dirname "$0")/.." && pwd)
bash "$root/.ci/ensure-packages.sh"
build="${HEFT_BUILD_DIR:-$root/build}"
cmake -S "$root" -B "$build" -DCMAKE_BUILD_TYPE=Release >/dev/null
cmake --build "$build" -j "$(nproc)" --target heft
heft="$build/heft"
out="$root/demo/out"
mkdir -p "$out"

echo "== screening $(($(grep -vc '^#' "$root/demo/survey/stars.csv") - 1)) stars of the Keth Moving Group"
"$heft" screen "$root/demo/survey/stars.csv" -o "$out/anomalies.csv" --json "$out/anomalies.json"

echo
echo "== most significant proper-motion anomalies (sig_joint, Gaussian-equivalent sigma)"
# Columns: 1 id, 2 status, 8-9 dpm_late (mas/yr), 22 sig_joint, 23 dvt_late (m/s).
awk -F, 'NR > 1 && $2 == "ok" { printf "%-10s %8.1f %9.3f %9.3f %10.1f\n", $1, $22, $8, $9, $23 }' \
    "$out/anomalies.csv" | sort -k2,2 -g -r | awk 'NR <= 10' |
  awk 'BEGIN { printf "%-10s %8s %9s %9s %10s\n", "id", "sig", "dpm_ra", "dpm_dec", "dvt_m_s" } { print }'
echo
echo "== mass-separation constraints of the three most significant stars (dark companion assumed)"
top=$(awk -F, 'NR > 1 && $2 == "ok" { print $22, $1 }' "$out/anomalies.csv" | sort -g -r | awk 'NR <= 3 { print $2 }')
: > "$out/curves.csv"
for id in $top; do
  "$heft" curve -q "$root/demo/survey/stars.csv" --id "$id" --draws 512 --n-a 24 --a-min 1 --a-max 300 \
    -o "$out/curve_$id.csv"
  # The separation bin of highest posterior weight: a (AU), sep (mas), mass range (MJup).
  awk -F, 'NR > 1 && $5 > best { best = $5; line = $0 } END {
      split(line, f, ",");
      printf "%-10s most probable a %6.1f AU (%6.1f mas), weight %.2f: mass %6.1f MJup (68 %%: %.1f-%.1f)\n",
             f[1], f[2], f[3], f[5], f[8], f[7], f[9] }' "$out/curve_$id.csv"
done
echo
echo "outputs in $out"
