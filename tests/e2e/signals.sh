# e2e signals — a signal to `tachist run` mid-session (SIGHUP, as when its terminal closes, and
# SIGINT, SIGTERM) stops it with exit 1, the session marked `interrupted` with the trials stored
# so far, and a resume that finishes it. A session crashed in a folder that cannot be written is
# refused on resume with a message saying why, not "still running in another process".
. tests/e2e/lib.sh
command -v sqlite3 >/dev/null || { echo "ok - signals # SKIP sqlite3 not installed"; exit 0; }
unset DISPLAY WAYLAND_DISPLAY
RIG=$ROOT/assets-demo/rig.ini
MODEL="model:seed=5"
q() { sqlite3 -cmd '.timeout 5000' "$1" "$2"; }
P=$WORK/p.ini
mkproto "$P" "$ROOT/assets-demo/stimuli.csv" 2

# wait_trials DB N: waits (at most 60 s) until DB holds N trials
wait_trials() {
  i=0
  while [ "$i" -lt 600 ]; do
    # sqlite3 would create a missing file (owned by us, not by the user running tachist)
    [ -f "$1" ] && n=$(q "$1" 'select count(*) from trials' 2>/dev/null) || n=0
    [ "${n:-0}" -ge "$2" ] && return 0
    sleep 0.1; i=$((i + 1))
  done
  return 1
}

for sig in HUP INT TERM; do
  db=$WORK/$sig.db
  "$TACHIST" run "$P" --subject S01 --db "$db" --rig "$RIG" --headless --pace \
    --observer "$MODEL" --seed 9 >"$WORK/$sig.out" 2>"$WORK/$sig.err" &
  pid=$!
  check "SIG$sig: trials are being stored" wait_trials "$db" 2
  kill -"$sig" "$pid"
  wait "$pid"; rc=$?
  expect_eq "SIG$sig: run exits 1" 1 "$rc"
  expect_eq "SIG$sig: session marked interrupted" interrupted "$(q "$db" 'select status from sessions')"
  check "SIG$sig: the message says how to go on" grep -q -- '--resume' "$WORK/$sig.err"
  n=$(q "$db" 'select count(*) from trials')
  check "SIG$sig: stored trials kept ($n)" test "$n" -ge 2
done
sid=$(q "$WORK/HUP.db" 'select id from sessions')
expect_exit "after SIGHUP the session resumes to the end" 0 "$TACHIST" run "$P" --resume "$sid" \
  --db "$WORK/HUP.db" --headless --observer "$MODEL"
expect_eq "and is complete" complete "$(q "$WORK/HUP.db" 'select status from sessions')"

# A crash (kill -9) leaves the session running; the folder then becomes read-only (a share
# mounted read-only, a folder of another user). Root ignores permission bits: as_user runs as
# nobody there.
if ! user_scratch; then
  skip "resume in a read-only folder names the cause" "no folder that the unprivileged user can enter"
  exit 0
fi
U=$USERDIR
cp -R "$ROOT/assets-demo" "$U/assets-demo" && chmod -R a+rX "$U/assets-demo"
mkproto "$U/p.ini" "$U/assets-demo/stimuli.csv" 2
chmod 644 "$U/p.ini"
mkdir "$U/ro" && chmod 777 "$U/ro"
as_user "$U/tachist" run "$U/p.ini" --subject S02 --db "$U/ro/c.db" --rig "$U/assets-demo/rig.ini" \
  --headless --pace --observer "$MODEL" --seed 9 >"$WORK/crash.out" 2>"$WORK/crash.err" &
pid=$!
check "crash: trials are being stored" wait_trials "$U/ro/c.db" 2
sed "s/^/#   /" "$WORK/crash.err" | head -n 5
# $! is the shell running as_user; the session row names the tachist process itself.
owner=$(q "$U/ro/c.db" 'select owner_pid from sessions')
kill -9 "$owner"; wait "$pid" 2>/dev/null
expect_eq "crash: the session is left running" running "$(q "$U/ro/c.db" 'select status from sessions')"
sid=$(q "$U/ro/c.db" 'select id from sessions')
chmod 444 "$U/ro/c.db"; chmod 555 "$U/ro"
sum=$(cat "$U/ro/c.db" | cksum)
as_user "$U/tachist" run "$U/p.ini" --resume "$sid" --db "$U/ro/c.db" --headless \
  --observer "$MODEL" >"$WORK/ro.out" 2>"$WORK/ro.err"
expect_eq "read-only folder: the resume is refused" 1 $?
if grep -q "still running in another process" "$WORK/ro.err"; then
  notok "read-only folder: not said to be running elsewhere"; sed 's/^/#   /' "$WORK/ro.err"
else
  ok "read-only folder: not said to be running elsewhere"
fi
check "read-only folder: the message says the process has ended" grep -q "process that has ended" "$WORK/ro.err"
check "read-only folder: and why it cannot be taken over" grep -q "read-only\|cannot be written" "$WORK/ro.err"
sed 's/^/# /' "$WORK/ro.err"
expect_eq "read-only folder: the database is unchanged" "$sum" "$(cat "$U/ro/c.db" | cksum)"
chmod 755 "$U/ro"
