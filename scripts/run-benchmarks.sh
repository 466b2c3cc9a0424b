#!/usr/bin/env bash
# Builds the Release tree and prints the geometry benchmarks as medians of 5 repetitions.
set -euo pipefail
cd "$(dirname "$0")/.."
cmake -S . -B build -G Ninja -DCMAKE_BUILD_TYPE=Release -DWAYMARK_BUILD_BENCHMARKS=ON >/dev/null
cmake --build build --target sketch_benchmarks index_benchmark >/dev/null
./build/tests/benchmarks/sketch_benchmarks --benchmark_repetitions=5 --benchmark_report_aggregates_only=true \
  --benchmark_min_time=0.2 "$@" 2>&1 | grep -E "Benchmark|----|_median|CPU|Run on|Load"
# The collection benchmark (ingest; fast / exact / full-scan kNN; memory) runs when asked for,
# since the full exact Fréchet scan takes seconds per query: WAYMARK_INDEX_BENCHMARK="SHAPES
# VERTICES LANDMARKS QUERIES [exhaustive|graph|partitioned] [QUERIES_WITH_FULL_SCAN]
# [QUERIES_IN_EXACT_MODE]", e.g.
# WAYMARK_INDEX_BENCHMARK="20000 64 64 12 exhaustive 3" scripts/run-benchmarks.sh
if [[ -n "${WAYMARK_INDEX_BENCHMARK:-}" ]]; then
  echo
  OMP_WAIT_POLICY=PASSIVE OMP_NUM_THREADS=1 ./build/tests/benchmarks/index_benchmark $WAYMARK_INDEX_BENCHMARK
fi
