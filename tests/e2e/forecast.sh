# e2e forecast — `tachist forecast`: a model observer on the demo protocol (table, JSON, SVG), the
# true threshold and span recomputed with scipy, the same numbers with 1 and 2 threads, levels far
# from the threshold flagged, a pilot fitted as report fits it, an adaptive block beside constant
# stimuli, the suggestion, and usage errors. Run counts are small: this checks the command, the
# statistics are checked in tests/test_forecast.c.
. tests/e2e/lib.sh
unset DISPLAY WAYLAND_DISPLAY
PY=/usr/bin/python3
A=$ROOT/assets-demo
RIG=$A/rig.ini
MODEL="model:shape=logistic,threshold=20,slope=-4,lapse=0.02"
F() { "$TACHIST" forecast "$@"; }

# 1. A model observer on the demo protocol: JSON, and the truth against scipy.
expect_exit "forecast --json exits 0" 0 F "$ROOT/protocols/demo.ini" --rig "$RIG" --observer "$MODEL" \
  --runs 12 --boot 30 --trials 12,24 --json --threads 2
cp "$WORK/last.out" "$WORK/f2.json"
# The logistic mirrored for a falling curve: P(x) = g + (1 - g - l)(1 - expit((x - a)/b)), so the
# level at proportion correct p is a + b*logit(1 - (p - g)/(1 - g - l)) (scipy.special).
check "threshold and 25-75% span match scipy's logistic" $PY -c '
import json, sys
from scipy.special import logit
d = json.load(open(sys.argv[1]))
a, b, l, g = 20.0, 4.0, 0.02, 1 / 6
def level(p): return a + b * logit(1 - (p - g) / (1 - g - l))
assert d["choices"] == 6
assert abs(d["pc"] - (g + (1 - g) / 2)) < 1e-12
assert abs(d["threshold"] - level(d["pc"])) < 1e-9, d["threshold"]
assert abs(d["span_25"] - level(g + 0.25 * (1 - g - l))) < 1e-9
assert abs(d["span_75"] - level(g + 0.75 * (1 - g - l))) < 1e-9
ds = d["designs"]
assert [x["trials_per_level"] for x in ds] == [12, 24], ds
assert all(x["levels"] == [0, 8, 16, 32] and x["trials_per_observer"] == 4 * x["trials_per_level"] for x in ds)
assert all(x["bracket"] == "brackets" for x in ds)
for x in ds:
    assert 0 <= x["failed_share"] <= 1 and x["width_p05"] <= x["width_median"] <= x["width_p95"]
' "$WORK/f2.json"
check "no NaN in the JSON" sh -c "! grep -qi 'nan' '$WORK/f2.json'"

# 2. 1 thread gives the same numbers as 2.
expect_exit "forecast with 1 thread exits 0" 0 F "$ROOT/protocols/demo.ini" --rig "$RIG" --observer "$MODEL" \
  --runs 12 --boot 30 --trials 12,24 --json --threads 1
expect_eq "1 and 2 threads give the same forecast" "$(cat "$WORK/f2.json")" "$(cat "$WORK/last.out")"

# 3. Levels far below the threshold are flagged; the table, the figure and the suggestion.
expect_exit "forecast table exits 0" 0 F "$ROOT/protocols/demo.ini" --rig "$RIG" --observer "$MODEL" \
  --runs 12 --boot 30 --trials 20,40 --levels protocol --levels 1,2,3,4 --target-width 1000 \
  --plot "$WORK/f.svg"
cp "$WORK/last.out" "$WORK/f.txt"
check "table has a row per design" sh -c "[ \$(grep -c '^protocol \|^1,2,3,4 ' '$WORK/f.txt') = 4 ]"
check "levels far below the threshold are flagged" \
  grep -q 'warning: levels 1,2,3,4 do not bracket the threshold: all of' "$WORK/f.txt"
check "the protocol's levels are not flagged" sh -c "! grep -q 'warning: levels protocol' '$WORK/f.txt'"
check "a suggestion is made" grep -q '^suggestion: protocol, 1 observer x 80 trials' "$WORK/f.txt"
check "no NaN in the table" sh -c "! grep -qi 'nan' '$WORK/f.txt'"
check "the figure is well-formed XML" xmllint --noout "$WORK/f.svg"
check "the figure has a line per level set" sh -c "[ \$(grep -c '<polyline' '$WORK/f.svg') = 2 ]"
if command -v rsvg-convert >/dev/null; then
  check "the figure renders" rsvg-convert "$WORK/f.svg" -o "$WORK/f.png"
else
  skip "the figure renders" "rsvg-convert is not installed"
fi
expect_exit "an unreachable target exits 0" 0 F "$ROOT/protocols/demo.ini" --rig "$RIG" \
  --observer "$MODEL" --runs 6 --boot 20 --trials 10 --target-width 0.001
check "an unreachable target is said" grep -q '^no design on this grid reaches' "$WORK/last.out"

