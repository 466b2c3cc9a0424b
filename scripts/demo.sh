#!/usr/bin/env bash
# The README's first command: installs what is missing, builds waymarkd and the waymark CLI,
# and serves the invented parts catalogue (scripts/serve-demo.sh) from ./waymark-data.
set -euo pipefail
cd "$(dirname "$0")/.."
bash scripts/install-dependencies.sh
cmake -S . -B build -G Ninja -DCMAKE_BUILD_TYPE=Release >/dev/null
cmake --build build --target waymarkd waymark
exec bash scripts/serve-demo.sh build/server/waymarkd build/clients/cli/waymark
