# soak bad_inputs_limits — every malformed input of tests/data/bad/ plus the cases a folder cannot
# hold (named pipes, devices, oversized files, a PNG claiming 100000x100000 px, a real 20000x20000
# PNG) through both `check` and `run`, under the sanitizers: each must exit 1 within 5 s, stay
# under 512 MB of resident memory (GNU time's maximum RSS, ASan's shadow memory included), print
# only FILE[:LINE]: error|warning lines (or run's "tachist: " lines), and no sanitizer report.
# Prints the counts and the slowest and largest case.
. tests/e2e/lib.sh
command -v /usr/bin/time >/dev/null || { skip "malformed inputs under limits" "GNU time (/usr/bin/time) not installed"; exit 0; }
RIG=$ROOT/tests/data/good/rig.ini
G=$ROOT/tests/data/good
MAX_S=5; MAX_KB=$((512 * 1024))
n=0; bad=0; worst_s=0; worst_kb=0; worst_s_case=; worst_kb_case=

# one NAME ARGS...: check and run on ARGS, each measured
one() {
  name=$1; shift
  for cmd in check run; do
    if [ "$cmd" = run ]; then extra="--subject s01 --db $WORK/t.db --headless --observer model:seed=1"; else extra=; fi
    rm -f "$WORK/t.db"
    # shellcheck disable=SC2086
    /usr/bin/time -f '%e %M' -o "$WORK/time" timeout 30 "$TACHIST" $cmd "$@" $extra >"$WORK/out" 2>"$WORK/err"
    rc=$?
    # GNU time writes "Command exited with non-zero status 1" first, then the format's line.
    line=$(tail -n 1 "$WORK/time" 2>/dev/null); secs=${line% *}; kb=${line#* }
    case "$kb" in *[!0-9]*|"") kb=0 ;; esac
    case "$secs" in *[!0-9.]*|"") secs=99 ;; esac
    n=$((n + 1))
    why=
    [ "$rc" = 1 ] || why="exit $rc"
    awk -v s="$secs" -v m="$MAX_S" 'BEGIN { exit !(s > m) }' && why="$why ${secs}s"
    [ "${kb:-0}" -le "$MAX_KB" ] || why="$why ${kb} KB"
    grep -q 'Sanitizer\|runtime error' "$WORK/err" && why="$why sanitizer report"
    grep -Evq '^[^ ]+(:[0-9]+)?: (error|warning): |^[0-9]+ errors?, [0-9]+ warnings?$|^tachist: ' "$WORK/err" && why="$why foreign message"
    if [ -n "$why" ]; then
      bad=$((bad + 1)); notok "$cmd $name:$why"; sed 's/^/#   /' "$WORK/err" | head -n 5
    fi
    if awk -v s="$secs" -v w="$worst_s" 'BEGIN { exit !(s > w) }'; then worst_s=$secs; worst_s_case="$cmd $name"; fi
    if [ "${kb:-0}" -gt "$worst_kb" ]; then worst_kb=$kb; worst_kb_case="$cmd $name"; fi
  done
}

for d in tests/data/bad/*/; do
  d=${d%/}
  if [ -f "$d/args" ]; then args=$(cat "$d/args")
  elif [ -f "$d/rig.ini" ]; then args="$d/protocol.ini --rig $d/rig.ini"
  else args="$d/protocol.ini --rig $RIG"; fi
  case "$args" in *--rig*) ;; *) args="$args --rig $RIG" ;; esac
  # shellcheck disable=SC2086
  one "$(basename "$d")" $args
done

# Cases no folder can hold, made here.
mkfifo "$WORK/fifo"
sed "s|^list = .*|list = $G/list.csv|" "$G/protocol.ini" >"$WORK/p.ini"
one fifo_protocol "$WORK/fifo" --rig "$RIG"
one fifo_rig "$WORK/p.ini" --rig "$WORK/fifo"
sed "s|^list = .*|list = $WORK/fifo|" "$G/protocol.ini" >"$WORK/pl.ini"
one fifo_list "$WORK/pl.ini" --rig "$RIG"
sed "s|^list = .*|list = /dev/urandom|" "$G/protocol.ini" >"$WORK/pu.ini"
one urandom_list "$WORK/pu.ini" --rig "$RIG"
cp "$WORK/p.ini" "$WORK/big.ini"
awk 'BEGIN { for (i = 0; i < 7000; i++) printf "; %0150d\n", i }' >>"$WORK/big.ini"
one big_protocol "$WORK/big.ini" --rig "$RIG"
cp "$G/list.csv" "$WORK/huge.csv" && truncate -s 70M "$WORK/huge.csv"
sed "s|^list = .*|list = $WORK/huge.csv|" "$G/protocol.ini" >"$WORK/ph.ini"
one huge_list "$WORK/ph.ini" --rig "$RIG"
mkdir -p "$WORK/img"
for spec in "real 20000 20000" "claim 100000 100000"; do
  # shellcheck disable=SC2086
  set -- $spec
  /usr/bin/python3 tests/tools/bigpng.py "$1" "$WORK/img/$1.png" "$2" "$3"
  sed "s|\.\./\.\./\.\./|$ROOT/|g" "$G/list.csv" >"$WORK/l_$1.csv"
  echo "$WORK/img/$1.png,bar,0," >>"$WORK/l_$1.csv"
  sed "s|^list = .*|list = $WORK/l_$1.csv|" "$G/protocol.ini" >"$WORK/p_$1.ini"
  one "png_$1_$2" "$WORK/p_$1.ini" --rig "$RIG"
done

echo "# $n runs (check and run), $bad outside the limits; slowest ${worst_s}s ($worst_s_case), largest $((worst_kb / 1024)) MB ($worst_kb_case)"
check "at least 240 runs (120 inputs through check and run): $n" [ "$n" -ge 240 ]
expect_eq "every run: exit 1 within ${MAX_S}s, under 512 MB, our own messages, no sanitizer report" 0 "$bad"