# 4. A pilot, fitted as report fits it: the same alpha and beta as report's pooled fit.
FIX=$ROOT/${BUILD:-build/san}/tools/report_fixture
check "pilot database written" "$FIX" "$WORK/p.db" --m 4 --levels 5 --per-level 20 --seed 3
{
  echo "image,category,level"
  for c in kite lamp fern boat; do for l in 0.1 0.2 0.3 0.4 0.5; do
    echo "$A/img/ring_1_n0.png,$c,$l"; done; done
} >"$WORK/pilot.csv"
cat >"$WORK/pilot.ini" <<PROTO
[experiment]
name = pilot
list = $WORK/pilot.csv
[categories]
kite = a
lamp = b
fern = c
boat = d
[timing]
stimulus_ms = 100
[display]
size_deg = 2
[block main]
repeats = 2
PROTO
expect_exit "forecast from a pilot exits 0" 0 F "$WORK/pilot.ini" --rig "$RIG" --db "$WORK/p.db" --all \
  --runs 8 --boot 20 --json
cp "$WORK/last.out" "$WORK/p.json"
expect_exit "report on the pilot exits 0" 0 "$TACHIST" report --db "$WORK/p.db" --json --boot 0
check "the pilot's function is report's fit" $PY -c '
import json, sqlite3, sys
f = json.load(open(sys.argv[1])); r = json.load(open(sys.argv[2]))
fit = [x for x in r["fits"] if x["status"] == "ok"][0]
assert f["shape"] == fit["shape"] and abs(f["alpha"] - fit["alpha"]) < 1e-9 and abs(f["beta"] - fit["beta"]) < 1e-9, (f, fit)
n = sqlite3.connect(sys.argv[3]).execute("select count(*) from trials where practice = 0 and level is not null and correct is not null").fetchone()[0]
assert f["observer"].startswith("pilot fit of %d trials" % n), (f["observer"], n)
assert f["designs"][0]["levels"] == [0.1, 0.2, 0.3, 0.4, 0.5]
# the protocol plans 8 per level (4 categories x 2 repeats): half, that, and double by default
assert [x["trials_per_level"] for x in f["designs"]] == [4, 8, 16], f["designs"]
' "$WORK/p.json" "$WORK/last.out" "$WORK/p.db"

# 5. An adaptive block beside constant stimuli, at the same trial counts.
cat >"$WORK/ad.ini" <<PROTO
[experiment]
name = ad
list = $A/stimuli.csv
[categories]
ring = s
bar = d
cross = f
chevron = j
wedge = k
lattice = l
[timing]
stimulus_ms = 100
[display]
size_deg = 2
[block constant]
select = level=8,16,32 & exemplar=3
[block stairs]
select = level=8,16,32
adaptive = pair
[adaptive pair]
rule = updown
easier = lower
start = 8
down = 2
step = 0.1
trials = 40
PROTO
expect_exit "forecast with an adaptive block exits 0" 0 F "$WORK/ad.ini" --rig "$RIG" --observer "$MODEL" \
  --runs 8 --boot 20 --trials 20,40 --json
check "adaptive rows at the constant rows' trial counts" $PY -c '
import json, sys
d = json.load(open(sys.argv[1]))
k = [(x["kind"], x["trials_per_observer"]) for x in d["designs"]]
assert k == [("constant", 60), ("constant", 120), ("adaptive", 60), ("adaptive", 120)], k
assert d["designs"][2]["name"] == "adaptive pair" and d["designs"][2]["levels"] == [8, 16, 32]
' "$WORK/last.out"

# 6. Usage errors.
expect_exit "neither --observer nor --db is a usage error" 2 F "$ROOT/protocols/demo.ini"
check "it says what to give" grep -q 'give either --observer model:SPEC or --db FILE' "$WORK/last.err"
expect_exit "both is a usage error" 2 F "$ROOT/protocols/demo.ini" --observer "$MODEL" --db x.db
expect_exit "--schema with a file for --db is a usage error" 2 F "$ROOT/protocols/demo.ini" --db x.db --schema lab
check "saying it needs a server" grep -q -- "--schema needs a PostgreSQL server for --db" "$WORK/last.err"
expect_exit "--schema without --db is a usage error" 2 F "$ROOT/protocols/demo.ini" --observer "$MODEL" --schema lab
expect_exit "a bad --trials list is a usage error" 2 F "$ROOT/protocols/demo.ini" --observer "$MODEL" --trials 10,x
expect_exit "a bad --levels set is a problem" 1 F "$ROOT/protocols/demo.ini" --rig "$RIG" --observer "$MODEL" --levels 3
expect_exit "a bad model spec is a problem" 1 F "$ROOT/protocols/demo.ini" --rig "$RIG" --observer model:shape=cubic
expect_exit "a missing pilot database is a problem" 1 F "$ROOT/protocols/demo.ini" --rig "$RIG" --db "$WORK/none.db"

# 7. A model whose curve never reaches the threshold's proportion correct: said, no NaN.
expect_exit "an unreachable threshold exits 0" 0 F "$ROOT/protocols/demo.ini" --rig "$RIG" \
  --observer model:shape=logistic,threshold=20,slope=-4,lapse=0.45 --runs 4 --boot 10 --trials 10
check "it is said" grep -q "never reaches pc" "$WORK/last.out"
check "no NaN in that table" sh -c "! grep -qi 'nan' '$WORK/last.out'"
