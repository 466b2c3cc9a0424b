#!/usr/bin/env bash
# Server benchmark over loopback: bulk NDJSON ingest of the invented parts catalogue end to end
# (curl, chunked), then small kNN queries (k = 10, Hausdorff) with wrk, fast and exact mode.
# Prints figures; asserts nothing. Quote medians of one run (the machine is shared).
# Usage: scripts/benchmark-server.sh [SHAPES (10000)] [SECONDS per wrk run (10)] [CONNECTIONS (32)]
set -euo pipefail
cd "$(dirname "$0")/.."
shapes=${1:-10000}
seconds=${2:-10}
connections=${3:-32}
command -v wrk >/dev/null || { echo "benchmark-server: needs wrk (apt-get install wrk)" >&2; exit 1; }
cmake -S . -B build -G Ninja -DCMAKE_BUILD_TYPE=Release >/dev/null
cmake --build build --target waymarkd waymark >/dev/null
work=$(mktemp -d)
token=bench-$(od -An -N12 -tx1 /dev/urandom | tr -d ' \n')
WAYMARK_WRITE_TOKENS=$token build/server/waymarkd --data-directory "$work/data" --port 0 --log-level warn \
  --worker-threads "$(nproc)" >"$work/log" 2>&1 &
server=$!
trap 'kill -TERM $server 2>/dev/null; wait $server 2>/dev/null; rm -rf "$work"' EXIT
until address=$(grep -o 'http://[0-9.:]*' "$work/log" | head -n 1) && [[ -n "$address" ]]; do sleep 0.1; done
until curl -sf "$address/readyz" >/dev/null; do sleep 0.1; done

echo "waymarkd benchmark, $(date -u +%Y-%m-%dT%H:%MZ), $(nproc) cores, $(grep -m1 'model name' /proc/cpuinfo | cut -d: -f2)"
curl -sf -X PUT "$address/v1/collections/parts" -H "Authorization: Bearer $token" \
  -d '{"frame": "centered", "landmarks": {"layout": "grid", "count": 64, "domain": [-80, -80, 80, 80]}}' >/dev/null
build/clients/cli/waymark demo-catalogue --count "$shapes" >"$work/parts.ndjson"
started=$(date +%s.%N)
curl -sf -X POST "$address/v1/collections/parts/shapes" -H "Authorization: Bearer $token" \
  -H 'Transfer-Encoding: chunked' --data-binary @"$work/parts.ndjson" >"$work/ingest.json"
ended=$(date +%s.%N)
/usr/bin/python3 - "$work/ingest.json" "$started" "$ended" "$(stat -c %s "$work/parts.ndjson")" <<'PY'
import json, sys
report = json.load(open(sys.argv[1]))
seconds = float(sys.argv[3]) - float(sys.argv[2])
print(f"bulk ingest: {report['accepted']} shapes ({int(sys.argv[4]) / 1e6:.1f} MB NDJSON) in {seconds:.2f} s "
      f"= {report['accepted'] / seconds:,.0f} shapes/s end to end (durable batches)")
PY
for mode in fast exact; do
  # Warm up (page cache, allocator), then measure.
  WAYMARK_BENCH_MODE=$mode wrk -t 2 -c "$connections" -d 2s -s tests/benchmarks/nearest.lua "$address" >/dev/null
  echo "kNN k=10 hausdorff, $shapes shapes, wrk -t2 -c$connections -d${seconds}s:"
  WAYMARK_BENCH_MODE=$mode wrk -t 2 -c "$connections" -d "${seconds}s" -s tests/benchmarks/nearest.lua "$address" |
    grep -E "^mode=|^requests/s="
done
