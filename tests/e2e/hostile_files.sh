# e2e hostile_files — inputs that are not regular files or are too big (things a corpus folder
# cannot hold): a named pipe as protocol, rig, list, image or mask image; a protocol over 1 MiB;
# a list over 64 MiB (sparse, so it costs no disk). `check` and `run` refuse each at once with
# exit 1 and a FILE[:LINE]: error message; none waits for a writer (each gets 20 s before it
# counts as hung; docs/limits.md promises an answer within 5 s, measured by `make soak`).
. tests/e2e/lib.sh
RIG=$ROOT/tests/data/good/rig.ini
G=$ROOT/tests/data/good
sed "s|^list = .*|list = $G/list.csv|" "$G/protocol.ini" >"$WORK/p.ini"
# The good list's image paths are relative to its folder.
expect_exit "the base protocol checks clean" 0 "$TACHIST" check "$WORK/p.ini" --rig "$RIG"

mkfifo "$WORK/fifo" || { skip "named pipes" "mkfifo failed"; exit 0; }

# refused NAME WANT ARGS...: check and run exit 1 within the time limit, with WANT in the message
refused() {
  name=$1; want=$2; shift 2
  for cmd in check run; do
    if [ "$cmd" = run ]; then extra="--subject s01 --db $WORK/t.db --headless --observer model:seed=1"; else extra=; fi
    # shellcheck disable=SC2086
    timeout 20 "$TACHIST" $cmd "$@" $extra >"$WORK/out" 2>"$WORK/err"; rc=$?
    if [ "$rc" = 1 ] && grep -q -- "$want" "$WORK/err" &&
       ! grep -Evq '^[^ ]+(:[0-9]+)?: (error|warning): |^[0-9]+ errors?, [0-9]+ warnings?$|^tachist: ' "$WORK/err"; then
      ok "$cmd refuses $name"
    else
      notok "$cmd refuses $name (exit $rc; 124 is a hang)"; sed 's/^/#   /' "$WORK/err" | head -n 5
    fi
  done
}

refused "a named pipe as protocol" "fifo: error: cannot read the file: it is a named pipe" "$WORK/fifo" --rig "$RIG"
refused "a named pipe as rig" "fifo: error: cannot read the file: it is a named pipe" "$WORK/p.ini" --rig "$WORK/fifo"
sed "s|^list = .*|list = $WORK/fifo|" "$G/protocol.ini" >"$WORK/pl.ini"
refused "a named pipe as list" "cannot read the stimulus list: it is a named pipe" "$WORK/pl.ini" --rig "$RIG"
cp "$G/list.csv" "$WORK/list.csv"
sed -i "s|\.\./\.\./\.\./|$ROOT/|g" "$WORK/list.csv"
echo "$WORK/fifo,bar,0," >>"$WORK/list.csv"
sed "s|^list = .*|list = $WORK/list.csv|" "$G/protocol.ini" >"$WORK/pi.ini"
refused "a named pipe as image" "list.csv:6: error: image '.*fifo': cannot open .*: it is a named pipe" "$WORK/pi.ini" --rig "$RIG"
sed "s|^mask = noise|mask = image\nmask_image = $WORK/fifo|" "$WORK/p.ini" >"$WORK/pm.ini"
refused "a named pipe as mask image" "mask_image: cannot open .*: it is a named pipe" "$WORK/pm.ini" --rig "$RIG"

# Over the size limits.
cp "$WORK/p.ini" "$WORK/big.ini"
awk 'BEGIN { for (i = 0; i < 7000; i++) printf "; %0150d\n", i }' >>"$WORK/big.ini"
refused "a protocol over 1 MiB" "big.ini: error: cannot read the file: it is over 1 MiB" "$WORK/big.ini" --rig "$RIG"
cp "$G/list.csv" "$WORK/huge.csv"
truncate -s 70M "$WORK/huge.csv"
sed "s|^list = .*|list = $WORK/huge.csv|" "$G/protocol.ini" >"$WORK/ph.ini"
refused "a list over 64 MiB" "huge.csv: error: cannot read the stimulus list: it is over 64 MiB" "$WORK/ph.ini" --rig "$RIG"
