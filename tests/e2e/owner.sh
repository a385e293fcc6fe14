# e2e owner — a session records the process that runs it. A second run on the same database
# leaves a first, still-running session alone; an interrupted session that is resumed is running
# again (owned by the resuming process, with a "status" event) while it runs.
. tests/e2e/lib.sh
unset DISPLAY WAYLAND_DISPLAY
A=$ROOT/assets-demo
MODEL="model:shape=weibull,threshold=20,slope=-3,rt=500,seed=4"
q() { sqlite3 -cmd '.timeout 5000' "$1" "$2"; }
# wait_for DB SQL: polls (up to 10 s) until SQL prints something other than 0 or nothing.
wait_for() {
  for _ in $(seq 100); do
    v=$(q "$1" "$2" 2>/dev/null)
    [ -n "$v" ] && [ "$v" != 0 ] && return 0
    sleep 0.1
  done
  return 1
}
RIG=$A/rig.ini
mkproto "$WORK/p.ini" "$A/stimuli.csv" 2
DB=$WORK/o.db
ARGS="--rig $RIG --headless --observer $MODEL --seed 5"

# 1. A paced run A is running; a second run B on the same database does not touch A's session.
"$TACHIST" run "$WORK/p.ini" $ARGS --pace --subject A1 --db "$DB" >"$WORK/a.out" 2>&1 &
apid=$!
check "run A's session begins" wait_for "$DB" "select count(*) from trials"
aid=$(q "$DB" "select id from sessions where subject = 'A1'")
expect_eq "run A's session records its process" "$apid|$(uname -n)" \
  "$(q "$DB" "select owner_pid, owner_host from sessions where id = '$aid'")"
expect_exit "run B on the same database completes" 0 "$TACHIST" run "$WORK/p.ini" $ARGS \
  --subject B1 --db "$DB"
expect_eq "run A's session is still running after run B began" running \
  "$(q "$DB" "select status from sessions where id = '$aid'")"
expect_exit "tachist sessions while A runs" 0 "$TACHIST" sessions --db "$DB"
expect_eq "and still running after listing" running \
  "$(q "$DB" "select status from sessions where id = '$aid'")"

# 2. Interrupt A, resume it: the session is running again while the resume runs.
kill -INT "$apid"; wait "$apid"
expect_eq "run A interrupted" interrupted "$(q "$DB" "select status from sessions where id = '$aid'")"
"$TACHIST" run "$WORK/p.ini" --resume "$aid" --db "$DB" --headless --pace --observer "$MODEL" \
  >"$WORK/r.out" 2>&1 &
rpid=$!
check "the resume records a status event" wait_for "$DB" \
  "select count(*) from events where session_id = '$aid' and kind = 'status'"
expect_eq "the resumed session is running, owned by the resuming process" "running|$rpid||" \
  "$(q "$DB" "select status, owner_pid, ended_utc, '' from sessions where id = '$aid'")"
q "$DB" "select detail from events where session_id = '$aid' and kind = 'status'" >"$WORK/ev"
check "the event says what the session was" grep -q "was interrupted" "$WORK/ev"
expect_exit "a second resume of the running session is refused" 1 "$TACHIST" run "$WORK/p.ini" \
  --resume "$aid" --db "$DB" --headless --observer "$MODEL"
check "saying it is still running" grep -q "still running" "$WORK/last.err"
kill -INT "$rpid"; wait "$rpid"
expect_eq "interrupted again" interrupted "$(q "$DB" "select status from sessions where id = '$aid'")"
