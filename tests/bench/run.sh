#!/bin/sh
# Runs every benchmark script in tests/bench (bench_*.sh). Each prints its own figures and ratios
# against a baseline measured side by side in the same run; nothing here asserts a time.
BUILD=${BUILD:-build/rel}
TACHIST=$(pwd)/$BUILD/tachist
export BUILD TACHIST
for b in tests/bench/bench_*.sh; do
  [ -f "$b" ] || continue
  echo "== $(basename "$b" .sh)"
  sh "$b" || echo "   (benchmark $(basename "$b") failed: exit $?)"
done
