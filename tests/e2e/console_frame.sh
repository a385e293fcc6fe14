# e2e console_frame — the console's frame in a real terminal (tmux): the first screen's cautions,
# the database and rig shown, help on every screen, the "too small" notice and recovery on resize,
# NO_COLOR, and the terminal restored after q and after Ctrl-C.
. tests/e2e/lib.sh
. tests/e2e/console.inc

expect_exit "console without a terminal refuses" 1 "$TACHIST" console --db "$DB" </dev/null
check "it says a terminal is needed" grep -q "needs a terminal" "$WORK/last.err"
expect_exit "console with a stray argument is a usage error" 2 "$TACHIST" console --frob

tm_start 100 30 XDG_CONFIG_HOME="$WORK/xdg" LANG=C.UTF-8
tm_console
expect_screen "first screen: cautions heading" "Before anyone sits down"
expect_screen "caution: photosensitive seizures" "seizures in people with photosensitive"
expect_screen "caution: ethics approval and consent" "ethics approval (IRB or ethics"
expect_screen "caution: the review board and local rules come first" "Your review board and local rules come"
expect_screen "caution: pseudonymous IDs" "Subject IDs are letters and digits only"
expect_screen "database in use is shown" "Database  $DB"
expect_screen "rig in use is shown, and the fallback named" "demo rig: describe your own display"
expect_screen "the way in" "Press Enter when you have read this"
expect_screen "key line lists the screen's keys" "Enter set up a session  s stored sessions"
expect_screen "key line ends with the back key: Esc leaves the first screen" "Esc leave  ? help"
expect_screen "key line ends with help" "? help"

tm_keys "?"
expect_screen "? opens the help overlay" 'Keys on "before you begin"'
expect_screen "help names Ctrl-C" "leave now; stored trials are kept"
tm_keys x
tm_wait "Press Enter when" 5
expect_no_screen "any key closes the help" 'Keys on "before you begin"'

$TM resize-window -t 0 -x 40 -y 12
expect_screen "40x12: says plainly it is too small" "This terminal is 40x12"
expect_screen "40x12: names the size it needs" "needs at least 80x24"
$TM resize-window -t 0 -x 100 -y 30
expect_screen "back to 100x30: the screen returns" "Before anyone sits down"
$TM resize-window -t 0 -x 80 -y 24
expect_screen "80x24 fits the first screen" "Press Enter when you have read this"
expect_no_screen "80x24 is not called too small" "too small"
expect_screen "80x24 still shows the key line" "Esc leave"
expect_screen "80x24: the database note is not cut" "(a new file; made when the first session starts)"
expect_screen "80x24: the rig note is not cut" "demo rig: describe your own display before real sessions"

# Colour: present by default, absent under NO_COLOR (no-color.org). Colour SGR codes are 30-37 and
# 40-47 (ECMA-48 section 8.3.117); capture-pane -e keeps them.
colours() { $TM capture-pane -t 0 -e -p | grep -cE '\[([0-9]+;)*(3[0-7]|4[0-7])(;[0-9]+)*m' ; }
n=$(colours)
check "colours are used by default" [ "$n" -gt 0 ]

tm_keys q
expect_screen "q leaves with exit 0" "console-exit=0"
tm_stty_same "terminal modes restored after q"

tm_keys "clear" Enter
tm_console "" NO_COLOR=1
expect_screen "NO_COLOR: the console opens" "Before anyone sits down"
n=$(colours)
expect_eq "NO_COLOR: no colour codes on the screen" 0 "$n"
tm_keys C-c
expect_screen "Ctrl-C on the first screen ends the console" "console-exit=1"
expect_screen "Ctrl-C says stored trials are kept" "stored trials are kept"
tm_stty_same "terminal modes restored after Ctrl-C"

# SIGTERM from outside: same clean way out.
tm_console
expect_screen "console opens again" "Before anyone sits down"
cpid=$(tm_console_pid)
check "the console's process is found" [ -n "$cpid" ]
kill -TERM "$cpid"
expect_screen "SIGTERM ends the console" "console-exit=1"
tm_stty_same "terminal modes restored after SIGTERM"

# The demo-rig fallback is told on the first screen, not printed before curses starts.
tm_console "2>\"$WORK/console.err\""
expect_screen "the fallback shows on the first screen" "demo rig: describe"
check "nothing was printed to the terminal before the screen" test ! -s "$WORK/console.err"
tm_keys C-c
expect_screen "and the console ends" "console-exit=1"
