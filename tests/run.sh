#!/bin/sh
# Runs every test program and end-to-end script and prints one closing line
# "N passed, N failed, N skipped". Unit tests are cmocka programs in $BUILD/tests (TAP output);
# end-to-end scripts in tests/e2e print "ok - what" or "not ok - what" per check (see
# tests/e2e/lib.sh). A check whose line carries the TAP directive "# SKIP reason" is counted as
# skipped, never as passed or failed (cmocka writes its skips as "not ok N # SKIP name"). A program
# that dies before its plan is complete counts its missing checks as failed.
#
# Tests run TEST_JOBS at a time (default: the number of processors plus one, since many of them
# spend their time waiting on a terminal, a server or a child). Every script works in its own
# scratch folder, tmux socket and database cluster, so the order does not matter; the ones that
# take longest start first so the run ends sooner. Each result line is printed when its test ends,
# with its wall time; the closing line sums them all. `sh tests/run.sh NAME...` runs those named.
BUILD=${BUILD:-build/san}
TACHIST=$(pwd)/$BUILD/tachist
export BUILD TACHIST
export CMOCKA_MESSAGE_OUTPUT=TAP
export ASAN_OPTIONS=${ASAN_OPTIONS:-detect_leaks=1:abort_on_error=0}
export LSAN_OPTIONS=${LSAN_OPTIONS:-suppressions=$(pwd)/tests/lsan.supp:print_suppressions=0}
export UBSAN_OPTIONS=${UBSAN_OPTIONS:-print_stacktrace=1:halt_on_error=1}
export SDL_AUDIODRIVER=dummy
log=$BUILD/test-logs
SKIPRE='^\(not \)\{0,1\}ok .*#[[:space:]]*[Ss][Kk][Ii][Pp]'

# one ITEM: runs one test program or script, writes its output to $log/NAME.out, its counts
# ("passed failed skipped") to $log/NAME.sum and prints its result line(s) in one piece.
one() {
  case $1 in
    *.sh) name=$(basename "$1" .sh); shown=e2e/$name ;;
    *)    name=$(basename "$1"); shown=$name ;;
  esac
  out=$log/$name.out
  t0=$(date +%s)
  case $1 in *.sh) sh "$1" >"$out" 2>&1 ;; *) "$1" >"$out" 2>&1 ;; esac
  rc=$?
  secs=$(($(date +%s) - t0))
  s=$(grep -c "$SKIPRE" "$out")
  p=$(grep -v "$SKIPRE" "$out" | grep -c '^ok ')
  f=$(grep -v "$SKIPRE" "$out" | grep -c '^not ok ')
  plan=$(sed -n 's/^1\.\.\([0-9][0-9]*\).*/\1/p' "$out" | head -n 1)
  if [ -n "$plan" ] && [ $((p + f + s)) -lt "$plan" ]; then f=$((plan - p - s)); fi
  if [ "$rc" != 0 ] && [ "$f" = 0 ]; then f=1; fi
  echo "$p $f $s" >"$log/$name.sum"
  extra=""; [ "$s" != 0 ] && extra=", $s skipped"
  {
    if [ "$f" != 0 ]; then
      echo "FAIL $shown (exit $rc$extra, $secs s)"; grep -v '^ok ' "$out" | grep -v "$SKIPRE" | head -n 60
    else
      echo "pass $shown ($p$extra, $secs s)"
    fi
    grep "$SKIPRE" "$out" | sed 's/^/  skipped: /'
  } >"$log/$name.report"
  cat "$log/$name.report"
}

if [ "${1:-}" = --one ]; then
  one "$2"
  exit 0
fi

rm -rf "$log"; mkdir -p "$log"
only=" $* "
# The slowest first (wall seconds on two cores, measured; the order changes nothing else).
SLOW="column_table pool_pg console_pool_pg adaptive_run calibrate console_notes bad_inputs
      console_live console_ctrlc install fuzz console_form console_session make_deps"
{
  for n in $SLOW; do [ -f "tests/e2e/$n.sh" ] && echo "tests/e2e/$n.sh"; done
  for t in "$BUILD"/tests/test_*; do [ -x "$t" ] && echo "$t"; done
  for s in tests/e2e/*.sh; do
    n=$(basename "$s" .sh)
    case " $(echo $SLOW) lib " in *" $n "*) continue ;; esac
    echo "$s"
  done
} | while read -r item; do
  case $item in *.sh) n=$(basename "$item" .sh) ;; *) n=$(basename "$item") ;; esac
  case "$only" in "  "|*" $n "*) echo "$item" ;; esac
done >"$log/items"
[ -s "$log/items" ] || { echo "no test named$only" >&2; exit 1; }

jobs=${TEST_JOBS:-$(($(nproc 2>/dev/null || echo 1) + 1))}
xargs -P "$jobs" -n 1 sh "$0" --one <"$log/items"

pass=0; fail=0; skipped=0
while read -r item; do
  case $item in *.sh) n=$(basename "$item" .sh) ;; *) n=$(basename "$item") ;; esac
  if [ -f "$log/$n.sum" ]; then
    read -r p f s <"$log/$n.sum"
  else
    p=0; f=1; s=0; echo "FAIL $n (did not report)"
  fi
  pass=$((pass + p)); fail=$((fail + f)); skipped=$((skipped + s))
done <"$log/items"
echo "$pass passed, $fail failed, $skipped skipped"
[ "$fail" = 0 ]
