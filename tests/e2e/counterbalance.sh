# e2e counterbalance — [counterbalance] in real runs: sessions of one protocol take positions 1, 2,
# 3 in the order begun (or --counterbalance N); each stores design_position, block_order and
# key_mapping equal to `check --subjects`; the trials follow that block order and the session's
# keys are that mapping;
# every new session gets a fresh seed.
. tests/e2e/lib.sh
command -v sqlite3 >/dev/null || { skip "counterbalance" "sqlite3 not installed"; exit 0; }
RIG=tests/data/good/rig.ini
cat >"$WORK/p.ini" <<PROTO
[experiment]
name = cbtest
list = $ROOT/assets-demo/stimuli.csv
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
response_ms = 500
feedback_ms = 0
iti_ms = 50
[display]
size_deg = 2
[counterbalance]
block_order = balanced
key_mapping = rotate
[block warm]
select = level=0 & exemplar=1
practice = yes
[block b1]
select = level=0 & exemplar=2
[block b2]
select = level=0 & exemplar=3
[block b3]
select = level=0 & exemplar=4
[block b4]
select = level=0 & exemplar=5
PROTO
q() { sqlite3 "$WORK/t.db" "$1"; }
for s in P1 P2 P3; do
  expect_exit "session $s runs" 0 "$TACHIST" run "$WORK/p.ini" --subject $s --rig "$RIG" \
    --db "$WORK/t.db" --headless --observer model:seed=2
done
expect_exit "--counterbalance 6 runs" 0 "$TACHIST" run "$WORK/p.ini" --subject P9 --rig "$RIG" \
  --db "$WORK/t.db" --headless --observer model:seed=2 --counterbalance 6
expect_eq "positions in the order begun, then the one given" "P1|1 P2|2 P3|3 P9|6" \
  "$(q "SELECT subject || '|' || design_position FROM sessions ORDER BY started_utc, rowid" | tr '\n' ' ' | sed 's/ $//')"
expect_eq "four sessions, four seeds" 4 "$(q 'SELECT count(DISTINCT seed) FROM sessions')"

"$TACHIST" check "$WORK/p.ini" --rig "$RIG" --subjects 6 --json >"$WORK/design.json" 2>/dev/null
/usr/bin/python3 - "$WORK/design.json" "$WORK/t.db" <<'PY'
import json, sqlite3, sys
design = {d["subject"]: d for d in json.load(open(sys.argv[1]))["design"]["subjects"]}
db = sqlite3.connect(sys.argv[2])
for sid, subj, pos, order, mapping in db.execute(
        "SELECT id, subject, design_position, block_order, key_mapping FROM sessions"):
    d = design[pos]
    want_order = ",".join(d["block_order"])
    want_map = ",".join(f"{c}={k}" for c, k in d["key_mapping"].items())
    ok = order == want_order and mapping == want_map
    print(("ok" if ok else "not ok") + f" - {subj}: stored design equals check --subjects row {pos}")
    if not ok:
        print(f"#   stored {order}; {mapping}\n#   check  {want_order}; {want_map}")
    shown = [r[0] for r in db.execute(
        "SELECT block_name FROM trials WHERE session_id = ? GROUP BY block ORDER BY block", (sid,))]
    print(("ok" if shown == d["block_order"] else "not ok") + f" - {subj}: blocks shown in the stored order")
    # The model observer presses no key (response_key "model"); the session's stored choices are
    # what the keyboard responder was given.
    (choices,) = db.execute("SELECT choices FROM sessions WHERE id = ?", (sid,)).fetchone()
    keys = {c["category"]: c["key"] for c in json.loads(choices)}
    print(("ok" if keys == d["key_mapping"] else "not ok") + f" - {subj}: the session's keys are the rotated ones")
PY
# Williams' square of 4 blocks from check: each main block once in each position over 4 subjects.
/usr/bin/python3 - "$WORK/design.json" <<'PY'
import json, sys
rows = [d["block_order"][1:] for d in json.load(open(sys.argv[1]))["design"]["subjects"][:4]]
ok = all(sorted(r[k] for r in rows) == ["b1", "b2", "b3", "b4"] for k in range(4))
pairs = [(r[k], r[k + 1]) for r in rows for k in range(3)]
ok = ok and len(set(pairs)) == 12
print(("ok" if ok else "not ok") + " - check's 4 orders: each block once per position, each pair once")
PY
