#!/usr/bin/env bash
# The README's first command: installs what is missing, builds (Release) and runs the main job on
# the embedded default. Extra arguments are passed to `plimsoll demo`.
set -euo pipefail
cd "$(dirname "$0")/.."
bash deploy/setup.sh
export CCACHE_BASEDIR="$PWD" CCACHE_NOHASHDIR=1
cmake --preset release >/dev/null
cmake --build --preset release -j "$(nproc)" --target plimsoll
if ! ./build-release/plimsoll demo --help >/dev/null 2>&1; then
  echo "demo.sh: the 'demo' verb is not built yet; available verbs:" >&2
  ./build-release/plimsoll --help >&2
  exit 1
fi
exec ./build-release/plimsoll demo "$@"
