# e2e triggers — a headless session writes the protocol's [triggers] codes to the rig's [trigger]
# port, here the far end of a pseudo-terminal that a small reader (/usr/bin/python3, pty) copies
# to a file: block start, each trial's onset code (per category), the response code, block end,
# in the order of the stored trials; every trial keeps the time of its onset write; the session
# names the port. A missing port stops `run` before any session; a port whose peer closes
# mid-session stops the block with the port named and keeps every stored trial.
. tests/e2e/lib.sh
PY=/usr/bin/python3
command -v sqlite3 >/dev/null || { echo "ok - triggers # SKIP sqlite3 not installed"; exit 0; }
[ -x "$PY" ] || { echo "ok - triggers # SKIP /usr/bin/python3 not installed"; exit 0; }

# reader OUT NAMEFILE STOP_AFTER: opens a pty, writes its port name to NAMEFILE, copies what the
# port receives to OUT; closes its end after STOP_AFTER bytes (0 = never).
reader() {
  "$PY" - "$@" <<'PY' &
import os, pty, sys
out, namefile, stop = sys.argv[1], sys.argv[2], int(sys.argv[3])
m, s = pty.openpty()
with open(namefile + ".tmp", "w") as f:
    f.write(os.ttyname(s))
os.rename(namefile + ".tmp", namefile)
got = 0
with open(out, "wb", buffering=0) as f:
    while True:
        try:
            b = os.read(m, 64)
        except OSError:
            break
        if not b:
            break
        if stop and got + len(b) >= stop:
            f.write(b[:stop - got])
            break
        f.write(b)
        got += len(b)
os.close(m)
PY
  READER=$!
  i=0; while [ ! -f "$2" ] && [ $i -lt 100 ]; do sleep 0.05; i=$((i + 1)); done
}

mkproto "$WORK/p.ini" "$ROOT/assets-demo/stimuli.csv" 4
cat >>"$WORK/p.ini" <<'EOF'
[triggers]
onset = 10
onset.ring = 11
response = 50
block_start = 100
block_end = 101
EOF
check "check accepts the [triggers] section" "$TACHIST" check "$WORK/p.ini" --rig tests/data/good/rig.ini

reader "$WORK/codes" "$WORK/port" 0
port=$(cat "$WORK/port")
{ cat tests/data/good/rig.ini; printf '[trigger]\nport = %s\nbaud = 115200\n' "$port"; } >"$WORK/rig.ini"
"$TACHIST" check "$WORK/p.ini" --rig "$WORK/rig.ini" >"$WORK/check.out" 2>&1
expect_eq "check shows the port and each category's onset code" \
  "triggers  $port at 115200 baud 8N1: onset ring=11 onset bar=10 onset cross=10 onset chevron=10 onset wedge=10 onset lattice=10 response=50 block_start=100 block_end=101" \
  "$(grep '^triggers' "$WORK/check.out")"
expect_exit "a session with a trigger port runs" 0 "$TACHIST" run "$WORK/p.ini" --subject T01 \
  --rig "$WORK/rig.ini" --db "$WORK/t.db" --headless --observer model:seed=4,rt=300 --seed 9
sleep 0.3
kill "$READER" 2>/dev/null; wait "$READER" 2>/dev/null
expect_eq "the session names the port" "$port" "$(sqlite3 "$WORK/t.db" 'SELECT trigger_port FROM sessions')"
expect_eq "every trial has its onset write time" 0 \
  "$(sqlite3 "$WORK/t.db" 'SELECT count(*) FROM trials WHERE trigger_ns IS NULL OR trigger_ns <= 0')"
# The expected byte stream, from the stored trials in the order shown.
sqlite3 -separator ' ' "$WORK/t.db" \
  'SELECT block, category, response_key IS NOT NULL FROM trials ORDER BY trial' | awk '
  { if (NR == 1 || $1 != b) { if (NR > 1) print 101; print 100; b = $1 }
    print ($2 == "ring" ? 11 : 10); if ($3 == 1) print 50 }
  END { print 101 }' >"$WORK/want"
od -An -v -tu1 "$WORK/codes" | tr -s ' ' '\n' | sed '/^$/d' >"$WORK/got"
if cmp -s "$WORK/want" "$WORK/got"; then
  ok "every code arrives in the order of the stored trials ($(wc -l <"$WORK/got") codes)"
else
  notok "every code arrives in the order of the stored trials"
  diff "$WORK/want" "$WORK/got" | head -n 10 | sed 's/^/#   /'
fi

# A port that does not exist: refused before any session.
{ cat tests/data/good/rig.ini; printf '[trigger]\nport = %s/no-such-port\n' "$WORK"; } >"$WORK/rig2.ini"
expect_exit "a missing trigger port stops run" 1 "$TACHIST" run "$WORK/p.ini" --subject T02 \
  --rig "$WORK/rig2.ini" --db "$WORK/t2.db" --headless --observer model:seed=4
grep -q "no-such-port" "$WORK/last.err" && ok "the message names the port" \
  || { notok "the message names the port"; sed 's/^/#   /' "$WORK/last.err" | head -n 5; }
expect_eq "no session was begun" 0 "$(sqlite3 "$WORK/t2.db" 'SELECT count(*) FROM sessions' 2>/dev/null || echo 0)"

# The far end closes after 12 codes: the block stops with the port named; trials stay stored.
reader "$WORK/codes3" "$WORK/port3" 12
port3=$(cat "$WORK/port3")
{ cat tests/data/good/rig.ini; printf '[trigger]\nport = %s\n' "$port3"; } >"$WORK/rig3.ini"
"$TACHIST" run "$WORK/p.ini" --subject T03 --rig "$WORK/rig3.ini" --db "$WORK/t3.db" --headless \
  --observer model:seed=4,rt=300 --seed 9 >"$WORK/r3.out" 2>"$WORK/r3.err"; rc=$?
kill "$READER" 2>/dev/null; wait "$READER" 2>/dev/null
expect_eq "run fails when the port's peer closes" 1 "$rc"
grep -q "trigger port $port3 failed" "$WORK/r3.err" && ok "the message names the failed port" \
  || { notok "the message names the failed port"; sed 's/^/#   /' "$WORK/r3.err" | head -n 5; }
n3=$(sqlite3 "$WORK/t3.db" 'SELECT count(*) FROM trials')
[ "$n3" -ge 3 ] && [ "$n3" -lt 30 ] && ok "the trials before the failure are kept ($n3)" \
  || notok "the trials before the failure are kept ($n3)"
expect_eq "the failure is an event of the session" 1 \
  "$(sqlite3 "$WORK/t3.db" "SELECT count(*) FROM events WHERE kind = 'fault' AND detail LIKE '%$port3%'")"
