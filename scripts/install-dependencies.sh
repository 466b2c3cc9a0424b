#!/usr/bin/env bash
# Installs what Waymark needs from Debian's packages, skipping what is already there.
# Used by README.md's set-up commands and by .ci/run, so both see the same machine.
# With --tests it also installs what only the tests need: Debian's chromium, Node.js when the
# machine has none, and from the npm registry (tests/package.json, pinned by its lock file)
# playwright-core and world-atlas.
#
# Boost line: we use Debian's default 1.74 (libboost-dev). libboost1.81-dev conflicts with the
# 1.74 -dev packages that python3-scipy pulls in, and installing it removes python3-scipy and
# python3-fonttools, which the reference checks and evaluation scripts need. Asio/Beast 1.74
# has everything the server uses.
set -euo pipefail

packages=(
  build-essential cmake ninja-build pkg-config
  curl                              # the demo script talks to waymarkd with it
  libboost-dev                      # Asio/Beast, header-only (1.74 line, see above)
  libfaiss-dev libopenblas-dev      # vector index; OpenBLAS for batched flat search
  libeigen3-dev nlohmann-json3-dev libspdlog-dev libfmt-dev
  catch2 libbenchmark-dev
  libgeos-dev libgeos++-dev         # outside reference for distances (tests, benchmarks)
  librocksdb-dev                    # embedded storage engine (crash-safe WAL, atomic write batches)
  libxxhash-dev                     # xxHash: checksums of index snapshots (hundreds of MB)
  libgoogle-perftools-dev           # tcmalloc: the allocator of every program that opens a store
  hershey-fonts-data                # real single-stroke glyphs for tests and evaluation
  libfreetype-dev fonts-dejavu-core # real glyph outlines (TrueType) for tests
  python3-shapely python3-scipy     # outside references, run with /usr/bin/python3
  clang libclang-rt-14-dev          # sanitizer and fuzzing runtimes
  libpugixml-dev                    # SVG files for `waymark ingest`
)
for_tests=0
if [[ "${1:-}" == "--tests" ]]; then
  for_tests=1
  packages+=(chromium)              # the drawing-search page's browser test
  packages+=(fonts-liberation fonts-freefont-ttf gnuplot-nox)  # the evaluation report
  command -v node >/dev/null && command -v npm >/dev/null || packages+=(nodejs npm)
fi

install_page_test_modules() {
  ((for_tests)) || return 0
  local here
  here=$(cd "$(dirname "$0")/.." && pwd)
  if [[ ! -f "$here/tests/node_modules/world-atlas/package.json" || ! -f "$here/tests/node_modules/playwright-core/package.json" ]]; then
    echo "install-dependencies: npm ci in tests (playwright-core, world-atlas)"
    npm ci --prefix "$here/tests" --no-audit --no-fund
  fi
}

missing=()
for package in "${packages[@]}"; do
  status=$(dpkg-query -W -f='${Status}' "$package" 2>/dev/null || true)
  [[ "$status" == "install ok installed" ]] || missing+=("$package")
done

if ((${#missing[@]} == 0)); then
  echo "install-dependencies: every package is installed"
  install_page_test_modules
  exit 0
fi

echo "install-dependencies: installing ${missing[*]}"
sudo_prefix=()
if [[ $(id -u) -ne 0 ]]; then sudo_prefix=(sudo); fi
export DEBIAN_FRONTEND=noninteractive
"${sudo_prefix[@]}" apt-get update -q
"${sudo_prefix[@]}" apt-get install -y -q --no-install-recommends "${missing[@]}"
install_page_test_modules
