#!/usr/bin/env bash
# Installs, builds, and runs the waymark CLI on the invented parts catalogue in
# clients/demo/parts.tsv: exact distances from one query outline to every stored part, closest
# first, and the sketch of the query against a 64-landmark grid. (With the server, this becomes
# a collection loaded into waymarkd; see the open issues.)
set -euo pipefail
cd "$(dirname "$0")/.."
bash scripts/install-dependencies.sh
cmake -S . -B build -G Ninja -DCMAKE_BUILD_TYPE=Release >/dev/null
cmake --build build --target waymark
waymark=build/clients/cli/waymark
query=${1:-"POLYGON ((0 0, 41 0, 41 6.5, 6 6.5, 6 30, 0 30, 0 0))"}

echo "Query outline: $query"
echo "Exact Hausdorff distance (mm, centered frame) to every part, closest first:"
while IFS=$'\t' read -r id material shape; do
  [[ "$id" == \#* || -z "$id" ]] && continue
  distance=$("$waymark" distance --frame centered "$query" "$shape")
  printf '%s\t%-12s\t%s\n' "$distance" "$material" "$id"
done <clients/demo/parts.tsv | sort -g | awk -F'\t' '{ printf "  %-11s %-13s %8.3f\n", $3, $2, $1 }'
echo
echo "Witness of the distance to BRK-1040-B (where the two outlines differ most):"
"$waymark" distance --json --frame centered "$query" "$(grep '^BRK-1040-B' clients/demo/parts.tsv | cut -f3)"
"$waymark" landmarks --layout grid --count 64 --output build/demo-landmarks.txt
echo "Sketch of the query in the unit frame (64 weighted landmark distances):"
"$waymark" sketch --frame unit --landmarks build/demo-landmarks.txt "$query"
