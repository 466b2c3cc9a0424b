#!/usr/bin/env bash
# Installs what is missing, builds, and runs every test: once in the normal (Release) build
# and once under AddressSanitizer + UndefinedBehaviorSanitizer; then the concurrency tests under
# ThreadSanitizer; then every fuzz target for 45 seconds (WAYMARK_FUZZ_SECONDS). The README's test command and .ci/run both call this script.
set -euo pipefail
cd "$(dirname "$0")/.."
bash scripts/install-dependencies.sh --tests
jobs=$(nproc)
# libgomp spin-waits by default; keep it from starving the other test process (../shared/deps.md).
export OMP_WAIT_POLICY=PASSIVE

cmake -S . -B build -G Ninja -DCMAKE_BUILD_TYPE=Release -DWAYMARK_BUILD_BENCHMARKS=ON
cmake --build build -j "$jobs"
(cd build && ctest --output-on-failure -j "$jobs")

cmake -S . -B build-sanitize -G Ninja -DCMAKE_BUILD_TYPE=Debug -DWAYMARK_SANITIZE=ON -DWAYMARK_BUILD_BENCHMARKS=OFF
cmake --build build-sanitize -j "$jobs"
(cd build-sanitize && ASAN_OPTIONS=detect_leaks=1 UBSAN_OPTIONS=print_stacktrace=1 ctest --output-on-failure -j "$jobs")

# The concurrency tests (Catch2 cases tagged [concurrency], a one-minute soak of waymarkd) under
# ThreadSanitizer; tests/CMakeLists.txt sets TSAN_OPTIONS and the suppressions.
cmake -S . -B build-tsan -G Ninja -DCMAKE_BUILD_TYPE=RelWithDebInfo -DWAYMARK_THREAD_SANITIZE=ON
cmake --build build-tsan -j "$jobs"
(cd build-tsan && ctest --output-on-failure -j "$jobs")

# Every fuzz target for a bounded time (clang, libFuzzer, ASan + UBSan); a crash fails the run
# and leaves its input in tests/fuzz/regressions/.
bash scripts/fuzz.sh "${WAYMARK_FUZZ_SECONDS:-45}"
