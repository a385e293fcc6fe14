# e2e adaptive_run — adaptive blocks in a headless `tachist run` with the model observer: levels
# snapped to the list's levels on the log axis, the up-down rule re-derived independently from the
# stored answers, staircases stopped by their reversal count, the same seed giving the same
# session, and kill -9 mid-staircase followed by --resume continuing exactly as the uninterrupted
# session did.
. tests/e2e/lib.sh
unset DISPLAY WAYLAND_DISPLAY
A=$ROOT/assets-demo
PY=/usr/bin/python3
MODEL="model:shape=weibull,threshold=16,slope=-3,lapse=0.02,rt=150,seed=9"
q() { sqlite3 "$1" "$2"; }

cat >"$WORK/rig.ini" <<RIG
[screen]
width_cm = 53
height_cm = 30
width_px = 640
height_px = 360
distance_cm = 57
refresh_hz = 60
RIG

P=$WORK/adapt.ini
cat >"$P" <<PROTO
[experiment]
name = adaptive-e2e
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
stimulus_ms = 50
response_ms = 1500
feedback_ms = 0
iti_ms = 50
[display]
size_deg = 2
[block stairs]
select = level=8,16,32
adaptive = pair
[block bayes]
select = level=8,16,32
adaptive = q
[adaptive pair]
rule = updown
easier = lower
start = 8, 32
down = 2
step = 0.1
reversals = 5
average_last = 4
trials = 25
[adaptive q]
rule = quest
easier = lower
prior_mean = 10, 25
prior_sd = 0.3
trials = 10
PROTO

run() { # DB [extra args...]
  db=$1; shift
  "$TACHIST" run "$P" --subject S07 --db "$db" --rig "$WORK/rig.ini" --headless \
    --observer "$MODEL" --seed 21 "$@"
}
SEQ="select group_concat(block||':'||block_trial||':'||staircase||':'||stim||':'||level||':'||level_requested||':'||correct, ' ') from (select * from trials order by trial)"

# 1. An uninterrupted session.
expect_exit "adaptive run exits 0" 0 run "$WORK/a.db"
expect_eq "session complete" complete "$(q "$WORK/a.db" 'select status from sessions')"
expect_eq "every trial has its staircase and requested level" 0 \
  "$(q "$WORK/a.db" 'select count(*) from trials where staircase is null or level_requested is null')"
expect_eq "two staircases (0 and 1) in each block" "0|0|1|2 1|0|1|2" \
  "$(q "$WORK/a.db" 'select block, min(staircase), max(staircase), count(distinct staircase) from trials group by block' | tr '\n' ' ' | sed 's/ $//')"
expect_eq "first trials start where the protocol says" "8.0|32.0" \
  "$(q "$WORK/a.db" 'select (select round(level_requested, 6) from trials where block=0 and staircase=0 order by trial limit 1), (select round(level_requested, 6) from trials where block=0 and staircase=1 order by trial limit 1)')"
n0=$(q "$WORK/a.db" 'select count(*) from trials where block=0')
check "up-down staircases stopped by their 5 reversals before 2 × 25 trials ($n0 shown)" test "$n0" -lt 50
expect_eq "QUEST staircases run their 10 trials each" 20 "$(q "$WORK/a.db" 'select count(*) from trials where block=1')"

# 2. Independent re-derivation (Python, from the stored rows only): the level shown is the list
#    level nearest the requested one on the log10 axis, and every requested up-down level follows
#    from the answers before it — two correct in a row make it 0.1 log10 units harder (higher noise),
#    one error 0.1 easier, kept within the block's levels 8..32 — and each staircase stops after
#    its 5th reversal (Levitt's transformed up-down rule as docs/files.md describes it).
q "$WORK/a.db" "select block, staircase, level, level_requested, correct from trials order by trial" >"$WORK/rows.txt"
expect_eq "snapping and the up-down rule re-derived from the stored rows" "ok" "$($PY - "$WORK/rows.txt" <<'PYEOF'
import math, sys
rows = [l.strip().split('|') for l in open(sys.argv[1]) if l.strip()]
levels = [8.0, 16.0, 32.0]
bad = []
for b, s, lev, req, c in rows:
    lev, req = float(lev), float(req)
    near = min(levels, key=lambda L: (abs(math.log10(L) - math.log10(req)), L))
    if near != lev:
        bad.append(('snap', b, s, lev, req))
state = {}
for b, s, lev, req, c in rows:
    req = float(req)
    if b != '0':
        continue
    st = state.setdefault(s, {'x': None, 'run': 0, 'last': 0, 'rev': 0, 'n': 0})
    if st['x'] is None:
        st['x'] = math.log10(req)
    if st['rev'] >= 5:
        bad.append(('after stop', s))
    if abs(10 ** st['x'] - req) > 1e-9 * req:
        bad.append(('level', s, st['n'], 10 ** st['x'], req))
    correct = c == '1'
    move = 0
    if correct:
        st['run'] += 1
        if st['run'] >= 2:
            st['x'] += 0.1; st['run'] = 0; move = -1   # harder = more noise
    else:
        st['run'] = 0; st['x'] -= 0.1; move = 1
    if move:
        if st['last'] and move != st['last']:
            st['rev'] += 1
        st['last'] = move
    st['x'] = min(max(st['x'], math.log10(8)), math.log10(32))
    st['n'] += 1
for s, st in state.items():
    if st['rev'] < 5 and st['n'] < 25:
        bad.append(('stopped early', s, st))
print('ok' if not bad else bad[:5])
PYEOF
)"

