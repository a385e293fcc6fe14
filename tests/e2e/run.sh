# e2e run — `tachist run`, `timing` and `demo` headless with the model observer: exact exposures,
# injected drops and their repeats, reproducible plans, SIGINT and --resume, refusals (changed
# protocol, missing or corrupt image, a display smaller than the stimulus), the timing report.
. tests/e2e/lib.sh
unset DISPLAY WAYLAND_DISPLAY
A=$ROOT/assets-demo
MODEL="model:shape=weibull,threshold=20,slope=-3,rt=500,seed=4"
q() { sqlite3 "$1" "$2"; }

cat >"$WORK/rig.ini" <<RIG
[screen]
width_cm = 53
height_cm = 30
width_px = 640
height_px = 360
distance_cm = 57
refresh_hz = 60
[marker]
corner = top-left
size_px = 20
RIG

P=$WORK/p.ini
mkproto "$P" "$A/stimuli.csv" 2

# 1. A complete run: every exposure exact, one summary line per block.
expect_exit "headless run exits 0" 0 "$TACHIST" run "$P" --subject S01 --db "$WORK/a.db" \
  --rig "$WORK/rig.ini" --headless --observer "$MODEL" --seed 11
expect_eq "one summary line per block" 2 "$(grep -c '^block [12] ' "$WORK/last.out")"
check "summary names accuracy and timing faults" grep -q 'accuracy .*timing faults 0' "$WORK/last.out"
expect_eq "30 trials stored" 30 "$(q "$WORK/a.db" 'select count(*) from trials')"
expect_eq "every exposure is the planned 3 frames (50 ms at 60 Hz)" "30|30|30" \
  "$(q "$WORK/a.db" 'select sum(frames_actual=3), sum(frames_planned=3), sum(timing_ok) from trials')"
expect_eq "session complete, simulated timing" "complete|simulated" \
  "$(q "$WORK/a.db" 'select status, timing_mode from sessions')"
expect_eq "refresh measured and stored" "60.0" "$(q "$WORK/a.db" 'select round(refresh_hz,1) from sessions')"
expect_eq "practice trials first, then the test block" "6|24" \
  "$(q "$WORK/a.db" 'select sum(block=0), sum(block=1) from trials')"
expect_eq "onset to offset is 3 periods" 30 \
  "$(q "$WORK/a.db" 'select count(*) from trials where offset_ns-onset_ns between 49999990 and 50000010')"

# 2. The same seed gives the same plan.
"$TACHIST" run "$P" --subject S01 --db "$WORK/b.db" --rig "$WORK/rig.ini" --headless \
  --observer "$MODEL" --seed 11 >/dev/null 2>&1
expect_eq "same seed, same trial order" "$(q "$WORK/a.db" 'select group_concat(stim) from trials')" \
  "$(q "$WORK/b.db" 'select group_concat(stim) from trials')"

# 3. Injected drops: flagged trials exist; in the test block each flagged planned trial is shown
#    again at the block's end (repeat_of names it).
expect_exit "run with injected drops exits 0" 0 "$TACHIST" run "$P" --subject S01 --db "$WORK/c.db" \
  --rig "$WORK/rig.ini" --headless --observer "$MODEL" --seed 11 --inject-drops 0.03
flag=$(q "$WORK/c.db" 'select count(*) from trials where block=1 and timing_ok=0 and repeat_of is null or (block=1 and timing_ok=0 and repeat_of<0)')
rep=$(q "$WORK/c.db" 'select count(*) from trials where block=1 and repeat_of>=0')
check "some trials flagged under injected drops" test "$flag" -gt 0
expect_eq "each flagged test trial repeated once" "$flag" "$rep"
expect_eq "a flagged trial's exposure differs from plan or a frame was lost in it" 0 \
  "$(q "$WORK/c.db" 'select count(*) from trials where timing_ok=0 and frames_actual=frames_planned and dropped_frames=0')"

