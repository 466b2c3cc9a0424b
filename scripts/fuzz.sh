#!/usr/bin/env bash
# Builds the libFuzzer targets (clang, ASan + UBSan) in build-fuzz/ and runs each for a bounded
# time, starting from its seed corpus in tests/fuzz/corpus. New interesting inputs go to
# build-fuzz/corpus/ (not the repository). A crash stops the run: the input is copied into
# tests/fuzz/regressions/TARGET/ so that, once fixed, ctest replays it forever.
#
# Usage: bash scripts/fuzz.sh [SECONDS_PER_TARGET=60] [TARGET...]
# CI runs 45 seconds per target; run longer (e.g. 3600) before a release.
set -euo pipefail
cd "$(dirname "$0")/.."
seconds=${1:-60}
shift || true
targets=("$@")
if ((${#targets[@]} == 0)); then targets=(shape_text landmark_file stored_record snapshot request); fi

CC=clang CXX=clang++ cmake -S . -B build-fuzz -G Ninja -DCMAKE_BUILD_TYPE=RelWithDebInfo -DWAYMARK_FUZZ=ON >/dev/null
cmake --build build-fuzz --target fuzz_targets -j "$(nproc)"
export OMP_WAIT_POLICY=PASSIVE OMP_NUM_THREADS=1
export UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1
export ASAN_OPTIONS=detect_leaks=1

status=0
for target in "${targets[@]}"; do
  work=build-fuzz/corpus/$target
  artifacts=build-fuzz/artifacts/$target/
  mkdir -p "$work" "$artifacts"
  echo "fuzz: $target for ${seconds}s"
  if ! "build-fuzz/tests/fuzz/${target}_fuzz" "$work" "tests/fuzz/corpus/$target" -max_total_time="$seconds" \
      -timeout=10 -rss_limit_mb=3072 -max_len=65536 -artifact_prefix="$artifacts" -print_final_stats=1 \
      >"build-fuzz/$target.log" 2>&1; then
    status=1
    mkdir -p "tests/fuzz/regressions/$target"
    cp "$artifacts"* "tests/fuzz/regressions/$target/" 2>/dev/null || true
    tail -n 60 "build-fuzz/$target.log"
    echo "fuzz: $target FAILED; the input is in tests/fuzz/regressions/$target/"
  else
    grep -E "stat::number_of_executed_units|cov:" "build-fuzz/$target.log" | tail -n 2
  fi
done
exit $status
