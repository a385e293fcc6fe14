# e2e input_device — the rig's [input] response device: one that cannot be read as a keyboard is
# refused by `run` before any session, with the device named (never a quiet fall-back to SDL
# keys); `timing --keys` lists the devices or says there are none, and refuses the same device.
# (Kernel-stamped answers themselves are checked in test_evsrc, from recorded event streams.)
. tests/e2e/lib.sh
command -v sqlite3 >/dev/null || { echo "ok - input_device # SKIP sqlite3 not installed"; exit 0; }
mkproto "$WORK/p.ini" "$ROOT/assets-demo/stimuli.csv" 4
rig() { { cat tests/data/good/rig.ini; printf '[input]\ndevice = %s\n' "$1"; } >"$WORK/rig.ini"; }

rig /dev/null
check "check reads the rig with [input]" "$TACHIST" check "$WORK/p.ini" --rig "$WORK/rig.ini"
expect_exit "run refuses a device that is not an input device" 1 "$TACHIST" run "$WORK/p.ini" \
  --subject K01 --rig "$WORK/rig.ini" --db "$WORK/t.db" --headless
grep -q "/dev/null is not an input event device" "$WORK/last.err" && ok "the message names it" \
  || { notok "the message names it"; sed 's/^/#   /' "$WORK/last.err" | head -n 5; }
expect_eq "no session was begun" 0 "$(sqlite3 "$WORK/t.db" 'SELECT count(*) FROM sessions' 2>/dev/null || echo 0)"

rig "No Such Keyboard"
expect_exit "run refuses a device name nothing has" 1 "$TACHIST" run "$WORK/p.ini" \
  --subject K01 --rig "$WORK/rig.ini" --db "$WORK/t.db" --headless
grep -q "No Such Keyboard" "$WORK/last.err" && ok "the message names the device" \
  || { notok "the message names the device"; sed 's/^/#   /' "$WORK/last.err" | head -n 5; }

# The model observer needs no keyboard: the [input] device is not opened for it.
expect_exit "a model-observer run does not open the device" 0 "$TACHIST" run "$WORK/p.ini" \
  --subject K02 --rig "$WORK/rig.ini" --db "$WORK/t2.db" --headless --observer model:seed=2
expect_eq "its answers are stamped by the model" "model" \
  "$(sqlite3 "$WORK/t2.db" 'SELECT DISTINCT rt_clock FROM trials')"
expect_eq "no response device is recorded" "" \
  "$(sqlite3 "$WORK/t2.db" 'SELECT response_device FROM sessions')"

expect_exit "timing --keys without a device in the rig" 0 "$TACHIST" timing --keys --rig tests/data/good/rig.ini --headless
grep -q "^input devices" "$WORK/last.out" && ok "it lists the input devices (or says there are none)" \
  || { notok "it lists the input devices"; sed 's/^/#   /' "$WORK/last.out" | head -n 5; }
grep -q "names no response device" "$WORK/last.out" && ok "it says the rig names no device" \
  || notok "it says the rig names no device"
rig /dev/null
expect_exit "timing --keys refuses the rig's bad device" 1 "$TACHIST" timing --keys --rig "$WORK/rig.ini" --headless
grep -q "/dev/null" "$WORK/last.err" && ok "naming it" || notok "naming it"
