# e2e console_input — bad input at every prompt of the console (set-up form, rig editor): empty,
# too long, wrong characters, a path that does not exist, out of range. Each gets a message in
# place, and nothing typed before is lost (the text stays, Esc gives back the earlier value).
. tests/e2e/lib.sh
. tests/e2e/console.inc

mkdir -p "$WORK/xdg" "$WORK/afolder"
# A protocol with problems, to see FILE:LINE diagnostics in the set-up form's check.
cat > "$WORK/bad.ini" <<'INI'
[experiment]
name = bad
list = missing.csv
colour = red
INI

tm_start 100 30 XDG_CONFIG_HOME="$WORK/xdg" LANG=C.UTF-8
tm_console
expect_screen "console opens" "Before anyone sits down"
tm_keys Enter
expect_screen "set-up form opens" "New session"
expect_screen "the demo protocol is offered from protocols/" "protocols/demo.ini"
expect_screen "the demo protocol checks clean" "ready: 2 blocks"
expect_screen "pixels per degree and stimulus size are shown" "px/deg; stimulus 1.75 deg ="

# Subject ID (the form starts on it).
tm_keys Enter
tm_type "S-"
expect_screen "subject: a wrong character is refused with a message" "'-' is not allowed: letters and digits only"
tm_type "01"
expect_screen "subject: the message stays while typing goes on" "'-' is not allowed"
expect_screen "subject: what was typed is kept" "Subject ID    S01"
tm_keys C-u Enter
expect_screen "subject: empty is refused" "subject ID needs a value"
tm_type "$(printf 'a%.0s' $(seq 1 70))"
expect_screen "subject: too long is refused" "too long: at most 64 characters"
tm_keys Escape
expect_screen "subject: Esc gives back the value from before" "▸ Subject ID    (empty)"
tm_keys Enter
tm_type "P7x"
tm_keys Enter
expect_screen "subject: a good ID is taken" "Subject ID    P7x"

# Protocol path.
tm_keys Up Enter C-u
tm_type "$WORK/nothere.ini"
tm_keys Enter
expect_screen "protocol: a path that does not exist" "no such file: $WORK/nothere.ini"
tm_keys C-u
tm_type "$WORK/afolder"
tm_keys Enter
expect_screen "protocol: a folder is not a protocol" "that is a folder; name a file"
tm_keys C-u
tm_type "$WORK/bad.ini"
tm_keys Enter
expect_screen "protocol: problems are counted" "problems to fix before a session can start"
expect_screen "protocol: problems name FILE:LINE" "$WORK/bad.ini:4:"
tm_keys p
expect_screen "p lists every problem" "check problems"
tm_keys q
tm_keys g
expect_screen "g refuses a protocol with problems" "the check found problems"
tm_keys Right
expect_screen "Left/Right picks the demo protocol again" "ready: 2 blocks"

# Rig path and seed.
tm_keys Down Down Enter C-u
tm_type "$WORK/norig.ini"
tm_keys Enter
expect_screen "rig: a path that does not exist" "no such file: $WORK/norig.ini"
tm_keys Escape
tm_keys Down Enter C-u
tm_type "12x"
expect_screen "seed: a letter is refused" "'x' is not allowed: digits only"
tm_keys C-u Enter
expect_screen "seed: empty is refused" "seed needs a value"
tm_type "$(printf '9%.0s' $(seq 1 25))"
expect_screen "seed: too long is refused" "too long: at most 19 characters"
tm_keys Escape

# Rig editor.
tm_keys e
expect_screen "e opens the rig editor" "The observer's display"
expect_screen "rig editor: pixels per degree" "px per degree at the centre of the screen"
tm_keys Down Down Down Down Down Enter C-u
tm_type "5a"
expect_screen "rig editor: a letter in a number is refused" "'a' is not allowed: a number such as 57 or 57.5"
tm_keys C-u
tm_type "0.01"
tm_keys Enter
expect_screen "rig editor: out of range" "out of range: 0.1 to 10000"
tm_keys C-u
tm_type "114"
tm_keys Enter
expect_screen "rig editor: the stimulus in pixels follows the distance" "the protocol's stimulus of 1.75 deg is"
tm_keys Down Down Down Down Down Down Enter C-u
tm_type "$WORK/no/such/rig.ini"
tm_keys Enter
expect_screen "rig editor: saving into a folder that does not exist" "no such folder: $WORK/no/such"
tm_keys C-u
tm_type "$WORK/myrig.ini"
tm_keys Enter s
expect_screen "rig editor: saved and used" "rig saved to $WORK/myrig.ini"
expect_screen "the set-up form uses the saved rig" "Rig           $WORK/myrig.ini"
check "the saved rig sets the new distance" grep -q "distance_cm = 114" "$WORK/myrig.ini"
expect_exit "the saved rig passes tachist check" 0 "$TACHIST" check "$ROOT/protocols/demo.ini" --rig "$WORK/myrig.ini"

# Editing a profile again keeps what the form does not edit: a hand-written comment, a key the
# form has no row for, and the [luminance] section written by calibrate.
printf 'code,cd_m2\n0,0.4\n64,5.1\n128,21.5\n192,50.2\n255,92\n' >"$WORK/readings.csv"
"$TACHIST" calibrate --rig "$WORK/myrig.ini" --from "$WORK/readings.csv" >/dev/null 2>&1
sed -i 's/^\[screen\]$/[screen]\n; the bench by the window\nmax_image_side = 2048/' "$WORK/myrig.ini"
tm_keys e
expect_screen "the editor opens on the saved profile" "Save to         $WORK/myrig.ini"
tm_keys Down Down Down Down Down Enter C-u
tm_type "100"
tm_keys Enter s
expect_screen "saved back to the same profile" "rig saved to $WORK/myrig.ini"
check "the new distance is written" grep -q "^distance_cm = 100$" "$WORK/myrig.ini"
expect_eq "the old distance is gone" 0 "$(grep -c "distance_cm = 114" "$WORK/myrig.ini")"
check "the hand-written comment is kept" grep -q "^; the bench by the window$" "$WORK/myrig.ini"
check "a key the form has no row for is kept" grep -q "^max_image_side = 2048$" "$WORK/myrig.ini"
check "the [luminance] section is kept" grep -q "^gamma = " "$WORK/myrig.ini"
expect_exit "the profile still passes tachist check" 0 "$TACHIST" check "$ROOT/protocols/demo.ini" --rig "$WORK/myrig.ini"

tm_keys C-c
expect_screen "Ctrl-C on the set-up form ends the console" "console-exit=1"
tm_stty_same "terminal modes restored after Ctrl-C on the set-up form"
