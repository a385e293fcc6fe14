# e2e run_refuses — `run` loads protocol, rig, list and images through the loader `check` uses, so
# it refuses, before any session exists, everything check refuses, with check's messages: a
# truncated image late in the list, and every case of the bad-input corpus (tests/data/bad/).
. tests/e2e/lib.sh
command -v sqlite3 >/dev/null || { echo "ok - run_refuses # SKIP sqlite3 not installed"; exit 0; }
RIG=tests/data/good/rig.ini
sessions() { # DB -> number of session rows (0 when the file does not exist)
  if [ -f "$1" ]; then sqlite3 "$1" 'SELECT count(*) FROM sessions'; else echo 0; fi
}

# The demo set with the last image of the test block cut short: a loader that only looks for the
# files would begin the session and stop it at that image's trial ("cannot be read now").
mkdir -p "$WORK/set"
cp -R assets-demo/img "$WORK/set/" && cp assets-demo/stimuli.csv "$WORK/set/"
last=$(awk -F, '$5 == 2 { f = $1 } END { print f }' "$WORK/set/stimuli.csv")
size=$(wc -c <"$WORK/set/$last")
head -c $((size / 2)) "$WORK/set/$last" >"$WORK/cut" && mv "$WORK/cut" "$WORK/set/$last"
mkproto "$WORK/p.ini" "$WORK/set/stimuli.csv" 4
"$TACHIST" check "$WORK/p.ini" --rig "$RIG" >/dev/null 2>"$WORK/check.err"; crc=$?
expect_eq "check refuses the truncated image" 1 "$crc"
grep -q "image '$last'" "$WORK/check.err" && ok "check names the image" \
  || { notok "check names the image"; sed 's/^/#   /' "$WORK/check.err" | head -n 5; }
expect_exit "run refuses it too" 1 "$TACHIST" run "$WORK/p.ini" --subject s01 --rig "$RIG" \
  --db "$WORK/t.db" --headless --observer model:seed=3
expect_eq "no session was begun" 0 "$(sessions "$WORK/t.db")"
grep ': error: ' "$WORK/check.err" >"$WORK/check.lines"
if grep -vxFf "$WORK/last.err" "$WORK/check.lines" >"$WORK/missing"; then
  notok "run prints check's error lines"; sed 's/^/#   missing: /' "$WORK/missing" | head -n 5
else
  ok "run prints check's error lines"
fi

# Every bad-input case: check's expected errors are run's errors, and no session row exists.
n=0
for d in tests/data/bad/*/; do
  d=${d%/}
  name=$(basename "$d")
  if [ -f "$d/args" ]; then args=$(cat "$d/args")
  elif [ -f "$d/rig.ini" ]; then args="$d/protocol.ini --rig $d/rig.ini"
  else args="$d/protocol.ini --rig $RIG"; fi
  case "$args" in *--rig*) ;; *) args="$args --rig $RIG" ;; esac
  rm -f "$WORK/b.db"
  # shellcheck disable=SC2086
  "$TACHIST" run $args --subject s01 --db "$WORK/b.db" --headless --observer model:seed=1 \
    >"$WORK/out" 2>"$WORK/err"; rc=$?
  grep ': error: \|^error: ' "$d/expect" >"$WORK/want"
  if [ "$rc" = 1 ] && [ "$(sessions "$WORK/b.db")" = 0 ] && ! grep -vxFf "$WORK/err" "$WORK/want" >"$WORK/missing"; then
    ok "run refuses $name with check's errors"
  else
    notok "run refuses $name with check's errors (exit $rc, sessions $(sessions "$WORK/b.db"))"
    sed 's/^/#   missing: /' "$WORK/missing" | head -n 5
  fi
  n=$((n + 1))
done
expect_eq "the corpus has at least 120 cases ($n)" 1 "$([ "$n" -ge 120 ] && echo 1 || echo 0)"
