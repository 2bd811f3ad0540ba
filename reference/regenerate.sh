#!/usr/bin/env bash
# Rerun every outside-reference script into a scratch folder and compare its output with the
# committed copy that the Rust tests read. Needs python-control, scipy and numpy (pip).
#   reference/regenerate.sh          regenerate and compare
set -euo pipefail
cd "$(dirname "$0")/.."
tmp=$(mktemp -d)
trap 'rm -rf "$tmp"' EXIT
status=0
cmp_json() { python3 reference/compare_json.py "$1" "$2" || status=1; }

echo "-- identify: least squares (numpy/scipy)"
date=$(python3 -c 'import json;print(json.load(open("reference/identify/expected.json"))["provenance"]["date"])')
python3 reference/identify/lsq_reference.py --out "$tmp/identify" --date "$date" >/dev/null
cmp_json reference/identify/expected.json "$tmp/identify/expected.json"
for f in reference/identify/*.csv; do
    cmp -s "$f" "$tmp/identify/$(basename "$f")" || { echo "$f differs from the regenerated copy"; status=1; }
done

echo "-- design: responses and margins (python-control)"
python3 reference/design/make_reference.py --out "$tmp/design"
cmp_json reference/design/expected.json "$tmp/design/expected.json"

echo "-- sim: linear closed loop (python-control)"
mkdir -p "$tmp/sim"
cp reference/sim/*.py "$tmp/sim/"
for script in "$tmp"/sim/*.py; do python3 "$script" >/dev/null; done
for f in reference/sim/*.json; do cmp_json "$f" "$tmp/sim/$(basename "$f")"; done

exit $status
