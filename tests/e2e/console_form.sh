# e2e console_form — the set-up form in an 80x24 terminal keeps what is typed: typing, editing in
# the middle, Esc while editing (the earlier value back), moving between fields, Esc to put a
# message away, leaving the form and coming back (after "save and use" in the rig editor too), a
# value longer than its field; warnings are counted and listed with long lines wrapped, not cut;
# the key line never drops keys silently; no display is told in the console's words; and resuming
# a session shows the rig stored with it and the check computed from that rig; names cut to
# their columns at 80 columns are shown whole at 110.
. tests/e2e/lib.sh
. tests/e2e/console.inc

command -v sqlite3 >/dev/null 2>&1 || { echo "not ok - sqlite3 is installed"; exit 1; }
mkdir -p "$WORK/xdg"
# Waits up to 10 s until TEXT is no longer on the screen.
tm_wait_gone() {
  i=0
  while [ $i -lt 100 ] && tm_screen | grep -qF -- "$1"; do sleep 0.1; i=$((i + 1)); done
}
LIST="$ROOT/assets-demo/stimuli.csv"
mkproto "$WORK/mine.ini" "$LIST" 1.75
mkproto "$WORK/up.ini" "$LIST" 5
# A protocol whose path (relative to the pane's folder, $WORK) is wider than the field.
LONGREL=a-folder-with-a-rather-long-name-for-one-study/and-another-level-below-it/protocol-with-a-long-name.ini
mkdir -p "$WORK/${LONGREL%/*}"
mkproto "$WORK/$LONGREL" "$LIST" 1.5

# A session to resume, run on a rig of its own (120 Hz, 80 cm) and stopped after its first trial;
# its protocol and first block have names longer than their columns at 80 columns.
sed -e 's/^name = e2e/name = orientation-pilot-long-name/' \
  -e 's/^\[block warm\]/[block warm-up-with-clean-images]/' "$WORK/mine.ini" > "$WORK/named.ini"
sed -e 's/^refresh_hz = .*/refresh_hz = 120/' -e 's/^distance_cm = .*/distance_cm = 80/' \
  -e 's/^name = .*/name = fast-lab/' "$ROOT/assets-demo/rig.ini" > "$WORK/rig120.ini"
"$TACHIST" run "$WORK/named.ini" --subject R01 --db "$DB" --rig "$WORK/rig120.ini" --headless --pace \
  --observer model:seed=1 > "$WORK/run.out" 2>&1 &
runpid=$!
i=0
while [ $i -lt 300 ]; do
  n=$(sqlite3 "$DB" "select count(*) from trials" 2>/dev/null)
  [ "${n:-0}" -ge 1 ] && break
  sleep 0.1; i=$((i + 1))
done
kill -INT $runpid 2>/dev/null
wait $runpid
st=$(sqlite3 "$DB" "select status from sessions")
expect_eq "the session to resume was interrupted after its first trial" interrupted "$st"
sid=$(sqlite3 "$DB" "select substr(id, 1, 8) from sessions")

tm_start 80 24 XDG_CONFIG_HOME="$WORK/xdg" LANG=C.UTF-8 DISPLAY= WAYLAND_DISPLAY=
tm_console
expect_screen "console opens at 80x24" "Before anyone sits down"
tm_keys Enter
expect_screen "set-up form opens" "New session"

# The key line at 80 columns: keys that do not fit are announced, and the overlay lists them all.
expect_screen "80x24: the key line says there are more keys" "? more keys"
expect_screen "80x24: the back key is on the key line" "Esc back"
tm_keys "?"
expect_screen "? lists the form's keys" 'Keys on "set up a session"'
expect_screen "the overlay lists the key the line had no room for" "Left/Right"
tm_keys Escape
expect_screen "the overlay closes" "? more keys"

