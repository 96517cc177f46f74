#!/usr/bin/env bash
# Regenerates the bundled demo survey: the invented Keth Moving Group, a young
# association ~120 pc away, screened by the (invented) Halcyon imaging survey.
# 2,000 stars, about 2 % with an injected companion. The follow-up star file
# holds the relative astrometry of KMG-00754's companion: its discovery image
# (2017.4, an invented earlier campaign) and three epochs of Halcyon imaging.
# With the three Halcyon epochs alone (1.5 yr of a 74-yr orbit) the line of
# sight stays open and the posterior is ruled by the prior there
# (docs/performance.md, "The demo star"). Fixed seed: the files are
# byte-identical on every machine.
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
heft=${HEFT:-$here/../build/heft}
"$heft" simulate -q --stars 2000 --seed 20261201 --id-prefix KMG- \
  --sky 210.0,-38.0 --sky-radius 8 --distance uniform:100,140 \
  --velocity -10,-18,5 --velocity-sigma 1.5 --host-mass loguniform:0.3,2.0 \
  --rv-fraction 0.4 --age 25 \
  --companion-fraction 0.02 --companion-mass loguniform:1,80 --a loguniform:2,200 \
  --ecc uniform:0,0.6 \
  -o "$here/survey/stars.csv" --truth "$here/survey/truth.csv" \
  --star-file "$here/followup/KMG-00754.json" --star-file-id KMG-00754 \
  --imaging-epochs 2017.4,2025.42,2026.13,2026.88 --sep-error 1.5 --pa-error 0.4

# The raw extracts a planner starts from (for demo/Makefile's ingest step):
# the same stars as two catalogue files with their own column names, joined
# back by heft ingest through demo/raw/map.json.
awk -F, -v OFS=, '{ out = ($1 == "id" ? "hid" : $1); for (k = 2; k <= 24; ++k) { h = $k; if (NR == 1) sub(/^early_/, "", h); out = out OFS h } print out }' \
  "$here/survey/stars.csv" > "$here/raw/early.csv"
awk -F, -v OFS=, '{ out = ($1 == "id" ? "src" : $1); for (k = 25; k <= 53; ++k) { h = $k; if (NR == 1) sub(/^late_/, "", h); out = out OFS h } print out }' \
  "$here/survey/stars.csv" > "$here/raw/late.csv"

# The same extracts as FITS binary tables with units (TUNIT), made by heft
# itself, for the archive path of demo/Makefile.
units="--unit epoch=yr --unit ra=deg --unit dec=deg --unit parallax=mas --unit pmra=mas/yr --unit pmdec=mas/yr
  --unit ra_error=mas --unit dec_error=mas --unit parallax_error=mas --unit pmra_error=mas/yr
  --unit pmdec_error=mas/yr --unit window_start=yr --unit window_end=yr"
# shellcheck disable=SC2086
"$heft" convert "$here/raw/early.csv" -o "$here/raw/early.fits" $units
# shellcheck disable=SC2086
"$heft" convert "$here/raw/late.csv" -o "$here/raw/late.fits" $units --unit mass=Msun --unit mass_error=Msun \
  --unit rv=km/s --unit rv_error=km/s --unit mag=mag --unit age_myr=Myr