# 4. SIGINT mid-session, then --resume: contiguous trials, and the finished session holds the
#    same trial order as the uninterrupted run with the same seed.
"$TACHIST" run "$P" --subject S01 --db "$WORK/d.db" --rig "$WORK/rig.ini" --headless --pace \
  --observer "$MODEL" --seed 11 >"$WORK/d.out" 2>"$WORK/d.err" &
pid=$!
sleep 5
kill -INT $pid
wait $pid; rc=$?
expect_eq "interrupted run exits 1" 1 "$rc"
check "interrupt message says how to go on" grep -q -- '--resume' "$WORK/d.err"
expect_eq "session marked interrupted" interrupted "$(q "$WORK/d.db" 'select status from sessions')"
n=$(q "$WORK/d.db" 'select count(*) from trials')
check "some but not all trials stored before the interrupt" test "$n" -gt 0 -a "$n" -lt 30
expect_eq "stored trials are contiguous" "$n|$((n - 1))" "$(q "$WORK/d.db" 'select count(*), max(trial) from trials')"
sid=$(q "$WORK/d.db" 'select id from sessions')
expect_exit "--resume exits 0" 0 "$TACHIST" run "$P" --resume "$(echo "$sid" | cut -c1-8)" \
  --db "$WORK/d.db" --headless --observer "$MODEL"
expect_eq "resumed session complete" complete "$(q "$WORK/d.db" 'select status from sessions')"
expect_eq "resumed order equals the uninterrupted one" \
  "$(q "$WORK/a.db" 'select group_concat(stim) from (select stim from trials order by trial)')" \
  "$(q "$WORK/d.db" 'select group_concat(stim) from (select stim from trials order by trial)')"
expect_eq "resume recorded as an event" 1 "$(q "$WORK/d.db" "select count(*) from events where kind='resume'")"

# 5. A changed protocol refuses the resume.
"$TACHIST" run "$P" --subject S01 --db "$WORK/e.db" --rig "$WORK/rig.ini" --headless --pace \
  --observer "$MODEL" --seed 3 >/dev/null 2>&1 &
pid=$!; sleep 3; kill -TERM $pid; wait $pid
echo "; edited after the session began" >>"$P"
expect_exit "resume after a protocol edit refused" 1 "$TACHIST" run "$P" --resume \
  "$(q "$WORK/e.db" 'select id from sessions')" --db "$WORK/e.db" --headless --observer "$MODEL"
check "refusal names the protocol change" grep -q 'changed since session' "$WORK/last.err"
expect_eq "a refused resume leaves the session interrupted" interrupted "$(q "$WORK/e.db" 'select status from sessions')"
mkproto "$P" "$A/stimuli.csv" 2

# 6. An image missing at start: refused with check's LIST:LINE message, no session created.
mkdir -p "$WORK/set"
cp -r "$A/img" "$A/stimuli.csv" "$WORK/set/"
mkproto "$WORK/q.ini" "$WORK/set/stimuli.csv" 2
rm "$WORK/set/img/ring_2_n8.png"
expect_exit "missing image refuses the run" 1 "$TACHIST" run "$WORK/q.ini" --subject S01 \
  --db "$WORK/f.db" --rig "$WORK/rig.ini" --headless --observer "$MODEL"
check "missing image named with LIST:LINE" grep -q "stimuli.csv:[0-9]*: error: image 'img/ring_2_n8.png': " "$WORK/last.err"
expect_eq "no session begun" 0 "$(q "$WORK/f.db" 'select count(*) from sessions' 2>/dev/null || echo 0)"

# 7. An image that turns unreadable during the session (spoilt once the first trial is stored;
#    the session's last image, far beyond the look-ahead): the block stops with a clear message,
#    the trials before stay, the session is aborted.
cp "$A/img/ring_2_n8.png" "$WORK/set/img/ring_2_n8.png"
late=$(q "$WORK/a.db" "select image from trials order by trial desc limit 1")
pos=$(q "$WORK/a.db" "select min(trial) from trials where image='$late'")
"$TACHIST" run "$WORK/q.ini" --subject S01 --db "$WORK/g.db" --rig "$WORK/rig.ini" --headless \
  --pace --observer "$MODEL" --seed 11 >"$WORK/g.out" 2>"$WORK/g.err" &
