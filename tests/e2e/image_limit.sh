# e2e image_limit — images over the size limit are refused from their header, before decoding,
# by check, run and the stimuli tools: a real 20000×20000 PNG (about 400 KB, 1.6 GB decoded) and
# a 100-byte PNG whose header claims 100000×100000, both generated here (tests/tools/bigpng.py).
. tests/e2e/lib.sh
PY=/usr/bin/python3
$PY "$ROOT/tests/tools/bigpng.py" real "$WORK/big.png" 20000 20000
$PY "$ROOT/tests/tools/bigpng.py" claim "$WORK/claim.png" 100000 100000
cp "$ROOT/assets-demo/img/ring_1_n0.png" "$WORK/ok.png"
cat >"$WORK/rig.ini" <<'RIG'
[screen]
width_cm = 53.0
height_cm = 30.0
width_px = 1920
height_px = 1080
distance_cm = 57.0
refresh_hz = 60
RIG
printf 'image,category,level,exemplar\nok.png,ring,0,1\nbig.png,bar,0,2\nclaim.png,cross,0,2\n' >"$WORK/list.csv"
mkproto "$WORK/p.ini" list.csv 2

# Wall time and peak memory are printed for the record, never asserted (a loaded machine is slow
# and ASan adds its own memory); what is asserted is the refusal and its message.
timed() { /usr/bin/time -f "%e s, %M KiB peak" -o "$WORK/time" "$@"; }
expect_exit "check refuses both images" 1 timed "$TACHIST" check "$WORK/p.ini" --rig "$WORK/rig.ini"
echo "# check: $(tail -n 1 "$WORK/time")"
check "the real big image is named at its row" grep -q "list.csv:3: error: image 'big.png': .*big.png is 20000x20000 px by its header, over the limit of 8192 px a side; not decoded" "$WORK/last.err"
check "the claiming image is named at its row" grep -q "list.csv:4: error: image 'claim.png': .*claim.png is 100000x100000 px by its header, over the limit of 8192 px a side" "$WORK/last.err"
check "the good image is not flagged" sh -c "! grep -q \"image 'ok.png'\" '$WORK/last.err'"

expect_exit "stimuli audit flags both as unreadable" 1 timed "$TACHIST" stimuli audit "$WORK/list.csv" --rig "$WORK/rig.ini"
echo "# audit: $(tail -n 1 "$WORK/time")"
check "audit names the claimed size" grep -q "list.csv:4: unreadable: .*100000x100000 px by its header" "$WORK/last.out"

mkdir -p "$WORK/tree/a"
cp "$WORK/big.png" "$WORK/claim.png" "$WORK/ok.png" "$WORK/tree/a/"
expect_exit "stimuli import skips both" 1 timed "$TACHIST" stimuli import "$WORK/tree" --out "$WORK/imp.csv"
echo "# import: $(tail -n 1 "$WORK/time")"
check "import says why" grep -q "claim.png: skipped: .*over the limit of 8192 px" "$WORK/last.out"
check "import keeps the good image" grep -q "ok.png" "$WORK/imp.csv"

# The limit is the rig's max_image_side: lowered below the good image (64 px), check refuses it.
cp "$WORK/rig.ini" "$WORK/small-rig.ini"
echo "max_image_side = 32" >>"$WORK/small-rig.ini"
printf 'image,category,level,exemplar\nok.png,ring,0,1\nok.png,bar,0,2\n' >"$WORK/ok.csv"
mkproto "$WORK/ok.ini" ok.csv 2
expect_exit "the good list passes check with the default limit" 0 "$TACHIST" check "$WORK/ok.ini" --rig "$WORK/rig.ini"
expect_exit "a rig's lower limit refuses it" 1 "$TACHIST" check "$WORK/ok.ini" --rig "$WORK/small-rig.ini"
check "the rig's limit is in the message" grep -q "over the limit of 32 px a side" "$WORK/last.err"
echo "max_image_side = 5" >"$WORK/bad-limit"
cat "$WORK/rig.ini" "$WORK/bad-limit" >"$WORK/bad-rig.ini"
expect_exit "a limit below 16 px is a rig error" 1 "$TACHIST" check "$WORK/ok.ini" --rig "$WORK/bad-rig.ini"
check "the rig names the key's range" grep -q "bad-rig.ini:8: error: max_image_side = 5 is out of range (16 to 65535 px)" "$WORK/last.err"

# run refuses the big image too (the model observer answers; no window).
cp "$WORK/list.csv" "$WORK/run.csv"
mkproto "$WORK/run.ini" run.csv 2
expect_exit "run refuses the list" 1 timed "$TACHIST" run "$WORK/run.ini" --subject s1 --db "$WORK/t.db" --rig "$WORK/rig.ini" --headless --observer model:seed=1
echo "# run: $(tail -n 1 "$WORK/time")"
check "run names the size" grep -q "20000x20000 px by its header\|100000x100000 px by its header" "$WORK/last.err"
