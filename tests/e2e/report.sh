# e2e report — `tachist report` on invented databases written by tests/tools/report_fixture:
# tables, JSON, SVG figures (well-formed XML per xmllint, rendered by rsvg-convert), and bad input
# (no database, an empty database, no responses, all levels equal, one trial per level).
. tests/e2e/lib.sh
PY=/usr/bin/python3
FIX=$ROOT/${BUILD:-build/san}/tools/report_fixture
DB=$WORK/r.db

check "fixture database written" "$FIX" "$DB" --m 4 --levels 5 --per-level 12 --blocks 2 --subjects 2 --seed 7
expect_exit "report exits 0" 0 "$TACHIST" report --db "$DB" --boot 100
cp "$WORK/last.out" "$WORK/r.txt"
check "header counts sessions and practice" grep -q '2 sessions, 2 subjects, 964 trials (4 practice, left out), 4 choices' "$WORK/r.txt"
check "per-subject table" grep -q '^Accuracy by condition, subject S01' "$WORK/r.txt"
check "pooled table" grep -q '^Accuracy by condition, all subjects pooled' "$WORK/r.txt"
check "fits section" grep -q '^Psychometric fits: weibull where accuracy rises with the level, logistic where it falls, guess rate 1/4' "$WORK/r.txt"
check "rising fixture data get the Weibull" grep -q 'weibull alpha' "$WORK/r.txt"
check "confusions per level" grep -q '^Confusions at level 0.3' "$WORK/r.txt"
check "most confused pairs" grep -q 'most confused:' "$WORK/r.txt"
check "timing says simulated" grep -q 'simulated timing' "$WORK/r.txt"
check "no NaN in the text" sh -c "! grep -qi 'nan' '$WORK/r.txt'"

expect_exit "report --json exits 0" 0 "$TACHIST" report --db "$DB" --json --boot 100
cp "$WORK/last.out" "$WORK/r.json"
# The JSON's counts are checked against the database itself, read with Python's sqlite3 module.
check "JSON counts match the trials table" $PY -c '
import json, sqlite3, sys
d = json.load(open(sys.argv[1]))
db = sqlite3.connect(sys.argv[2])
n, k = db.execute("select count(*), sum(correct = 1) from trials where practice = 0 and correct is not null").fetchone()
pooled = [c for c in d["conditions"] if c["subject"] is None]
assert sum(c["responses"] for c in pooled) == n, (n,)
assert sum(c["correct"] for c in pooled) == k, (k,)
assert d["choices"] == 4 and d["subjects"] == 2 and d["practice_trials"] == 4
for c in pooled:
    assert c["pc_lower"] <= c["pc"] <= c["pc_upper"]
    # RT medians of correct trials at or above 100 ms, straight from the table
    rts = sorted(r[0] for r in db.execute("select rt_ms from trials where practice = 0 and correct = 1 and rt_ms >= 100 and block = ? and level = ?", (c["block"], c["level"])))
    if rts:
        mid = len(rts) // 2
        med = rts[mid] if len(rts) % 2 else (rts[mid - 1] + rts[mid]) / 2
        assert abs(med - c["rt_median"]) < 1e-9, (med, c["rt_median"])
for f in d["fits"]:
    assert f["status"] in ("ok", "unsupported", "no_convergence")
    if f["status"] == "ok":
        assert f["threshold"] is None or isinstance(f["threshold"], float)
    else:
        assert f["alpha"] is None and f["message"]
conf = d["confusions"][0]
tot = sum(sum(r) for r in conf["counts"])
lvl = conf["level"]
m = db.execute("select count(*) from trials where practice = 0 and response_category is not null and level = ?", (lvl,)).fetchone()[0]
assert tot == m, (tot, m)
assert len(d["timing"]) == 2 and all(t["timing_mode"] == "simulated" for t in d["timing"])
' "$WORK/r.json" "$DB"

# Wilson intervals in the report equal statsmodels proportion_confint(method="wilson").
check "report intervals equal statsmodels wilson" $PY -c '
import json, sys
from statsmodels.stats.proportion import proportion_confint
d = json.load(open(sys.argv[1]))
for c in d["conditions"]:
    if c["responses"]:
        lo, hi = proportion_confint(c["correct"], c["responses"], alpha=0.05, method="wilson")
        assert abs(lo - c["pc_lower"]) < 1e-9 and abs(hi - c["pc_upper"]) < 1e-9, (c, lo, hi)
' "$WORK/r.json"

