# e2e console_pause — the observer's pause (Escape) seen from the console: the live screen says the
# observer paused and offers go on, skip the rest of the block and end the session; each answer
# reaches the session (events in the database). The model observer presses Escape in every 4th
# trial (model:...,pause=4). Two sessions opened one after the other from the set-up form get two
# different seeds (the form draws a fresh one once a session was opened from it).
. tests/e2e/lib.sh
. tests/e2e/console.inc
command -v sqlite3 >/dev/null || { skip "console_pause" "sqlite3 not installed"; exit 0; }

SPEC="model:shape=weibull,threshold=18,slope=-3,lapse=0.02,rt=550,seed=7,pause=4"
console_proto "$WORK/p.ini" pausing 'exemplar=3'
events() { sqlite3 "$DB" "select count(*) from events where kind = '$1' and detail = '$2'"; }

tm_start 100 30 XDG_CONFIG_HOME="$WORK/xdg" LANG=C.UTF-8 DISPLAY= WAYLAND_DISPLAY=
tm_console
tm_wait "Before anyone sits down" 20
tm_keys Enter
tm_wait "New session" 10
tm_keys Up Enter C-u
tm_type "$WORK/p.ini"
tm_keys Enter
tm_wait "ready: 2 blocks" 20
tm_keys Down Enter
tm_type P01
# The seed is left as the form drew it.
tm_keys Enter Down Down Down Right Down Down Enter C-u
tm_type "$SPEC"
tm_keys Enter
expect_screen "the model with pause=4 is accepted" "pause=4" 5
tm_keys g
expect_screen "session 1 opens" "practice   not run" 20
tm_keys Enter
expect_screen "the observer's pause shows on the live screen" "PAUSED by the observer" 30
expect_screen "the three choices are offered" "g goes on, s skips the rest of this block" 2
expect_screen "the key line offers the three choices" "g go on  s skip block  e end session" 2
tm_keys '?'
expect_screen "help lists skip the block" "skip block" 5
tm_keys Escape
tm_keys g
expect_screen "go on: the block finishes" 'Block "warmup" done' 30
expect_eq "go on: the pause and the resume are events" "1 1" \
  "$(events pause observer) $(events resume experimenter)"
tm_keys Enter
expect_screen "block 2: the observer pauses again" "PAUSED by the observer" 30
tm_keys s
expect_screen "skip asks first" "Skip the rest of this block?" 5
tm_keys y
tm_wait 'Block "main"' 30 >/dev/null
expect_eq "skip: the block's skip is an event" 1 "$(events skip main)"
expect_screen "the session goes on after the skip" "Session " 5
tm_keys c
tm_wait "Close this session?" 5
tm_keys y
expect_screen "session 1 closes" "Session closed." 20
tm_keys q q
tm_wait "Before anyone sits down" 10
tm_keys Enter
tm_wait "New session" 10
tm_keys Enter
tm_type P02
tm_keys Enter g
expect_screen "session 2 opens from the same form" "practice   not run" 20
tm_keys Enter
expect_screen "session 2: the observer pauses" "PAUSED by the observer" 30
tm_keys e
expect_screen "end asks first" "End the session now?" 5
tm_keys y
tm_wait "ended" 30 >/dev/null
sleep 1
expect_eq "end: the experimenter's end is an event" 1 "$(events end experimenter)"
n=$(sqlite3 "$DB" "select count(distinct seed) || '/' || count(*) from sessions")
expect_eq "two sessions from the form got two seeds" "2/2" "$n"
tm_keys q q q q
tm_wait "console-exit=" 10 >/dev/null || { tm_keys q; tm_keys y; }