# Subject ID (the form starts on it): type, move away and back, edit in the middle, Esc.
tm_keys Enter
tm_type "S01"
tm_keys Enter
expect_screen "subject typed" "Subject ID    S01"
tm_keys Down Down Down Up Up Up
expect_screen "moving between fields keeps the subject" "▸ Subject ID    S01"
tm_keys Enter Home
tm_type "P"
tm_keys Enter
expect_screen "a letter typed at the start of the value" "Subject ID    PS01"
tm_keys Enter C-u
tm_type "Q9"
expect_screen "a new value while editing" "Q9"
tm_keys Escape
expect_screen "Esc while editing gives back the value from before" "Subject ID    PS01"

# Protocol: typed, checked; Esc puts the "no problems" message away and keeps the path.
tm_keys Up Enter C-u
tm_type "mine.ini"
tm_keys Enter
expect_screen "the typed protocol checks clean (6 + 24 trials)" "ready: 2 blocks, 30 trials"
expect_no_screen "no warning for a protocol at native size" "warning"
tm_keys p
expect_screen "p with nothing to list says so" "no problems to show"
tm_keys Escape
tm_wait_gone "no problems to show"
expect_no_screen "Esc puts the message away" "no problems to show"
expect_screen "and the form stays, with the protocol typed" "Protocol      mine.ini"
expect_screen "and the subject typed" "Subject ID    PS01"

# Leaving the form and coming back keeps every field.
tm_keys Escape
expect_screen "Esc leaves the form" "Before anyone sits down"
tm_keys Enter
expect_screen "back on the form: the protocol is kept" "Protocol      mine.ini"
expect_screen "back on the form: the subject is kept" "Subject ID    PS01"

# The rig editor's "save and use": named, saved, used, and kept after Esc and after leaving.
tm_keys e
expect_screen "e opens the rig editor" "The observer's display"
tm_keys Enter C-u
tm_type "labrig1"
tm_keys Enter Down Down Down Down Down Down Down Down Down Down Down Enter C-u
tm_type "myrig.ini"
tm_keys Enter s
expect_screen "the rig is saved and used" "Rig           myrig.ini"
check "the saved rig carries the name typed" grep -q "^name = labrig1" "$WORK/myrig.ini"
tm_keys p
expect_screen "no problems with the saved rig" "no problems to show"
tm_keys Escape Escape
expect_screen "Esc after save and use leaves the form" "Before anyone sits down"
tm_keys Enter
expect_screen "back on the form: the saved rig is still the one in use" "Rig           myrig.ini"
expect_no_screen "the demo rig did not come back" "assets-demo/rig.ini"

# A value longer than its field: while editing the end is in view; after, the value is shown
# shortened with a mark (a path keeps its file's name), and the whole of it is used.
tm_keys Up Enter C-u
tm_type "$LONGREL"
expect_screen "editing a long value shows its end" "protocol-with-a-long-name.ini"
tm_keys Enter
expect_screen "the long path is used whole: its protocol is checked" "stimulus 1.50 deg"
expect_screen "a long path is shown with a mark where it is shortened" "…"
expect_screen "and keeps the file's name in view" "protocol-with-a-long-name.ini"
expect_no_screen "its start is left out" "a-folder-with-a-rather"
tm_keys Enter Home
expect_screen "Home while editing shows the start" "a-folder-with-a-rather"
tm_keys Escape
expect_screen "Esc keeps the long value" "protocol-with-a-long-name.ini"

