#!/usr/bin/env bash
# Runs every registered benchmark once with --quick --json and checks that each prints exactly one
# JSON object naming itself. Measures nothing; catches benchmarks that crash or print garbage.
set -euo pipefail
bench=$1
names=$("$bench" list | cut -f1)
[ -n "$names" ] || { echo "no benchmarks registered"; exit 1; }
for name in $names; do
  out=$("$bench" "$name" --quick --json)
  /usr/bin/python3 -c 'import json,sys; o=json.loads(sys.argv[1]); assert o["bench"]==sys.argv[2], o' "$out" "$name"
  echo "ok $name"
done
