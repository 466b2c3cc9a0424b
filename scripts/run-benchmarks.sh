#!/usr/bin/env bash
# Builds the Release tree and prints the geometry benchmarks as medians of 5 repetitions.
set -euo pipefail
cd "$(dirname "$0")/.."
cmake -S . -B build -G Ninja -DCMAKE_BUILD_TYPE=Release -DWAYMARK_BUILD_BENCHMARKS=ON >/dev/null
cmake --build build --target sketch_benchmarks >/dev/null
./build/tests/benchmarks/sketch_benchmarks --benchmark_repetitions=5 --benchmark_report_aggregates_only=true \
  --benchmark_min_time=0.2 "$@" 2>&1 | grep -E "Benchmark|----|_median|CPU|Run on|Load"
