#!/bin/sh
# Runs every test program and end-to-end script and prints one closing line
# "N passed, N failed, N skipped". Unit tests are cmocka programs in $BUILD/tests (TAP output);
# end-to-end scripts in tests/e2e print "ok - what" or "not ok - what" per check (see
# tests/e2e/lib.sh). A check whose line carries the TAP directive "# SKIP reason" is counted as
# skipped, never as passed or failed (cmocka writes its skips as "not ok N # SKIP name"). A program
# that dies before its plan is complete counts its missing checks as failed.
BUILD=${BUILD:-build/san}
TACHIST=$(pwd)/$BUILD/tachist
export BUILD TACHIST
export CMOCKA_MESSAGE_OUTPUT=TAP
export ASAN_OPTIONS=${ASAN_OPTIONS:-detect_leaks=1:abort_on_error=0}
export LSAN_OPTIONS=${LSAN_OPTIONS:-suppressions=$(pwd)/tests/lsan.supp:print_suppressions=0}
export UBSAN_OPTIONS=${UBSAN_OPTIONS:-print_stacktrace=1:halt_on_error=1}
export SDL_AUDIODRIVER=dummy
log=$BUILD/test-logs
rm -rf "$log"; mkdir -p "$log"
pass=0; fail=0; skipped=0
only=${1:-}
SKIPRE='^\(not \)\{0,1\}ok .*#[[:space:]]*[Ss][Kk][Ii][Pp]'

count() { # file exit-code name -> adds to pass/fail/skipped
  s=$(grep -c "$SKIPRE" "$1")
  p=$(grep -v "$SKIPRE" "$1" | grep -c '^ok ')
  f=$(grep -v "$SKIPRE" "$1" | grep -c '^not ok ')
  plan=$(sed -n 's/^1\.\.\([0-9][0-9]*\).*/\1/p' "$1" | head -n 1)
  if [ -n "$plan" ] && [ $((p + f + s)) -lt "$plan" ]; then f=$((plan - p - s)); fi
  if [ "$2" != 0 ] && [ "$f" = 0 ]; then f=1; fi
  pass=$((pass + p)); fail=$((fail + f)); skipped=$((skipped + s))
  extra=""; [ "$s" != 0 ] && extra=", $s skipped"
  if [ "$f" != 0 ]; then
    echo "FAIL $3 (exit $2$extra)"; grep -v '^ok ' "$1" | grep -v "$SKIPRE" | head -n 60
  else
    echo "pass $3 ($p$extra)"
  fi
  grep "$SKIPRE" "$1" | sed 's/^/  skipped: /'
}

for t in "$BUILD"/tests/test_*; do
  [ -x "$t" ] || continue
  name=$(basename "$t")
  case "$only" in ""|"$name") ;; *) continue ;; esac
  "$t" >"$log/$name.out" 2>&1; rc=$?
  count "$log/$name.out" $rc "$name"
done
for s in tests/e2e/*.sh; do
  [ -f "$s" ] || continue
  name=$(basename "$s" .sh)
  case "$s" in */lib.sh) continue ;; esac
  case "$only" in ""|"$name") ;; *) continue ;; esac
  sh "$s" >"$log/$name.out" 2>&1; rc=$?
  count "$log/$name.out" $rc "e2e/$name"
done
echo "$pass passed, $fail failed, $skipped skipped"
[ "$fail" = 0 ]
