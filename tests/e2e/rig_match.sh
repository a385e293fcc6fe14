# e2e rig_match — a display that does not match the rig is refused before a session begins: a
# refresh more than 2% from the rig's (the virtual clock at another rate, --clock-hz) and, on a real
# display (Xvfb), a screen of another size. --accept-rig-mismatch runs and records an event.
. tests/e2e/lib.sh
command -v sqlite3 >/dev/null || { skip "rig_match" "sqlite3 not installed"; exit 0; }
RIG=tests/data/good/rig.ini   # 1920×1080 px at 60 Hz
sessions() { if [ -f "$1" ]; then sqlite3 "$1" 'SELECT count(*) FROM sessions'; else echo 0; fi; }
mkproto "$WORK/p.ini" "$ROOT/assets-demo/stimuli.csv" 4
run() { "$TACHIST" run "$WORK/p.ini" --subject s01 --rig "$RIG" --db "$WORK/t.db" --headless \
  --observer model:seed=3 "$@"; }

# 63 Hz against 60 Hz is +5%: refused, with both rates and the fix in the message.
expect_exit "a refresh 5% off the rig's is refused" 1 run --clock-hz 63
grep -q "63.000 Hz (virtual clock) but the rig .* says 60.000 Hz" "$WORK/last.err" \
  && ok "the refusal gives both rates" || { notok "the refusal gives both rates"; sed 's/^/#   /' "$WORK/last.err"; }
grep -q "refresh_hz in \[screen\]" "$WORK/last.err" && grep -q -- "--accept-rig-mismatch" "$WORK/last.err" \
  && ok "the refusal says how to fix the rig" || notok "the refusal says how to fix the rig"
expect_eq "no session was begun" 0 "$(sessions "$WORK/t.db")"
expect_exit "-5% is refused too" 1 run --clock-hz 57
# 61 Hz is +1.67%: within 2%, runs (with the per-block warning of a 1% difference).
expect_exit "a refresh 1.7% off runs" 0 run --clock-hz 61
expect_exit "without --clock-hz the virtual clock matches the rig" 0 run
expect_eq "no mismatch event for matching runs" 0 \
  "$(sqlite3 "$WORK/t.db" "SELECT count(*) FROM events WHERE kind = 'rig_mismatch_accepted'")"
expect_exit "--accept-rig-mismatch runs at 63 Hz" 0 run --clock-hz 63 --accept-rig-mismatch
expect_eq "the choice is an event of that session" 1 \
  "$(sqlite3 "$WORK/t.db" "SELECT count(*) FROM events WHERE kind = 'rig_mismatch_accepted' AND detail LIKE '%63.000 Hz%60.000 Hz%'")"
expect_exit "--clock-hz needs --headless" 2 "$TACHIST" run "$WORK/p.ini" --subject s01 --rig "$RIG" --clock-hz 63

# A real (X) display of 1024×768 against the rig's 1920×1080: refused with both sizes.
if command -v xvfb-run >/dev/null; then
  SDL_VIDEODRIVER=x11 xvfb-run -a -s "-screen 0 1024x768x24" "$TACHIST" run "$WORK/p.ini" --subject s01 \
    --rig "$RIG" --db "$WORK/x.db" --observer model:seed=3 >"$WORK/x.out" 2>"$WORK/x.err"; rc=$?
  expect_eq "a display of another size is refused" 1 "$rc"
  grep -q "the display is 1024×768 px but the rig .* says 1920×1080 px" "$WORK/x.err" \
    && ok "the refusal gives both sizes" || { notok "the refusal gives both sizes"; sed 's/^/#   /' "$WORK/x.err"; }
  expect_eq "no session on the mismatched display" 0 "$(sessions "$WORK/x.db")"
else
  skip "a display of another size is refused" "xvfb-run not installed"
fi
