#!/bin/sh
# Runs every tests/soak/*.sh (or the one named) like tests/run.sh runs end-to-end scripts and closes
# with "N passed, N failed, N skipped".
BUILD=${BUILD:-build/san}
TACHIST=$(pwd)/$BUILD/tachist
export BUILD TACHIST
export ASAN_OPTIONS=${ASAN_OPTIONS:-detect_leaks=1:abort_on_error=0}
export LSAN_OPTIONS=${LSAN_OPTIONS:-suppressions=$(pwd)/tests/lsan.supp:print_suppressions=0}
export UBSAN_OPTIONS=${UBSAN_OPTIONS:-print_stacktrace=1:halt_on_error=1}
export SDL_AUDIODRIVER=dummy
log=$BUILD/soak-logs
rm -rf "$log"; mkdir -p "$log"
pass=0; fail=0; skip=0
for s in tests/soak/*.sh; do
  name=$(basename "$s" .sh)
  [ "$name" = run ] && continue
  case "${1:-}" in ""|"$name") ;; *) continue ;; esac
  sh "$s" >"$log/$name.out" 2>&1; rc=$?
  sk=$(grep -c '^ok .*# SKIP' "$log/$name.out"); p=$(($(grep -c '^ok ' "$log/$name.out") - sk))
  f=$(grep -c '^not ok ' "$log/$name.out")
  if [ "$rc" != 0 ] && [ "$f" = 0 ]; then f=1; fi
  pass=$((pass + p)); fail=$((fail + f)); skip=$((skip + sk))
  if [ "$f" != 0 ]; then echo "FAIL $name (exit $rc)"; grep -v '^ok ' "$log/$name.out" | head -n 60
  else echo "pass $name ($p)"; grep '^ok ' "$log/$name.out" | sed 's/^/  /'; fi
done
echo "$pass passed, $fail failed, $skip skipped"
[ "$fail" = 0 ]
