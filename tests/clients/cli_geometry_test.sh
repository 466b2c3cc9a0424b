#!/usr/bin/env bash
# Black-box test of the waymark CLI's geometry commands: outputs, exit codes, messages.
# Usage: cli_geometry_test.sh PATH_TO_WAYMARK
set -u
waymark=$1
work=$(mktemp -d)
trap 'rm -rf "$work"' EXIT
passed=0 failed=0

expect_output() {  # description expected-first-line command...
  local description=$1 expected=$2; shift 2
  local actual
  actual=$("$@" 2>"$work/stderr" | head -n 1)
  if [[ "$actual" == "$expected" ]]; then passed=$((passed + 1)); else
    failed=$((failed + 1)); echo "FAILED: $description: expected '$expected', got '$actual' ($(cat "$work/stderr"))"; fi
}

expect_failure() {  # description exit-status stderr-substring command...
  local description=$1 status=$2 message=$3; shift 3
  "$@" >/dev/null 2>"$work/stderr"
  local actual=$?
  if [[ $actual -eq $status ]] && grep -qF -- "$message" "$work/stderr"; then passed=$((passed + 1)); else
    failed=$((failed + 1)); echo "FAILED: $description: exit $actual, stderr: $(cat "$work/stderr")"; fi
}

# Worked example from the issue, derived by hand: the maximum is at the segment's midpoint.
expect_output "hausdorff mid-segment" "5" "$waymark" distance "LINESTRING (0 0, 10 0)" "MULTIPOINT ((0 0), (10 0))"
# By hand: vertex (5 3) is 3 from the axis; matching equal x attains 3.
expect_output "frechet" "3" "$waymark" distance --metric frechet "LINESTRING (0 0, 10 0)" "LINESTRING (0 1, 5 3, 10 1)"
# By hand: the discrete coupling must pair (10 0) and then (0 0) of the second curve with ends of the first.
expect_output "discrete frechet" "10" "$waymark" distance --metric discrete-frechet "LINESTRING (0 0, 10 0)" "LINESTRING (0 0, 10 0, 0 0, 10 0)"

# Files and mixed formats: a GeoJSON file against SVG path data and point arrays.
printf '{"type":"LineString","coordinates":[[0,0],[10,0]]}' >"$work/a.geojson"
expect_output "geojson file vs points" "4" "$waymark" distance --directed "[[0,4],[10,4]]" "$work/a.geojson"

# --json carries the witness points.
json=$("$waymark" distance --json "LINESTRING (0 0, 10 0)" "MULTIPOINT ((0 0), (10 0))")
if /usr/bin/python3 -c 'import json,sys; d=json.loads(sys.argv[1]); assert abs(d["distance"]-5)<1e-12 and abs(d["witness"]["first"][0]-5)<1e-9' "$json"; then
  passed=$((passed + 1)); else failed=$((failed + 1)); echo "FAILED: --json output: $json"; fi

# Bad input: exit status 2 and a message that says what and where.
expect_failure "unclosed ring" 2 "first shape: polygon ring is not closed: its last vertex must repeat its first (at line 1, column 10 (byte 9))" \
  "$waymark" distance "POLYGON ((0 0, 1 0, 1 1))" "POINT (0 0)"
expect_failure "json path" 2 "second shape: expected a number (at \$.coordinates[1][1])" \
  "$waymark" distance "POINT (0 0)" '{"type":"LineString","coordinates":[[0,0],[1,"y"]]}'
expect_failure "frechet on strokes" 2 "Fréchet distance needs a single curve, but the shape has 2 strokes" \
  "$waymark" distance --metric frechet "MULTILINESTRING ((0 0, 1 1), (2 2, 3 3))" "LINESTRING (0 0, 1 1)"
expect_failure "unknown metric" 2 "unknown metric 'cosine'" "$waymark" distance --metric cosine "POINT (0 0)" "POINT (1 1)"
expect_failure "unknown option" 2 "unknown option --colour" "$waymark" distance --colour "POINT (0 0)" "POINT (1 1)"
expect_failure "vertex limit" 1 "more than 2 vertices" "$waymark" distance --max-vertices 2 "LINESTRING (0 0, 1 1, 2 0)" "POINT (0 0)"
expect_failure "unknown command" 2 "unknown command 'frobnicate'" "$waymark" frobnicate

# Landmarks and sketches.
"$waymark" landmarks --layout grid --count 4 --domain 0,0,4,4 --output "$work/grid.txt" 2>/dev/null
# By hand: landmarks (1,1), (3,1), (1,3), (3,3) with weight 1/4 against the point (1,1):
# distances 0, 2, 2, 2·sqrt(2); sketch = 0.5 × distance.
expect_output "sketch of a point" "0 1 1 1.41421" "$waymark" sketch --landmarks "$work/grid.txt" "POINT (1 1)"
sed -i 's/^1 1 0.25$/1 1 0.5/' "$work/grid.txt"
"$waymark" landmarks --count 4 --domain 0,0,4,4 | sed '6s/^1/2/' >"$work/damaged.txt"
expect_failure "damaged landmark file" 1 "landmark file: checksum mismatch" "$waymark" sketch --landmarks "$work/damaged.txt" "POINT (1 1)"
"$waymark" landmarks --layout random --count 8 --seed 3 >"$work/r1.txt"
"$waymark" landmarks --layout random --count 8 --seed 3 >"$work/r2.txt"
if cmp -s "$work/r1.txt" "$work/r2.txt"; then passed=$((passed + 1)); else failed=$((failed + 1)); echo "FAILED: random layout not reproducible"; fi
for i in $(seq 1 30); do echo "LINESTRING (-0.5 0.$((i % 9)), 0.1 -0.$((i % 7)), 0.5 0.5)"; done >"$work/sample.wkt"
if "$waymark" landmarks --layout fitted --count 16 --sample "$work/sample.wkt" --output "$work/fitted.txt" 2>/dev/null &&
   grep -q '^layout fitted$' "$work/fitted.txt" && grep -q '^count 16$' "$work/fitted.txt"; then
  passed=$((passed + 1)); else failed=$((failed + 1)); echo "FAILED: fitted landmarks"; fi
echo "LINESTRING (0 0, 1 1" >>"$work/sample.wkt"
expect_failure "bad sample line" 2 "sample.wkt line 31: expected ')'" \
  "$waymark" landmarks --layout fitted --count 16 --sample "$work/sample.wkt"

echo "$passed passed, $failed failed"
[[ $failed -eq 0 ]]
