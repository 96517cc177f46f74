#!/usr/bin/env bash
# Installs the Debian packages listed in .ci/debian-packages.txt (or in the
# list file given as $1) that are missing. As root it runs apt-get; otherwise
# it prints the one apt line and fails. Run by demo/run.sh and tests/run.sh
# (the main list) and by bench/cluster/check.sh (.ci/bench-packages.txt).
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
  echo "heft: installing ${missing[*]}" >&2
  export DEBIAN_FRONTEND=noninteractive
  apt-get update -qq
  apt-get install -y -qq --no-install-recommends "${missing[@]}" >&2
else
  echo "heft: missing Debian packages; run:" >&2
  echo "  sudo apt-get install -y ${missing[*]}" >&2
  exit 1
fi