# Warnings are counted on the form and listed under p, each long line wrapped whole.
tm_keys Enter C-u
tm_type "up.ini"
tm_keys Enter
expect_screen "the scale-up warning is counted on the form" "1 warning: p lists it"
"$TACHIST" check "$WORK/up.ini" --rig "$WORK/myrig.ini" > /dev/null 2> "$WORK/up.err"
warn=$(grep 'scaled up' "$WORK/up.err")
check "tachist check warns that images are scaled up" test -n "$warn"
check "the warning is wider than the 80-column screen (${#warn} characters)" [ "${#warn}" -gt 76 ]
# The factor: the stimulus in pixels (calc) over the images' native side (the PNG header's width,
# bytes 16-19 big-endian, PNG specification section 11.2.2); the demo images are square.
px=$("$TACHIST" calc pixels --deg 5 --rig "$WORK/myrig.ini" --json | sed -n 's/.*"pixels":[[:space:]]*\([0-9]*\).*/\1/p')
png=$(sed -n 2p "$LIST" | cut -d, -f1)
side=$(od -An -tu1 -j16 -N4 "$ROOT/assets-demo/$png" | awk '{print $1*16777216 + $2*65536 + $3*256 + $4}')
factor=$(awk -v p="$px" -v s="$side" 'BEGIN { printf "%.2fx", p / s }')
tm_keys p
expect_screen "p lists the warning" "check problems"
expect_screen "the listed warning has the factor $px px / $side px = $factor" "$factor"
last=${warn##* }
expect_screen "the warning's last word ($last) is on screen: wrapped, not cut" "$last"
tm_keys Escape

# No display here: the console says so in its own words, with no command-line flag.
tm_keys Down Down Down Down
expect_screen "on the display row" "▸ Display"
# Right steps through the four choices; each step waits (at most 3 s) for full screen to show.
for _ in 1 2 3 4; do
  tm_screen | grep -qF "full screen on the observer's display" && break
  tm_keys Right
  tm_wait "full screen on the observer's display" 3 >/dev/null
done
tm_keys g
expect_screen "no display is told in the console's words" "no display here to show stimuli on"
expect_screen "the whole message is shown at 80 columns (wrapped)" "simulated timing"
expect_no_screen "and names no command-line flag" "--headless"
tm_keys Escape Escape
expect_screen "back to the first screen" "Before anyone sits down"

# Resume: the form shows the rig stored with the session and checks with it.
hz_frames=$(awk 'BEGIN { printf "%d", 50 * 120 / 1000 }')   # stimulus_ms 50 at 120 Hz
spx=$("$TACHIST" calc pixels --deg 1.75 --rig "$WORK/rig120.ini" --json | sed -n 's/.*"pixels":[[:space:]]*\([0-9]*\).*/\1/p')
tm_keys s
expect_screen "the session to resume is listed" "interrupted"
# Names cut to their column at 80 columns are shown whole when the terminal is wider.
$TM resize-window -t 0 -x 110 -y 30
expect_screen "110 columns: the protocol's whole name in the sessions list" "orientation-pilot-long-name"
$TM resize-window -t 0 -x 80 -y 24
expect_screen "back at 80 columns" "? more keys"
tm_keys u
expect_screen "resume opens the form for it" "Resume session $sid"
expect_screen "the rig is the stored one" "(stored with session $sid)"
expect_screen "its display: 80 cm away, 120 Hz" "80 cm away, 120 Hz"
expect_screen "the check sizes the stimulus on the stored rig ($spx px, from calc)" "stimulus 1.75 deg = $spx px"
expect_screen "the check counts frames at 120 Hz ($hz_frames frames of 50 ms)" "frames: stimulus $hz_frames = 50.0 ms"
expect_no_screen "the demo rig's 60 Hz is not shown" "60 Hz"

# Open it: the blocks screen names the block whole at 110 columns.
tm_keys g
expect_screen "the resumed session opens" "1 of 6 stored"
$TM resize-window -t 0 -x 110 -y 30
expect_screen "110 columns: the block's whole name on the blocks screen" "warm-up-with-clean-images"
$TM resize-window -t 0 -x 80 -y 24
tm_keys c
expect_screen "closing asks first" "Close this session?"
tm_keys y
expect_screen "the session closes" "Session closed."
tm_keys Escape Escape Escape
expect_screen "after closing, back to the first screen" "Before anyone sits down"
tm_keys Escape
expect_screen "the console leaves" "console-exit=0"
tm_stty_same "the terminal is as it was"
