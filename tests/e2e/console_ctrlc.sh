# e2e console_ctrlc — Ctrl-C on every screen not covered elsewhere (the first screen and the
# set-up form are in console_frame and console_input, a running block in console_live): the
# blocks screen with a session open, the sessions list, results, export with a path half typed,
# the rig editor, the help overlay and a yes/no question; then SIGHUP with a session open. Each
# time the terminal modes are as before, the stored data are kept, and a session left open is
# marked interrupted.
. tests/e2e/lib.sh
. tests/e2e/console.inc

SPEC="model:shape=weibull,threshold=18,slope=-3,lapse=0.02,rt=550,seed=7"
expect_exit "a session to look at" 0 "$TACHIST" run "$ROOT/protocols/demo.ini" --subject K01 \
  --seed 11 --headless --observer "$SPEC" --db "$DB"
before=$(sqlite3 "$DB" "select count(*) from trials")

tm_start 100 30 XDG_CONFIG_HOME="$WORK/xdg" LANG=C.UTF-8 DISPLAY= WAYLAND_DISPLAY=

# name, keys to reach the screen, text that shows it is there
ctrl_c_on() {
  name=$1; want=$2; shift 2
  tm_keys clear Enter
  tm_console
  tm_wait "Before anyone sits down" 20
  for k in "$@"; do tm_keys "$k"; sleep 0.3; done
  expect_screen "$name: reached" "$want"
  tm_keys C-c
  expect_screen "$name: Ctrl-C ends the console" "console-exit=1" 20
  tm_stty_same "$name: terminal modes restored"
}

ctrl_c_on "sessions list" "complete" s
ctrl_c_on "results" "1 accuracy" s Enter
ctrl_c_on "results, curve view" "chance" s Enter 2
ctrl_c_on "results, confusion view" "rows: true category" s Enter 3
ctrl_c_on "export, path being edited" "Export session" s x Enter a b c
ctrl_c_on "help overlay" "Keys on" s "?"
ctrl_c_on "a yes/no question" "Replace what is there?" s x w w
ctrl_c_on "rig editor" "The observer's display" Enter e
ctrl_c_on "blocks screen with a session open" "not run" Enter Enter K02 Enter g
n=$(sqlite3 "$DB" "select count(*) from trials")
expect_eq "every stored trial is still there" "$before" "$n"
st=$(sqlite3 "$DB" "select status from sessions where subject = 'K02'")
expect_eq "the session left open by Ctrl-C is marked interrupted" interrupted "$st"

# SIGHUP (the experimenter's terminal closed) with a session open: the same clean way out.
tm_keys clear Enter
tm_console
tm_wait "Before anyone sits down" 20
for k in Enter Enter K03 Enter g; do tm_keys "$k"; sleep 0.3; done
expect_screen "SIGHUP: a session open on the blocks screen" "not run"
kill -HUP "$(tm_console_pid)"
expect_screen "SIGHUP ends the console" "console-exit=1" 20
tm_stty_same "SIGHUP: terminal modes restored"
st=$(sqlite3 "$DB" "select status from sessions where subject = 'K03'")
expect_eq "SIGHUP: the session left open is marked interrupted" interrupted "$st"
expect_eq "the database is intact" ok "$(sqlite3 "$DB" "pragma integrity_check")"
