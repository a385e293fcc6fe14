# e2e observer_files — the files and words of [screens] are checked like every other key: a missing
# instructions file, one that is not UTF-8, a FIFO in its place, a font that is not there and an
# unknown legend word are errors of `check` with FILE:LINE, and valid files pass.
. tests/e2e/lib.sh
RIG=tests/data/good/rig.ini
mkproto "$WORK/p.ini" "$ROOT/assets-demo/stimuli.csv" 4
cp "$WORK/p.ini" "$WORK/base.ini"
with() { # with LINES...: the base protocol plus LINES, as $WORK/p.ini
  cp "$WORK/base.ini" "$WORK/p.ini"; for l in "$@"; do printf '%s\n' "$l" >>"$WORK/p.ini"; done
}
n=$(wc -l <"$WORK/base.ini")
printf 'Willkommen — bitte die Taste drücken.\n' >"$WORK/ok.txt"
printf 'bad \377\376 bytes\n' >"$WORK/latin.txt"
with "[screens]" "instructions = ok.txt" "legend = keys" "text_deg = 0.6"
expect_exit "valid [screens] passes check" 0 "$TACHIST" check "$WORK/p.ini" --rig "$RIG"
with "[screens]" "instructions = missing.txt"
expect_exit "a missing instructions file is an error" 1 "$TACHIST" check "$WORK/p.ini" --rig "$RIG"
grep -q "p.ini:$((n + 2)): error: cannot read the instructions file .*missing.txt" "$WORK/last.err" \
  && ok "named with FILE:LINE" || { notok "named with FILE:LINE"; sed 's/^/#   /' "$WORK/last.err"; }
with "[screens]" "instructions = latin.txt"
expect_exit "an instructions file that is not UTF-8 is an error" 1 "$TACHIST" check "$WORK/p.ini" --rig "$RIG"
grep -q "p.ini:$((n + 2)): error: instructions file .*latin.txt: it is not UTF-8 text" "$WORK/last.err" \
  && ok "says it is not UTF-8" || { notok "says it is not UTF-8"; sed 's/^/#   /' "$WORK/last.err"; }
if mkfifo "$WORK/fifo.txt" 2>/dev/null; then
  with "[screens]" "instructions = fifo.txt"
  expect_exit "a FIFO is refused without waiting on it" 1 timeout 20 "$TACHIST" check "$WORK/p.ini" --rig "$RIG"
else
  skip "a FIFO is refused without waiting on it" "mkfifo not allowed here"
fi
with "[screens]" "font = nofont.ttf"
expect_exit "a missing font file is an error" 1 "$TACHIST" check "$WORK/p.ini" --rig "$RIG"
with "[screens]" "legend = maybe"
expect_exit "an unknown legend word is an error" 1 "$TACHIST" check "$WORK/p.ini" --rig "$RIG"
grep -q "p.ini:$((n + 2)):" "$WORK/last.err" && ok "the legend line is named" || notok "the legend line is named"
# A block's own instructions file.
cp "$WORK/base.ini" "$WORK/p.ini"
sed -i 's/^\[block test\]$/[block test]\ninstructions = nothere.txt/' "$WORK/p.ini"
expect_exit "a block's missing instructions file is an error" 1 "$TACHIST" check "$WORK/p.ini" --rig "$RIG"
grep -q "nothere.txt" "$WORK/last.err" && ok "the block's file is named" || notok "the block's file is named"
