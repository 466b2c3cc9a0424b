#!/usr/bin/env bash
# The README's demo, end to end without the install and build steps: serve-demo.sh starts the
# real waymarkd, loads the invented catalogue, runs the sample query; a second run on the same
# data directory reuses the collection. Also pins the demo generator: deterministic, unique
# ids, near-duplicate revisions, every line accepted by the server.
# Usage: demo_test.sh WAYMARKD WAYMARK SOURCE_DIRECTORY
set -u
waymarkd=$1 waymark=$2 source=$3
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
passed=0 failed=0
expect() {  # description condition...
  local description=$1; shift
  if "$@"; then passed=$((passed + 1)); else failed=$((failed + 1)); echo "FAILED: $description"; fi
}

"$waymark" demo-catalogue --count 400 >"$work/a.ndjson"
"$waymark" demo-catalogue --count 400 >"$work/b.ndjson"
"$waymark" demo-catalogue --count 400 --seed 2 >"$work/c.ndjson"
expect "catalogue has the asked-for count" test "$(wc -l <"$work/a.ndjson")" -eq 400
expect "same seed, same catalogue" cmp -s "$work/a.ndjson" "$work/b.ndjson"
cmp -s "$work/a.ndjson" "$work/c.ndjson"
expect "other seed, other catalogue" test $? -ne 0
expect "ids are unique" test "$(/usr/bin/python3 -c 'import json,sys; print(len({json.loads(l)["id"] for l in sys.stdin}))' <"$work/a.ndjson")" -eq 400
expect "some parts have later revisions" grep -q '"revision":"B"' "$work/a.ndjson"
"$waymark" demo-catalogue --count x >/dev/null 2>"$work/err"
expect "bad count is exit 2" test $? -eq 2
expect "bad count is named" grep -q "count" "$work/err"

run_demo() {
  WAYMARK_DATA_DIRECTORY="$work/data" WAYMARK_PORT=0 WAYMARK_DEMO_EXIT=1 WAYMARK_DEMO_PARTS=400 \
    timeout 120 bash "$source/scripts/serve-demo.sh" "$waymarkd" "$waymark" >"$work/out" 2>&1
}
run_demo
expect "first demo run exits 0" test $? -eq 0
expect "all parts stored by waymark ingest" grep -q "parts: stored 400 shapes from 1 file" "$work/out"
expect "nothing rejected" test "$(grep -c "rejected" "$work/out")" -eq 0
expect "points to the drawing-search page" grep -qE "Drawing search in a browser: http://127\.0\.0\.1:[0-9]+/$" "$work/out"
expect "prints the address" grep -qE "serving on http://127\.0\.0\.1:[0-9]+" "$work/out"
expect "prints a query to paste" grep -q "curl -s -X POST http://127.0.0.1:.*/v1/collections/parts/nearest" "$work/out"
expect "five results, brackets first" test "$(grep -cE '^  BRK-[0-9]{5}-[A-D] ' "$work/out")" -ge 1
expect "the sample answer is certified" grep -q "certified exact: true" "$work/out"
run_demo
expect "second demo run exits 0" test $? -eq 0
expect "second run reuses the collection" grep -q "already in" "$work/out"
expect "second run answers the same" grep -q "certified exact: true" "$work/out"
if ((failed > 0)); then cat "$work/out"; fi
echo "$passed passed, $failed failed"
((failed == 0))
