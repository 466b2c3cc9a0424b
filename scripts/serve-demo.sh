#!/usr/bin/env bash
# Starts waymarkd on its default data directory, loads the invented parts catalogue into the
# collection "parts" (once: a later run finds it there), prints the address, the write token of
# this run and a query to paste, runs that query once, and keeps serving until Ctrl-C.
#
# Usage: serve-demo.sh WAYMARKD WAYMARK
# Environment: WAYMARK_DATA_DIRECTORY (default waymark-data), WAYMARK_PORT (default 7700; 0
# picks a free one), WAYMARK_WRITE_TOKENS (default: a random token for this run),
# WAYMARK_DEMO_PARTS (default 3000), WAYMARK_DEMO_EXIT=1 to stop after the sample query (tests).
set -euo pipefail
waymarkd=$1
waymark=$2
data=${WAYMARK_DATA_DIRECTORY:-waymark-data}
port=${WAYMARK_PORT:-7700}
parts=${WAYMARK_DEMO_PARTS:-3000}
token=${WAYMARK_WRITE_TOKENS:-demo-$(od -An -N12 -tx1 /dev/urandom | tr -d ' \n')}
export WAYMARK_WRITE_TOKENS=$token

log=$(mktemp)
"$waymarkd" --data-directory "$data" --port "$port" >"$log" 2>&1 &
server=$!
stop() {
  kill -TERM "$server" 2>/dev/null || true
  wait "$server" 2>/dev/null || true
  rm -f "$log"
}
trap stop EXIT
trap 'exit 130' INT TERM

address=""
for _ in $(seq 300); do
  address=$(grep -o 'listening on http[s]*://[^ ]*' "$log" | head -n 1 | cut -d' ' -f3 || true)
  [[ -n "$address" ]] && break
  kill -0 "$server" 2>/dev/null || { cat "$log" >&2; echo "serve-demo: waymarkd did not start" >&2; exit 1; }
  sleep 0.1
done
[[ -n "$address" ]] || { cat "$log" >&2; echo "serve-demo: waymarkd did not report its address" >&2; exit 1; }
until curl -sf "$address/readyz" >/dev/null; do
  kill -0 "$server" 2>/dev/null || { cat "$log" >&2; exit 1; }
  sleep 0.1
done

authorization="Authorization: Bearer $token"
if curl -sf "$address/v1/collections/parts" >/dev/null; then
  echo "The collection 'parts' is already in $data; not loading it again."
else
  # Outlines in millimetres, compared after centring each on its bounding box; the landmarks
  # cover the largest part (a flange of radius 70 mm) with a margin.
  curl -sf -X PUT "$address/v1/collections/parts" -H "$authorization" -H 'Content-Type: application/json' \
    -d '{"frame": "centered", "landmarks": {"layout": "grid", "count": 64, "domain": [-80, -80, 80, 80]}}' >/dev/null
  echo "Loading $parts invented parts (brackets, gaskets, clips, flanges) into 'parts'..."
  catalogue_file=$(mktemp --suffix=.ndjson)
  "$waymark" demo-catalogue --count "$parts" >"$catalogue_file"
  WAYMARK_SERVER=$address WAYMARK_TOKEN=$token "$waymark" ingest parts "$catalogue_file" --progress none |
    sed 's/^/  /'
  rm -f "$catalogue_file"
fi

query='{"shape": "POLYGON ((0 0, 41 0, 41 6.5, 6 6.5, 6 30, 0 30, 0 0))", "k": 5, "mode": "exact"}'
cat <<TEXT

Waymark is serving on $address (data in $data; Ctrl-C stops it).
Write token for this run: $token
Find the five parts closest to an L-bracket outline (exact Hausdorff distance, mm):

  curl -s -X POST $address/v1/collections/parts/nearest -H 'Content-Type: application/json' \\
    -d '$query'

TEXT
curl -sf -X POST "$address/v1/collections/parts/nearest" -H 'Content-Type: application/json' -d "$query" |
  /usr/bin/python3 -c '
import json, sys
answer = json.load(sys.stdin)
for hit in answer["results"]:
    m = hit["metadata"]
    print("  %-12s %8.3f mm  %-8s %s" % (hit["id"], hit["distance"], m["family"], m["material"]))
print("  certified exact: %s, %.2f ms" % (str(answer["certified"]).lower(), answer["stats"]["milliseconds"]))
print("  " + answer["guarantee"])'
echo
echo "Drawing search in a browser: $address/"
echo "API: server/openapi.json. More: GET $address/v1/collections/parts, POST .../within, /metrics."
if [[ "${WAYMARK_DEMO_EXIT:-0}" == 1 ]]; then exit 0; fi
wait "$server"
