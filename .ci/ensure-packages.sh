#!/usr/bin/env bash
# Installs the Debian packages listed in .ci/debian-packages.txt (or in the
# list file given as $1) that are missing. As root it runs apt-get quietly:
# one line naming the packages, the package manager's full output kept in a
# log file that an error points to. Otherwise it prints the one apt line and
# fails. Run by demo/run.sh and tests/run.sh (the main list) and by
# bench/cluster/check.sh (.ci/bench-packages.txt).
set -euo pipefail
here=$(cd "$(dirname "${BASH_SOURCE[0]}")" && pwd)
list=${1:-$here/debian-packages.txt}
mapfile -t wanted < <(grep -v -e '^#' -e '^[[:space:]]*$' "$list")
missing=()
for p in "${wanted[@]}"; do
  dpkg-query -W -f='${Status}' "$p" 2>/dev/null | grep -q 'install ok installed' || missing+=("$p")
done
[ ${#missing[@]} -eq 0 ] && exit 0
if [ "$(id -u)" -eq 0 ]; then
  log=${HEFT_APT_LOG:-${TMPDIR:-/tmp}/heft-apt.log}
  echo "heft: installing Debian packages: ${missing[*]} (log: $log)" >&2
  export DEBIAN_FRONTEND=noninteractive
  if ! { apt-get update -q && apt-get install -y -q --no-install-recommends "${missing[@]}"; } >"$log" 2>&1; then
    echo "heft: installing the packages failed; the package manager's output is in $log; last lines:" >&2
    tail -n 5 "$log" >&2
    exit 1
  fi
else
  echo "heft: missing Debian packages; run:" >&2
  echo "  sudo apt-get install -y ${missing[*]}" >&2
  exit 1
fi
