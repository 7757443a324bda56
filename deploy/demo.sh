#!/usr/bin/env bash
# The README's first command: installs what is missing, builds (Release) and runs the main job on
# the embedded default. Extra arguments are passed to `plimsoll demo` (see `plimsoll demo --help`).
set -euo pipefail
cd "$(dirname "$0")/.."
bash deploy/setup.sh
export CCACHE_BASEDIR="$PWD" CCACHE_NOHASHDIR=1
cmake --preset release >/dev/null
cmake --build --preset release -j "$(nproc)" --target plimsoll
exec ./build-release/plimsoll demo "$@"
