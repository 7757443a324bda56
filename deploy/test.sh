#!/usr/bin/env bash
# The README's test command: installs what is missing, builds, and runs every test.
#   1. default preset (RelWithDebInfo): every label (unit, reference, integration, slow) + bench smoke
#   2. asan preset (ASan + UBSan): the unit tests
#   3. tsan preset (ThreadSanitizer): the unit tests of the modules with threads
# Exits non-zero on the first failure. Set PLIMSOLL_SKIP_SANITIZERS=1 for a quick local run.
set -euo pipefail
cd "$(dirname "$0")/.."
bash deploy/setup.sh

export CCACHE_BASEDIR="$PWD" CCACHE_NOHASHDIR=1 CCACHE_MAXSIZE=5G
jobs=$(nproc)
started=$(date +%s)
stage() { echo; echo "=== $* ($(( $(date +%s) - started ))s)"; }

stage "default preset: build"
cmake --preset default >/dev/null
cmake --build --preset default -j "$jobs"
stage "default preset: all tests"
ctest --preset default -j "$jobs"

if [ "${PLIMSOLL_SKIP_SANITIZERS:-0}" != "1" ]; then
  stage "asan preset (ASan+UBSan): unit tests"
  cmake --preset asan >/dev/null
  cmake --build --preset asan -j "$jobs"
  ASAN_OPTIONS=detect_leaks=1:abort_on_error=1 UBSAN_OPTIONS=print_stacktrace=1:halt_on_error=1 \
    ctest --preset asan -j "$jobs" -L unit

  if [ -f deploy/tsan-modules.txt ]; then
    stage "tsan preset: unit tests of $(tr '\n' ' ' < deploy/tsan-modules.txt)"
    cmake --preset tsan -DPLIMSOLL_TEST_MODULES="$(paste -sd';' deploy/tsan-modules.txt)" >/dev/null
    cmake --build --preset tsan -j "$jobs"
    TSAN_OPTIONS=halt_on_error=1:second_deadlock_stack=1 ctest --preset tsan -j "$jobs" -L unit
  fi
fi
stage "all tests passed"
