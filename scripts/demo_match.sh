#!/usr/bin/env bash
# Demo fragment for `radmode match`: the invented double-mode star models/demo_star_obs.txt
# against the small bundled grid models/grid/ (generated models; models/grid/list.txt).
#   scripts/demo_match.sh [RADMODE_BINARY] [OUTPUT_DIR]
# Defaults: build/radmode, build/demo. Writes OUTPUT_DIR/match.json, match_fit.json and, when
# Debian's python3 has matplotlib, OUTPUT_DIR/ratios.png. Exit status as radmode's.
set -euo pipefail
root="$(cd "$(dirname "${BASH_SOURCE[0]}")/.." && pwd)"
radmode="$(realpath "${1:-$root/build/radmode}")"
mkdir -p "${2:-$root/build/demo}"
out="$(realpath "${2:-$root/build/demo}")"
cd "$root" # model paths in the reports relative to the repository
star="models/demo_star_obs.txt"
grid="models/grid/list.txt"

echo "== radmode match: an invented double-mode star against a grid of generated models =="
echo "\$ radmode match --list models/grid/list.txt --observed models/demo_star_obs.txt --top 5"
"$radmode" match --list "$grid" --observed "$star" --top 5
"$radmode" match --list "$grid" --observed "$star" --json -o "$out/match.json"

echo
echo "== the same with each model's radius fitted (homology at fixed mass) =="
echo "\$ radmode match --list models/grid/list.txt --observed models/demo_star_obs.txt --fit-radius --top 3"
"$radmode" match --list "$grid" --observed "$star" --fit-radius --top 3
"$radmode" match --list "$grid" --observed "$star" --fit-radius --json -o "$out/match_fit.json"

if /usr/bin/python3 -c 'import matplotlib' 2> /dev/null; then
  /usr/bin/python3 scripts/plot_ratios.py "$out/match.json" -o "$out/ratios.png"
else
  echo "(no /usr/bin/python3 with matplotlib: plot skipped)"
fi
