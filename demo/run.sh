#!/usr/bin/env bash
# The main job on the bundled demo survey (the invented Keth Moving Group and
# the invented Halcyon imaging campaign): configure and build (Release),
# screen every star, rank the imaging candidates at the planned date
# (curves, sky positions, Halcyon contrast), plot the three best, run the
# deep fit of the one star with follow-up imaging, and end with the ten
# best candidates and where to look, with the plan report (demo/out/plan.html).
set -euo pipefail
root=$(cd "$(dirname "$0")/.." && pwd)
bash "$root/.ci/ensure-packages.sh"
build="${HEFT_BUILD_DIR:-$root/build}"
cmake -S "$root" -B "$build" -DCMAKE_BUILD_TYPE=Release >/dev/null
cmake --build "$build" -j "$(nproc)" --target heft
heft="$build/heft"
demo="$root/demo"
stars="$demo/survey/stars.csv"
out="$demo/out"
date=2027.25
wa="--iwa 80 --owa 2000"
mkdir -p "$out"

echo "== 1. screening $(($(grep -vc '^#' "$stars") - 1)) stars of the Keth Moving Group"
"$heft" screen -q "$stars" -o "$out/anomalies.csv" --json "$out/anomalies.json"
awk -F, 'NR > 1 && $2 == "ok" && $22 >= 3 { n++ } END { printf "%d stars with sig_joint >= 3\n", n }' "$out/anomalies.csv"

echo
echo "== 2. ranking imaging candidates for $date (Halcyon coronagraph, working angles 80-2000 mas)"
"$heft" rank "$stars" --date "$date" $wa --target-mass 5,80 \
  --contrast "$demo/halcyon_contrast.csv" --mass-mag "$demo/keth_mass_mag.csv" --dates 2026.5:2031.5:0.25 \
  -o "$out/ranked.csv" --json "$out/ranked.json"

echo
echo "== 3. curves and sky maps of the three best candidates"
for id in $(awk -F, 'NR > 2 && NR <= 5 { print $1 }' "$out/ranked.csv"); do
  "$heft" curve -q "$stars" --id "$id" --draws 1024 --n-a 32 -o "$out/curve_$id.csv" --keep-draws "$out/draws_$id.csv"
  "$heft" plot curve "$out/curve_$id.csv" $wa --truth "$demo/survey/truth.csv" -o "$out/curve_$id.svg"
  "$heft" predict -q "$out/draws_$id.csv" --date "$date" $wa -o "$out/where_$id.csv" --grid "$out/grid_$id.csv"
  "$heft" plot sky "$out/grid_$id.csv" $wa -o "$out/sky_$id.svg"
  echo "$id: $out/curve_$id.svg, $out/sky_$id.svg"
done

echo
echo "== 4. deep fit of KMG-00754 (catalogues + its companion's discovery image and three Halcyon epochs)"
"$heft" fit "$demo/followup/KMG-00754.json" -o "$out/fit_KMG-00754.json" --samples "$out/fit_KMG-00754_samples.csv" 2>&1 |
  sed 's/^heft fit: /  /'
awk -F, 'NR == 1 { for (k = 1; k <= NF; k++) c[$k] = k } $1 == "KMG-00754" {
           printf "  injected (the simulator'"'"'s truth): mass %.3g MJup, a %.3g AU, period %.3g yr, e %.3g, i %.3g deg\n",
                  $c["mass_mjup"], $c["a_au"], $c["period_yr"], $c["ecc"], $c["inc_deg"] }' "$demo/survey/truth.csv"
"$heft" predict -q "$out/fit_KMG-00754_samples.csv" --date "$date" $wa -o "$out/fit_KMG-00754_where.csv" \
  --grid "$out/fit_KMG-00754_grid.csv"
"$heft" plot sky "$out/fit_KMG-00754_grid.csv" $wa -o "$out/fit_KMG-00754_sky.svg"
awk -F, 'NR == 2 { printf "at %s: separation %.1f mas (68 %%: %.1f-%.1f), position angle %.1f deg (68 %% arc from %.1f, %.1f wide)\n",
                   $2, $7, $6, $8, $12, $13, $14 }' "$out/fit_KMG-00754_where.csv"

echo
echo "== 5. the plan report (candidates, where to look, each one's curve and sky map)"
"$heft" report -q "$out/ranked.json" --truth "$demo/survey/truth.csv" -o "$out/plan.html"

echo
echo "== the ten best imaging candidates at $date"
# ranked.csv: line 1 run metadata, line 2 header; columns by name.
awk -F, 'NR == 2 { for (k = 1; k <= NF; k++) c[$k] = k
                   printf "%4s %-10s %6s %6s %6s %8s %19s %21s %8s %15s\n", "rank", "id", "p_real", "score", "p_det",
                   "best", "mass MJup (68 %)", "sep mas (68 %)", "PA mode", "PA 68 % arc" }
         NR > 2 && NR <= 12 { printf "%4d %-10s %6.3f %6.3f %6.3f %8.2f %6.1f (%5.1f-%5.1f) %6.0f (%5.0f-%6.0f) %8s %6.0f+%-6.0f\n",
                   $c["rank"], $c["id"], $c["p_real"], $c["score"], $c["p_detect"], $c["best_date_yr"],
                   $c["mass_med"], $c["mass_lo68"], $c["mass_hi68"], $c["sep_med"], $c["sep_lo68"], $c["sep_hi68"],
                   $c["pa_mode_deg"] == "" ? "any" : sprintf("%.0f", $c["pa_mode_deg"]),
                   $c["pa_arc68_start_deg"], $c["pa_arc68_width_deg"] }' "$out/ranked.csv"
echo "(p_real: probability that the anomaly is a companion, at the assumed occurrence of 0.1 (--occurrence);"
echo " score and p_det include it; best: the date in 2026.5-2031.5 of the highest p_det)"
echo "plan report: $out/plan.html"
echo "outputs in $out"
