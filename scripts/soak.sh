#!/usr/bin/env bash
# A bounded soak over loopback (tests/soak/soak.py): concurrent bulk upserts, deletes and queries
# against one waymarkd for MINUTES (default 5), with p50/p99 per operation and memory over time.
# Usage: bash scripts/soak.sh [MINUTES]
set -euo pipefail
cd "$(dirname "$0")/.."
cmake -S . -B build -G Ninja -DCMAKE_BUILD_TYPE=Release >/dev/null
cmake --build build --target waymarkd >/dev/null
OMP_WAIT_POLICY=PASSIVE /usr/bin/python3 tests/soak/soak.py build/server/waymarkd "${1:-5}"
