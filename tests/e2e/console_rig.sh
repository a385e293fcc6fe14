# e2e console_rig — a session set up in the console on a display that does not match the rig is
# refused with both values, and the console offers to accept the mismatch (m, asked first), which
# opens the session and stores a rig_mismatch_accepted event. The mismatch is made headless with
# the virtual clock at 63 Hz against the demo rig's 60 Hz (console --clock-hz).
. tests/e2e/lib.sh
. tests/e2e/console.inc
command -v sqlite3 >/dev/null || { skip "console_rig" "sqlite3 not installed"; exit 0; }
sessions() { if [ -f "$DB" ]; then sqlite3 "$DB" 'SELECT count(*) FROM sessions'; else echo 0; fi; }
mkproto "$WORK/p.ini" "$ROOT/assets-demo/stimuli.csv" 4

tm_start 100 30 XDG_CONFIG_HOME="$WORK/xdg" LANG=C.UTF-8 DISPLAY= WAYLAND_DISPLAY=
tm_console "--clock-hz 63"
tm_wait "Before anyone sits down" 20
tm_keys Enter
tm_wait "New session" 10
tm_keys Up Enter C-u
tm_type "$WORK/p.ini"
tm_keys Enter
tm_wait "ready: " 20
tm_keys Down Enter
tm_type R01
tm_keys Enter Down Down Down Right
tm_wait "headless, as fast as possible" 5
tm_keys g
expect_screen "the session is refused: the display's rate" "63.000 Hz (virtual clock)" 20
expect_screen "the refusal gives the rig's rate" "60.000 Hz" 2
expect_screen "the console offers to accept the mismatch" "m accepts the mismatch" 2
expect_eq "no session was begun" 0 "$(sessions)"
tm_keys m
expect_screen "accepting asks first" "does not match the rig?" 5
tm_keys y
expect_screen "the session opens on the mismatched display" "not run" 20
expect_eq "the acceptance is an event of the session" 1 \
  "$(sqlite3 "$DB" "SELECT count(*) FROM events WHERE kind = 'rig_mismatch_accepted' AND detail LIKE '%63.000 Hz%60.000 Hz%'")"
tm_keys Enter
expect_screen "a block runs" "done:" 30
tm_keys c
tm_wait "Close this session?" 5
tm_keys y
tm_wait "Session closed." 20 >/dev/null
tm_keys q q q
tm_wait "console-exit=" 10 >/dev/null || { tm_keys q; tm_keys y; }
