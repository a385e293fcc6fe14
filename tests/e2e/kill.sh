# e2e kill — `kill -9` a headless session with the model observer at random moments (20 runs,
# the moments drawn from a fixed awk seed). After each kill: PRAGMA integrity_check is ok, the
# stored trial indices are contiguous from 0, every trial another process saw committed just
# before the kill is still there unchanged, and `run --resume` finishes the session with the
# same trial order (block, trial in block, image, category, level) as an uninterrupted run with
# the same seed. Every fourth resume is killed too and resumed again.
. tests/e2e/lib.sh
RUNS=${KILL_RUNS:-20}
RIG=$ROOT/assets-demo/rig.ini
# A short version of the demo protocol: 12 practice and 24 main trials, short epochs.
sed -e "s|^list = .*|list = $ROOT/assets-demo/stimuli.csv|" -e 's/^break_every.*//' \
    -e 's/^fixation_ms = .*/fixation_ms = 100/; s/^blank_ms = .*/blank_ms = 50/' \
    -e 's/^feedback_ms = .*/feedback_ms = 100/; s/^iti_ms = .*/iti_ms = 100/' \
    -e 's/^select = exemplar=.*/select = exemplar=3/; s/^repeat_faults = yes/repeat_faults = no/' \
    protocols/demo.ini >"$WORK/k.ini"
ARGS="--rig $RIG --headless --observer model:seed=3 --seed 7"
run() { "$TACHIST" run "$WORK/k.ini" $ARGS "$@"; }
# Readers wait for the writer's lock instead of failing at once.
sq() { sqlite3 -cmd '.timeout 5000' "$@"; }
order() { sq "$1" "SELECT trial, block, block_trial, image, category, level FROM trials ORDER BY trial"; }

t0=$(date +%s%N)
run --subject REF --db "$WORK/ref.db" >"$WORK/ref.out" 2>&1
expect_eq "uninterrupted reference run completes" 0 $?
t1=$(date +%s%N)
ms=$(( (t1 - t0) / 1000000 ))
order "$WORK/ref.db" >"$WORK/ref.order"
total=$(wc -l <"$WORK/ref.order")
check "reference run stored its trials" test "$total" -gt 20
echo "# reference run: $total trials in $ms ms"

# Kill moments: uniform in 5%..80% of the reference run's duration, seeded (awk srand(2026)).
awk -v n="$RUNS" -v ms="$ms" 'BEGIN { srand(2026); for (i = 0; i < n; i++) printf "%.3f\n", (0.05 + 0.75 * rand()) * ms / 1000 }' >"$WORK/moments"
i=0; mid=0
while read -r delay; do
  i=$((i + 1)); db=$WORK/k$i.db
  "$TACHIST" run "$WORK/k.ini" $ARGS --subject K$i --db "$db" >"$WORK/k$i.out" 2>&1 &
  pid=$!
  sleep "$delay"
  # What another process sees committed right before the kill.
  seen=$(sq "$db" "SELECT trial, image, rt_ms, onset_ns FROM trials ORDER BY trial" 2>/dev/null)
  nseen=$(printf '%s' "$seen" | grep -c .)
  kill -9 "$pid" 2>/dev/null; wait "$pid" 2>/dev/null
  sid=$(sq "$db" "SELECT id FROM sessions" 2>/dev/null)
  if [ -z "$sid" ]; then
    ok "run $i: killed at ${delay}s before its session began (nothing to resume)"
    continue
  fi
  expect_eq "run $i: integrity_check after kill -9 at ${delay}s" ok "$(sq "$db" 'PRAGMA integrity_check')"
  expect_eq "run $i: trial indices contiguous" "$(sq "$db" 'SELECT count(*) FROM trials')" "$(sq "$db" 'SELECT coalesce(max(trial) + 1, 0) FROM trials')"
  after=$(sq "$db" "SELECT trial, image, rt_ms, onset_ns FROM trials WHERE trial < $nseen ORDER BY trial")
  expect_eq "run $i: the $nseen trials seen committed are all there, unchanged" "$seen" "$after"
  n=$(sq "$db" 'SELECT count(*) FROM trials')
  [ "$n" -gt 0 ] && [ "$n" -lt "$total" ] && mid=$((mid + 1))
  if [ $((i % 4)) = 0 ] && [ "$n" -lt "$total" ]; then
    "$TACHIST" run "$WORK/k.ini" $ARGS --db "$db" --resume "$sid" >"$WORK/k$i.r1" 2>&1 &
    pid=$!
    sleep "$(awk -v d="$delay" 'BEGIN { printf "%.3f", d / 2 }')"
    kill -9 "$pid" 2>/dev/null; wait "$pid" 2>/dev/null
    expect_eq "run $i: integrity_check after killing the resume too" ok "$(sq "$db" 'PRAGMA integrity_check')"
  fi
  if [ "$(sq "$db" 'SELECT status FROM sessions')" = complete ]; then
    # The killed resume had already finished the session.
    expect_eq "run $i: the killed resume had stored every trial" "$total" "$(sq "$db" 'SELECT count(*) FROM trials')"
  else
    run --db "$db" --resume "$sid" >"$WORK/k$i.r2" 2>&1
    rc=$?
    expect_eq "run $i: --resume finishes ($n trials stored before)" 0 "$rc"
    [ "$rc" = 0 ] || sed 's/^/#   /' "$WORK/k$i.r2" | tail -n 5
    expect_eq "run $i: session complete after resume" complete "$(sq "$db" 'SELECT status FROM sessions')"
  fi
  order "$db" >"$WORK/k$i.order"
  check "run $i: trial order equals the uninterrupted run's" cmp -s "$WORK/ref.order" "$WORK/k$i.order"
done <"$WORK/moments"
check "most kills landed mid-session ($mid of $RUNS)" test "$mid" -ge $((RUNS / 2))