# 3. The same seed gives the same session.
expect_exit "second run exits 0" 0 run "$WORK/b.db"
expect_eq "same seed, same adaptive sequence" "$(q "$WORK/a.db" "$SEQ")" "$(q "$WORK/b.db" "$SEQ")"

# 4. kill -9 mid-staircase at several moments, then --resume: the finished session's trials equal
#    the uninterrupted ones (staircase, image, level, requested level, answer), in order. The
#    moments are counts of stored trials (the first, early and late in block 1, in block 2), not
#    seconds, so a loaded machine that starts the sanitizer build slowly kills at the same places.
for k in 1 5 $((n0 - 1)) $((n0 + 3)); do
  t=$k; db=$WORK/k$k.db
  (exec "$TACHIST" run "$P" --subject S07 --db "$db" --rig "$WORK/rig.ini" --headless \
    --observer "$MODEL" --seed 21 --pace >/dev/null 2>&1) &
  pid=$!   # the tachist process itself (exec), so kill -9 reaches it
  i=0
  while [ $i -lt 2400 ] && kill -0 $pid 2>/dev/null; do
    if [ -s "$db" ]; then
      [ "$(q "$db" 'select count(*) from trials' 2>/dev/null || echo 0)" -ge "$k" ] 2>/dev/null && break
    fi
    sleep 0.05; i=$((i + 1))
  done
  kill -9 $pid 2>/dev/null
  wait $pid 2>/dev/null
  n=$(q "$db" 'select count(*) from trials')
  check "killed after ${t} stored trials, with some still to go ($n stored)" test "$n" -gt 0 -a "$n" -lt "$(q "$WORK/a.db" 'select count(*) from trials')"
  expect_eq "killed after ${t} trials: integrity" ok "$(q "$db" 'pragma integrity_check')"
  sid=$(q "$db" 'select id from sessions')
  expect_exit "resume after kill after ${t} trials exits 0" 0 "$TACHIST" run "$P" --resume "$sid" --db "$db" \
    --headless --observer "$MODEL"
  expect_eq "resume after kill after ${t} trials: complete" complete "$(q "$db" 'select status from sessions')"
  expect_eq "resume after kill after ${t} trials: same sequence as uninterrupted" "$(q "$WORK/a.db" "$SEQ")" "$(q "$db" "$SEQ")"
  if [ "$n" -gt "$n0" ]; then
    # Killed in the second block: the first, whose staircases had all finished, is not run again.
    expect_eq "resume after kill after ${t} trials: only the second block runs" "block 2" \
      "$(grep -o '^block [0-9]' "$WORK/last.out" | tr '\n' ' ' | sed 's/ $//')"
  fi
done

# 5. `report` shows each staircase's threshold, recomputed here from the stored rows alone
#    (Python/numpy): up-down, 10^(mean of log10 of the last 4 reversal levels) (Levitt 1971);
#    QUEST, the posterior mean of Watson & Pelli's (1983) Weibull on a 0.01-log10 grid over the
#    prior mean ± 5 SD, γ = 1/6, β = 3.5, δ = 0.01, with lower levels easier.
expect_exit "report --json exits 0" 0 "$TACHIST" report --db "$WORK/a.db" --json
expect_eq "report thresholds agree with an independent recomputation" "ok 4" "$($PY - "$WORK/rows.txt" "$WORK/last.out" <<'PYEOF'
import json, math, sys
import numpy as np
rows = [l.strip().split('|') for l in open(sys.argv[1]) if l.strip()]
rep = {(r['block'], r['staircase']): r for r in json.load(open(sys.argv[2]))['staircases']}
bad = []
# up-down: reversal levels from the answers (level shown on the trial that turned the track)
for s in ('0', '1'):
    run, last, rev = 0, 0, []
    for b, st, lev, req, c in rows:
        if b != '0' or st != s:
            continue
        move = 0
        if c == '1':
            run += 1
            if run >= 2:
                run, move = 0, -1
        else:
            run, move = 0, 1
        if move:
            if last and move != last:
                rev.append(float(lev))
            last = move
    want = 10 ** np.mean(np.log10(rev[-4:]))
    got = rep[(0, int(s))]['threshold']
    if abs(got - want) > 1e-9 * want:
        bad.append(('updown', s, got, want))
# QUEST: x = -log10(level) grows as the task gets easier
beta, delta, gamma, sd = 3.5, 0.01, 1 / 6, 0.3
for s, m in (('0', 10.0), ('1', 25.0)):
    mu = -math.log10(m)
    lo = math.log10(m) - 5 * sd
    n = int(math.floor(10 * sd / 0.01 + 1e-9)) + 1
    grid = -(lo + 0.01 * np.arange(n))
    logp = -0.5 * ((grid - mu) / sd) ** 2
    for b, st, lev, req, c in rows:
        if b != '1' or st != s:
            continue
        x = -math.log10(float(lev))
        p = delta * gamma + (1 - delta) * (1 - (1 - gamma) * np.exp(-10 ** (beta * (x - grid))))
        logp += np.log(p if c == '1' else 1 - p)
    w = np.exp(logp - logp.max()); w /= w.sum()
    want = 10 ** (-(w * grid).sum())
    got = rep[(1, int(s))]['threshold']
    if abs(got - want) > 1e-9 * want:
        bad.append(('quest', s, got, want))
print('ok', len(rep) if not bad else bad)
PYEOF
)"
"$TACHIST" report --db "$WORK/a.db" >"$WORK/report.txt" 2>&1
check "text report has the staircase table" grep -q '^Staircases' "$WORK/report.txt"
