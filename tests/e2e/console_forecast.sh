# e2e console_forecast — the forecast view of a finished session's results in the console (tmux):
# key f on the results screen takes the session as a pilot, simulates it on its own levels and
# shows the table of designs; its pilot fit is the one `tachist forecast --db` makes.
. tests/e2e/lib.sh
. tests/e2e/console.inc
unset DISPLAY WAYLAND_DISPLAY
FIX=$ROOT/${BUILD:-build/san}/tools/report_fixture
check "a finished session written" "$FIX" "$DB" --m 4 --levels 5 --per-level 20 --seed 3
tm_start 110 40
tm_console
expect_screen "console opens" "1 session stored"
tm_keys s
expect_screen "sessions list" "1 session"
tm_keys Enter
expect_screen "results" "1 accuracy"
expect_screen "the results screen names the forecast key" "forecast"
tm_keys f
expect_screen "the forecast view opens" "This session as a pilot: weibull fit of 398 trials" 120
expect_screen "its table" "width [5%, 95%]"
expect_screen "a row for 5 observers at double the trials" "   5      40     200"
expect_screen "the true threshold and span" "Threshold at pc 0.625"
expect_no_screen "no NaN on the screen" "nan"
tm_keys q
expect_screen "back on the results" "1 accuracy"
tm_keys q q q
expect_screen "quit" "console-exit=0"
tm_stty_same "terminal modes restored"
