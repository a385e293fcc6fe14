# e2e console_live — a block watched live in real time (headless, paced): trial n of N with the
# progress bar, accuracy, median RT, timing health and the last trials; skip; pause and resume
# (no trial is stored while paused); the presentation goes on while the console is stopped
# (SIGSTOP): it never waits for the console; Ctrl-C in the middle of a block restores the terminal
# and keeps every stored trial; a crash of the presentation process leaves the console running,
# marks the session interrupted, and the session is then resumed from the sessions list.
. tests/e2e/lib.sh
. tests/e2e/console.inc

console_proto "$WORK/long.ini" long 'exemplar=3,4,5'

trials() { sqlite3 "$DB" "select count(*) from trials where session_id like '$1%'"; }

# Opens a session of long.ini for SUBJECT with the display choice as set-up offers it by default
# (headless in real time, as this pane has no display), skips the warm-up and starts the main block.
open_and_start() {
  tm_console
  tm_wait "Before anyone sits down" 20
  tm_keys Enter
  tm_wait "New session" 10
  tm_keys Up Enter C-u
  tm_type "$WORK/long.ini"
  tm_keys Enter Down Enter
  tm_type "$1"
  tm_keys Enter g
  tm_wait "not run" 20
  tm_keys k
  tm_wait "Skip block 1" 5
  tm_keys y
  tm_wait "skipped" 5
  tm_keys Enter
}

tm_start 100 30 XDG_CONFIG_HOME="$WORK/xdg" LANG=C.UTF-8 DISPLAY= WAYLAND_DISPLAY=
open_and_start L01
skips=$(sqlite3 "$DB" "select count(*) from events where kind like 'skip%'")
expect_eq "the skip is recorded as an event" 1 "$skips"
expect_screen "live: block and name" "Block 2 of 2: main"
expect_screen "live: trial n of N" " of 72"
expect_screen "live: progress bar" "█"
expect_screen "live: running accuracy" "Accuracy    "
expect_screen "live: median RT" "Median RT   "
expect_screen "live: timing health" "Timing      simulated, refresh 60.00 Hz (rig 60.00)"
expect_screen "live: dropped frames and flagged trials" "0 dropped frames, 0 trials flagged"
expect_screen "live: the last trials" "trial  category         answer"
expect_screen "live: elapsed and remaining" "remaining about"
sid=$(sqlite3 "$DB" "select id from sessions order by started_utc desc limit 1")
check "the session is in the database" [ -n "$sid" ]

tm_keys p
expect_screen "pause: the console says so" "PAUSED" 10
sleep 0.5
n1=$(trials "$sid"); sleep 2; n2=$(trials "$sid")
expect_eq "pause: no trial is stored while paused" "$n1" "$n2"
tm_keys p
expect_screen "resume: running again" "running" 10
sleep 2
n3=$(trials "$sid")
check "resume: trials are stored again" [ "$n3" -gt "$n2" ]

# The presentation never waits for the console: stop the console outright for 3 s.
cpid=$(tm_console_pid)
n1=$(trials "$sid")
kill -STOP "$cpid"; sleep 3; n2=$(trials "$sid"); kill -CONT "$cpid"
check "trials are stored while the console is stopped ($n1 -> $n2)" [ "$n2" -gt "$n1" ]
expect_screen "the console catches up after SIGCONT" "running" 10

tm_keys e
expect_screen "end asks first" "End the session now?"
tm_keys n
expect_screen "no keeps the block running" "running"

tm_keys C-c
expect_screen "Ctrl-C in a running block ends the console" "console-exit=1" 20
tm_stty_same "terminal modes restored after Ctrl-C in a running block"
n=$(trials "$sid")
check "the stored trials are kept ($n)" [ "$n" -gt 0 ]
gaps=$(sqlite3 "$DB" "select count(*) from trials where session_id = '$sid'
  and trial not in (select trial + 1 from trials where session_id = '$sid') and trial > 0")
expect_eq "trial numbers have no gaps" 0 "$gaps"
st=$(sqlite3 "$DB" "select status from sessions where id = '$sid'")
expect_eq "a signal marks the session interrupted, as it does to tachist run" interrupted "$st"
expect_eq "the database is intact" ok "$(sqlite3 "$DB" "pragma integrity_check")"

# A crash on the presentation side.
tm_keys clear Enter
open_and_start L02
expect_screen "second session runs" " of 72"
sleep 2
sid=$(sqlite3 "$DB" "select id from sessions where subject = 'L02'")
cpid=$(tm_console_pid)
child=$(ps -o pid= --ppid "$cpid" | head -n 1 | tr -d ' ')
check "the presentation runs in its own process" [ -n "$child" ]
kill -SEGV "$child"
expect_screen "the console says the presentation stopped" "stopped unexpectedly" 20
st=$(sqlite3 "$DB" "select status from sessions where id = '$sid'")
expect_eq "the crashed session is marked interrupted" interrupted "$st"
kept=$(trials "$sid")
check "its trials are kept ($kept)" [ "$kept" -gt 0 ]

# Resume it from the sessions list, this time as fast as possible.
tm_keys q
expect_screen "back to the set-up form" "New session"
tm_keys q
expect_screen "back to the first screen" "Before anyone sits down"
expect_screen "the first screen points to the sessions to resume" "can be resumed (s)"
tm_keys s
expect_screen "sessions list shows the interrupted session" "interrupted"
tm_keys u
expect_screen "resume opens the set-up form for it" "Resume session ${sid%%-*}"
expect_screen "the stored subject is kept" "Subject ID    L02"
# The stored fields are skipped: the cursor starts on Display.
tm_keys Right
expect_screen "display: as fast as possible" "headless, as fast as possible"
tm_keys g
expect_screen "the resumed session shows what is stored" "of 72 stored"
expect_screen "the block skipped before the crash is still skipped" "practice   skipped"
tm_keys Enter
expect_screen "the rest of the block runs" 'Block "main" done'
n=$(trials "$sid")
expect_eq "after the resume every trial of the block is stored" 72 "$n"
distinct=$(sqlite3 "$DB" "select count(distinct trial) from trials where session_id = '$sid'")
expect_eq "each trial number once" 72 "$distinct"
tm_keys c
tm_wait "Close this session?" 5
tm_keys y
expect_screen "closed" "Session closed."
tm_keys q q q q
expect_screen "quit" "console-exit=0"
tm_stty_same "terminal modes restored at the end"
