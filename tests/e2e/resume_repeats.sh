# e2e resume_repeats — timing-fault repeats owed by an interrupted run are shown on resume: inject
# dropped frames, interrupt (SIGINT) once a fault is stored in a block that repeats faults, resume,
# and every fault of that block is repeated exactly once, after the block's planned trials.
. tests/e2e/lib.sh
unset DISPLAY WAYLAND_DISPLAY
A=$ROOT/assets-demo
MODEL="model:shape=weibull,threshold=20,slope=-3,rt=300,seed=4"
q() { sqlite3 -cmd '.timeout 5000' "$1" "$2"; }
cat >"$WORK/p.ini" <<PROTO
[experiment]
name = repeats
list = $A/stimuli.csv
[categories]
ring = s
bar = d
cross = f
chevron = j
wedge = k
lattice = l
[timing]
fixation_ms = 50
blank_ms = 50
stimulus_ms = 50
mask_ms = 50
response_ms = 1500
feedback_ms = 50
iti_ms = 50
[display]
size_deg = 2
background = 128
mask = noise
[block test]
select = exemplar=2
repeat_faults = yes
PROTO
DB=$WORK/r.db
ARGS="--rig $A/rig.ini --headless --observer $MODEL --inject-drops 0.1"
faults="select count(*) from trials where timing_ok = 0 and repeat_of is null"
"$TACHIST" run "$WORK/p.ini" $ARGS --pace --seed 9 --subject R1 --db "$DB" >"$WORK/a.out" 2>&1 &
pid=$!
i=0
while [ $i -lt 300 ] && [ "$(q "$DB" "$faults" 2>/dev/null || echo 0)" = 0 ]; do
  sleep 0.1; i=$((i + 1))
done
kill -INT "$pid"; wait "$pid"
expect_eq "the run was interrupted" interrupted "$(q "$DB" 'select status from sessions')"
nf=$(q "$DB" "$faults")
check "a fault was stored before the interrupt ($nf)" test "$nf" -gt 0
expect_eq "its repeat was not shown yet" 0 "$(q "$DB" 'select count(*) from trials where repeat_of is not null')"
sid=$(q "$DB" 'select id from sessions')
expect_exit "resume exits 0" 0 "$TACHIST" run "$WORK/p.ini" $ARGS --resume "$sid" --db "$DB"
expect_eq "session complete" complete "$(q "$DB" 'select status from sessions')"
all=$(q "$DB" "$faults")
expect_eq "every fault repeated exactly once" "$all|$all|$all" \
  "$(q "$DB" "select count(*), count(distinct repeat_of), (select count(*) from trials f where f.timing_ok = 0 and f.repeat_of is null and exists (select 1 from trials r where r.repeat_of = f.trial)) from trials where repeat_of is not null")"
expect_eq "repeats show the faulted trial's image again" 0 \
  "$(q "$DB" 'select count(*) from trials r join trials f on f.trial = r.repeat_of where r.stim != f.stim')"
expect_eq "repeats come after every planned trial" 1 \
  "$(q "$DB" 'select min(trial) > (select max(trial) from trials where repeat_of is null) from trials where repeat_of is not null')"