pid=$!
i=0
while [ $i -lt 1200 ]; do
  n=$( [ -f "$WORK/g.db" ] && q "$WORK/g.db" 'select count(*) from trials' 2>/dev/null)
  [ "${n:-0}" -ge 1 ] && break
  sleep 0.1; i=$((i + 1))
done
echo "not a picture any more" >"$WORK/set/$late"
wait $pid; rc=$?
expect_eq "corrupt image stops the run" 1 "$rc"
check "message names the image and says trials are kept" grep -q "image $late cannot be read now.*every trial before it is kept" "$WORK/g.err"
expect_eq "session aborted" aborted "$(q "$WORK/g.db" 'select status from sessions')"
expect_eq "every trial before the bad image stored" "$pos" "$(q "$WORK/g.db" 'select count(*) from trials')"

# 8. A display smaller than the stimulus refuses to start (a real X display, 200x150 px).
mkproto "$WORK/big.ini" "$A/stimuli.csv" 14
if command -v xvfb-run >/dev/null; then
  # xvfb-run keeps its authority file under $TMPDIR and fails when that path has a space.
  expect_exit "display smaller than the stimulus refuses" 1 env TMPDIR=/tmp xvfb-run -a -s "-screen 0 200x150x24" \
    env SDL_VIDEODRIVER=x11 "$TACHIST" run "$WORK/big.ini" --subject S01 --db "$WORK/h.db" \
    --rig "$WORK/rig.ini" --observer "$MODEL"
  check "refusal gives both sizes" grep -q 'stimulus needs 1[0-9][0-9]×1[0-9][0-9] px but the display offers 200×150 px' "$WORK/last.err"
else
  notok "xvfb-run not installed"
fi

# 9. No display and no --headless: refused (SDL's offscreen driver has no refresh to lock to).
expect_exit "run without a display refuses" 1 env SDL_VIDEODRIVER=offscreen "$TACHIST" run "$P" \
  --subject S01 --db "$WORK/j.db" --rig "$WORK/rig.ini" --observer "$MODEL"
check "it says to use --headless" grep -q 'no display to show stimuli on.*--headless' "$WORK/last.err"
expect_exit "timing without a display refuses" 1 env SDL_VIDEODRIVER=offscreen "$TACHIST" timing --rig "$WORK/rig.ini"

# 10. Bad options.
expect_exit "bad subject" 1 "$TACHIST" run "$P" --subject "S 01" --db "$WORK/i.db" --rig "$WORK/rig.ini" --headless
expect_exit "bad model spec" 1 "$TACHIST" run "$P" --subject S01 --db "$WORK/i.db" --rig "$WORK/rig.ini" --headless --observer "model:shape=cubic"
check "model spec message" grep -q "shape 'cubic'" "$WORK/last.err"
expect_exit "--inject-drops needs --headless" 2 "$TACHIST" run "$P" --subject S01 --inject-drops 0.1
expect_exit "run without a subject" 2 "$TACHIST" run "$P"

# 11. timing, headless: exact 60 Hz from the virtual clock, a histogram.
expect_exit "timing --headless exits 0" 0 "$TACHIST" timing --headless --rig "$WORK/rig.ini" --frames 200
check "timing estimates 60 Hz" grep -q 'estimated rate: 60.000 Hz' "$WORK/last.out"
check "timing prints a histogram" grep -q '^ *16\.[0-9]*- *16\.[0-9]* *199 #' "$WORK/last.out"
check "timing --headless says nothing about time inside present" sh -c "! grep -qi 'present' '$WORK/last.out'"
