#!/usr/bin/env bash
# Builds and runs the stream input fuzz targets with libFuzzer (clang++ from Debian's clang and
# libclang-rt-14-dev), AddressSanitizer and UndefinedBehaviorSanitizer.
#
#   tests/stream/fuzz/run_fuzz.sh [decode|config|all] [seconds per target, default 60] [jobs, default 1]
#
# Binaries go to build-fuzz/ (override with PLIMSOLL_FUZZ_OUT). Each run starts from the committed
# seed corpus tests/stream/fuzz/corpus/<target>/ and writes new interesting inputs to
# build-fuzz/corpus-<target>/ (not committed; copy small, meaningful ones into the seed corpus,
# which test_stream_unit replays on every CI run). Crashes are saved as build-fuzz/crash-* and the
# script exits non-zero.
set -euo pipefail
here=$(cd "$(dirname "$0")" && pwd)
root=$(cd "$here/../../.." && pwd)
which=${1:-all}
seconds=${2:-60}
jobs=${3:-1}
out=${PLIMSOLL_FUZZ_OUT:-$root/build-fuzz}
mkdir -p "$out"
cxx=${CXX_FUZZ:-clang++}

flags=(-std=c++20 -O1 -g -fno-omit-frame-pointer -fsanitize=fuzzer,address,undefined
       -fno-sanitize-recover=undefined -I"$root/include" -I"$root/src" -I"$root/tests"
       -DTOML_HEADER_ONLY=0 -DTOML_SHARED_LIB=1)
common=("$root/src/stream/decode.cc" "$root/src/stream/time.cc" "$root/src/base/status.cc")

build() {
  local name=$1; shift
  echo "building $out/${name}_fuzz"
  "$cxx" "${flags[@]}" "$here/${name}_fuzz.cc" "$@" -o "$out/${name}_fuzz" -lsimdjson -ltomlplusplus
}

run() {
  local name=$1
  mkdir -p "$out/corpus-$name"
  echo "fuzzing $name for ${seconds}s"
  local parallel=()
  if (( jobs > 1 )); then parallel=(-jobs="$jobs" -workers="$jobs"); fi
  (cd "$out" && "./${name}_fuzz" -max_total_time="$seconds" "${parallel[@]}" \
      -max_len=4096 -timeout=10 -print_final_stats=1 "corpus-$name" "$here/corpus/$name")
}

if [[ $which == decode || $which == all ]]; then
  build decode "${common[@]}"
  run decode
fi
if [[ $which == config || $which == all ]]; then
  build config "${common[@]}" "$root/src/stream/config.cc" "$root/src/model/spec.cc"
  run config
fi