expect_exit "--subject selects one subject" 0 "$TACHIST" report --db "$DB" --subject S02 --no-fit
check "one subject in the header" grep -q '1 session, 1 subject' "$WORK/last.out"
expect_exit "--by a label column" 0 "$TACHIST" report --db "$DB" --by set --no-fit --json
check "groups from the label column" $PY -c '
import json, sys
d = json.load(open(sys.argv[1]))
assert {c["group"] for c in d["conditions"]} == {"set=A", "set=B"}
' "$WORK/last.out"
expect_exit "--by an unknown column exits 1" 1 "$TACHIST" report --db "$DB" --by colour
check "unknown column lists the known ones" grep -q "no label column 'colour'.*set" "$WORK/last.err"
expect_exit "--ci exact" 0 "$TACHIST" report --db "$DB" --ci exact --no-fit --json
check "exact intervals equal statsmodels beta" $PY -c '
import json, sys
from statsmodels.stats.proportion import proportion_confint
d = json.load(open(sys.argv[1]))
assert d["interval_method"] == "exact"
for c in d["conditions"]:
    if c["responses"]:
        lo, hi = proportion_confint(c["correct"], c["responses"], alpha=0.05, method="beta")
        assert abs(lo - c["pc_lower"]) < 1e-8 and abs(hi - c["pc_upper"]) < 1e-8, (c, lo, hi)
' "$WORK/last.out"

# Figures.
expect_exit "report --plots exits 0" 0 "$TACHIST" report --db "$DB" --plots "$WORK/plots" --boot 50
check "index.html written" test -s "$WORK/plots/index.html"
check "psychometric figure written" test -s "$WORK/plots/psychometric-1.svg"
check "confusion figure written" test -s "$WORK/plots/confusion-1.svg"
check "RT histogram written" test -s "$WORK/plots/rt.svg"
check "frame-interval histogram written" test -s "$WORK/plots/frames-1.svg"
nsvg=$(ls "$WORK/plots"/*.svg | wc -l)
nimg=$(grep -c '<img src=' "$WORK/plots/index.html")
expect_eq "index.html shows every figure" "$nsvg" "$nimg"
bad=0
for f in "$WORK/plots"/*.svg; do
  xmllint --noout "$f" 2>>"$WORK/xml.err" || bad=$((bad + 1))
  rsvg-convert -o "$WORK/out.png" "$f" 2>>"$WORK/rsvg.err" || bad=$((bad + 1))
  [ -s "$WORK/out.png" ] || bad=$((bad + 1))
done
expect_eq "every SVG parses (xmllint) and renders (rsvg-convert)" 0 "$bad"
check "index.html is well-formed (xmllint)" xmllint --noout "$WORK/plots/index.html"
check "axes carry units" grep -q 'reaction time from stimulus onset (ms)' "$WORK/plots/rt.svg"
check "frame axis in ms" grep -q 'interval between flips (ms)' "$WORK/plots/frames-1.svg"
check "threshold marked" grep -q 'threshold' "$WORK/plots/psychometric-1.svg"
check "no NaN in any figure" sh -c "! grep -qi 'nan' '$WORK/plots/'*.svg"

# Bad input.
expect_exit "no database exits 1" 1 "$TACHIST" report --db "$WORK/none.db"
check "no database says so" grep -q "no database at" "$WORK/last.err"
check "and creates no file" test ! -e "$WORK/none.db"
check "empty database written" "$FIX" "$WORK/empty.db" --subjects 0
expect_exit "empty database exits 1" 1 "$TACHIST" report --db "$WORK/empty.db"
check "empty database says so" grep -q "holds no sessions yet" "$WORK/last.err"
expect_exit "unknown session exits 1" 1 "$TACHIST" report --db "$DB" --session 00000000-dead
expect_exit "two selections is a usage error" 2 "$TACHIST" report --db "$DB" --all --subject S01

check "no-response database written" "$FIX" "$WORK/noresp.db" --mode noresp --per-level 3
expect_exit "session with no responses exits 0" 0 "$TACHIST" report --db "$WORK/noresp.db" --plots "$WORK/p2"
check "no responses said plainly" grep -q 'No responses were recorded' "$WORK/last.out"
check "no NaN with no responses" sh -c "! grep -qi 'nan' '$WORK/last.out'"
expect_exit "no responses --json" 0 "$TACHIST" report --db "$WORK/noresp.db" --json
check "no-response JSON: null proportions, fit says why" $PY -c '
import json, sys
d = json.load(open(sys.argv[1]))
assert all(c["pc"] is None and c["responses"] == 0 for c in d["conditions"])
assert all(f["status"] != "ok" and f["message"] for f in d["fits"])
' "$WORK/last.out"

check "equal-level database written" "$FIX" "$WORK/equal.db" --mode equal --per-level 5
expect_exit "all levels equal exits 0" 0 "$TACHIST" report --db "$WORK/equal.db"
check "all levels equal: the fit says why" grep -q 'no fit: every trial is at one level' "$WORK/last.out"
check "no NaN with equal levels" sh -c "! grep -qi 'nan' '$WORK/last.out'"

check "one-trial-per-level database written" "$FIX" "$WORK/single.db" --mode single --levels 8
expect_exit "one trial per level exits 0" 0 "$TACHIST" report --db "$WORK/single.db" --json
check "one trial per level: valid JSON without NaN" $PY -c '
import json, sys
t = open(sys.argv[1]).read()
assert "nan" not in t.lower()
json.loads(t)
' "$WORK/last.out"
