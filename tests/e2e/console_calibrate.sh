# e2e console_calibrate — the console's luminance screen: settings with bad values refused in
# place, readings typed for each code (letters refused, a falling reading warned about), stopping
# part-way writes nothing, and a full set of readings is fitted and saved into the rig profile
# with every other line kept. The readings follow L = 0.5 + 100 (code/255)^2.2 (invented display),
# so the fit must give gamma 2.2, L_min 0.5, L_max 100.5 (arithmetic; the fit itself is checked
# against scipy in e2e/calibrate).
. tests/e2e/lib.sh
. tests/e2e/console.inc

mkdir -p "$WORK/xdg"
{ echo "; our bench"; cat "$ROOT/assets-demo/rig.ini"; } >"$WORK/rig.ini"
cp "$WORK/rig.ini" "$WORK/rig.before"
tm_start 100 32 XDG_CONFIG_HOME="$WORK/xdg" LANG=C.UTF-8
tm_console "--rig $WORK/rig.ini"
expect_screen "console opens" "Before anyone sits down"
tm_keys Enter
expect_screen "set-up form opens" "New session"
expect_screen "the set-up form offers the luminance screen" "l luminance"
tm_keys l
expect_screen "l opens the luminance screen" "Luminance of the observer's display"
expect_screen "it names the rig profile the result goes to" "Rig profile  $WORK/rig.ini"

# Settings: steps out of range is refused in place; ascending order; no display.
tm_keys Enter C-u
tm_type "2"
tm_keys Enter
expect_screen "steps: 2 is out of range" "out of range: 3 to 256"
tm_keys C-u
tm_type "5"
tm_keys Enter
tm_keys Down Down Right
expect_screen "order: ascending" "ascending"
tm_keys Down Down Down
for i in 1 2 3; do
  tm_screen | grep -q "no display (headless" && break
  tm_keys Right
done
expect_screen "show on: no display" "no display (headless"

# A first try: a falling reading is warned about; Esc stops and writes nothing.
tm_keys g
expect_screen "g starts with the first code" "Reading 1 of 5: code 0, grey"
tm_type "5a"
expect_screen "a letter in a reading is refused" "'a' is not allowed"
tm_keys Enter
expect_screen "the second code follows" "Reading 2 of 5: code 64, grey"
tm_type "1"
tm_keys Enter
expect_screen "a reading below an earlier, lower code's is warned about" "the light should rise with the code"
tm_keys Escape
expect_screen "Esc stops and says nothing is written" "measuring stopped after 2 of 5 readings; the rig profile is not changed"
check "the rig profile is unchanged" cmp -s "$WORK/rig.ini" "$WORK/rig.before"

# The full measurement.
tm_keys g
expect_screen "measuring again starts over" "Reading 1 of 5: code 0, grey"
tm_keys Enter
expect_screen "an empty reading is refused" "type the reading in cd/m2"
for r in 0.500000 5.277575 22.451972 53.452322 100.500000; do
  tm_type "$r"
  tm_keys Enter
  sleep 0.2
done
expect_screen "the fit: gamma 2.2, L_min 0.5, L_max 100.5" "grey: gamma 2.200, L_min 0.5 cd/m2, L_max 100.5 cd/m2"
expect_screen "the residuals are listed per code" "191: 53.45"
tm_keys s
expect_screen "s saves into the rig profile" "luminance calibration saved to $WORK/rig.ini"
expect_screen "back on the set-up form" "New session"
check "the profile has a [luminance] section" grep -q '^\[luminance\]$' "$WORK/rig.ini"
g=$(sed -n 's/^gamma = //p' "$WORK/rig.ini")
expect_eq "its gamma is 2.2 to 6 digits" "2.20000" "$(printf '%.5f' "$g")"
expect_eq "five readings are kept" 5 "$(grep -c '^reading = ' "$WORK/rig.ini")"
check "the hand-written comment is kept" grep -q '^; our bench$' "$WORK/rig.ini"
expect_eq "the [screen] section is kept as it was" \
  "$(sed -n '/^\[screen\]/,/^\[/p' "$WORK/rig.before")" "$(sed -n '/^\[screen\]/,/^\[/p' "$WORK/rig.ini")"
expect_exit "tachist check reads the profile" 0 "$TACHIST" check "$ROOT/protocols/demo.ini" --rig "$WORK/rig.ini"
tm_keys C-c
expect_screen "Ctrl-C ends the console" "console-exit=1"
tm_stty_same "terminal modes restored"
