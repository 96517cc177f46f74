#!/usr/bin/env bash
# Checks the include rule of docs/architecture.md: a library module includes
# only heft headers of modules on a lower layer (and its own), and no library
# file includes a CLI header. The layers are read from the ```layers block
# of docs/architecture.md, so the page and the check cannot drift.
#   tests/tools/check_layers.sh SOURCE_DIR
set -euo pipefail
root=${1:-$(cd "$(dirname "$0")/../.." && pwd)}
doc="$root/docs/architecture.md"
declare -A layer
while read -r level modules; do
  for m in $modules; do layer[$m]=$level; done
done < <(awk '/^```layers/ { on = 1; next } /^```/ { on = 0 } on' "$doc")
[ ${#layer[@]} -gt 0 ] || { echo "no \`\`\`layers block in $doc"; exit 1; }
bad=0
for f in "$root"/include/heft/*.hpp "$root"/include/heft/*.hpp.in "$root"/src/*.cpp; do
  [ -e "$f" ] || continue
  name=$(basename "$f"); m=${name%%.*}
  [ "$m" = main ] && continue  # the CLI's entry point
  if [ -z "${layer[$m]+x}" ]; then
    echo "$f: module '$m' has no layer in docs/architecture.md"; bad=1; continue
  fi
  if [[ $f == */include/heft/* ]] && grep -n -e '#include <ceres/ceres.h>' -e '#include <glog/' "$f"; then
    echo "$f: a public header includes glog (through <ceres/ceres.h>), whose CHECK replaces Catch's in the tests"; bad=1
  fi
  if grep -n '#include "cli/' "$f"; then
    echo "$f: a library file includes a CLI header"; bad=1
  fi
  while IFS=: read -r line dep; do
    [ "$dep" = "$m" ] && continue
    if [ -z "${layer[$dep]+x}" ]; then
      echo "$f:$line: includes heft/$dep.hpp, which has no layer"; bad=1
    elif [ "${layer[$dep]}" -ge "${layer[$m]}" ]; then
      echo "$f:$line: $m (layer ${layer[$m]}) includes $dep (layer ${layer[$dep]}): only lower layers may be included"; bad=1
    fi
  done < <(grep -n -o '#include "heft/[a-z_]*' "$f" | sed 's|#include "heft/||')
done
[ $bad -eq 0 ] && echo "include rule holds: ${#layer[@]} modules on $(printf '%s\n' "${layer[@]}" | sort -u | wc -l) layers"
exit $bad
