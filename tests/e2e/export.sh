# e2e export — `tachist export` to CSV, TSV, JSON and BIDS from a database written through the
# store (tests/tools/store_fill: commas, quotes, newlines, tabs, cells starting with = + - @).
# Reference checks: Python's csv and json modules and its sqlite3 module read the same database
# (tests/tools/check_export.py); BIDS conventions from the BIDS specification v1.9.
. tests/e2e/lib.sh
FILL=$ROOT/$BUILD/tools/store_fill
PY=/usr/bin/python3
DB=$WORK/x.db
"$FILL" "$DB" 2 40 --subject S01 >"$WORK/ids1" && "$FILL" "$DB" 1 25 --subject S02 >"$WORK/ids2"
check "fixture database written" test -s "$WORK/ids2"
S2=$(cat "$WORK/ids2")

expect_exit "export csv" 0 "$TACHIST" export --db "$DB" --format csv --out "$WORK/all.csv"
check "csv equals the database (Python csv module + sqlite3)" $PY tests/tools/check_export.py "$DB" csv "$WORK/all.csv"
check "a category starting with = is guarded" grep -q "\"'=cmd\"" "$WORK/all.csv"
# RFC 4180 section 2 rule 1: CRLF line breaks.
check "csv records end with CRLF" $PY -c "import sys; d=open(sys.argv[1],'rb').read(); sys.exit(0 if d.count(b'\r\n') >= 106 else 1)" "$WORK/all.csv"
expect_exit "export tsv" 0 "$TACHIST" export --db "$DB" --format tsv --out "$WORK/all.tsv"
check "tsv equals the database" $PY tests/tools/check_export.py "$DB" tsv "$WORK/all.tsv"
expect_exit "export json" 0 "$TACHIST" export --db "$DB" --format json --out "$WORK/all.json"
check "json equals the database (Python json module)" $PY tests/tools/check_export.py "$DB" json "$WORK/all.json"
expect_exit "export --subject" 0 "$TACHIST" export --db "$DB" --format csv --subject S02 --out "$WORK/s2.csv"
check "subject selection equals the database" $PY tests/tools/check_export.py "$DB" csv "$WORK/s2.csv" S02
expect_exit "export --session prefix to stdout" 0 "$TACHIST" export --db "$DB" --format json --session "$(echo "$S2" | cut -c1-8)" --out -
expect_eq "session selection has that session's rows" 25 "$($PY -c 'import json,sys; print(len(json.load(open(sys.argv[1]))["trials"]))' "$WORK/last.out")"

expect_exit "unknown format is a usage error" 2 "$TACHIST" export --db "$DB" --format xls --out "$WORK/x"
expect_exit "both selections is a usage error" 2 "$TACHIST" export --db "$DB" --format csv --session "$S2" --subject S02 --out "$WORK/x"
expect_exit "missing --out is a usage error" 2 "$TACHIST" export --db "$DB" --format csv
expect_exit "missing database fails" 1 "$TACHIST" export --db "$WORK/none.db" --format csv --out "$WORK/x.csv"
check "missing database is not created" test ! -e "$WORK/none.db"
expect_exit "unknown session fails" 1 "$TACHIST" export --db "$DB" --format csv --session ffffffffff --out "$WORK/y.csv"
check "a failed export leaves no file" test ! -e "$WORK/y.csv" -a ! -e "$WORK/y.csv.partial"
expect_exit "unwritable output fails" 1 "$TACHIST" export --db "$DB" --format csv --out "$WORK/no/such/dir/x.csv"

expect_exit "export bids" 0 "$TACHIST" export --db "$DB" --format bids --out "$WORK/bids"
cat > "$WORK/bids.py" <<'PYEOF'
import csv, glob, json, os, re, sqlite3, sys
root, db = sys.argv[1], sys.argv[2]
bad = []
def need(cond, msg):
    if not cond:
        bad.append(msg)
# "Modality agnostic files > Dataset description": Name and BIDSVersion are REQUIRED.
dd = json.load(open(os.path.join(root, "dataset_description.json")))
need("Name" in dd and "BIDSVersion" in dd, "dataset_description lacks Name/BIDSVersion")
# "Modality agnostic files > Participants file": participant_id first, values sub-<label>.
rows = list(csv.reader(open(os.path.join(root, "participants.tsv")), delimiter="\t"))
need(rows[0][0] == "participant_id", "participants.tsv must start with participant_id")
need(sorted(r[0] for r in rows[1:]) == ["sub-S01", "sub-S02"], f"participants: {rows[1:]}")
con = sqlite3.connect(db)
sessions = con.execute("SELECT id, subject, (SELECT count(*) FROM trials t WHERE t.session_id = s.id) FROM sessions s").fetchall()
files = glob.glob(os.path.join(root, "sub-*", "ses-*", "beh", "*_beh.tsv"))
need(len(files) == len(sessions), f"{len(files)} beh files for {len(sessions)} sessions")
# "Behavioral experiments": sub-<label>[_ses-<label>]_task-<label>_beh.tsv, labels alphanumeric
# ("Common principles: Entities").
pat = re.compile(r"sub-([A-Za-z0-9]+)/ses-([A-Za-z0-9]+)/beh/sub-\1_ses-\2_task-[A-Za-z0-9]+_beh\.tsv$")
for sid, subj, n in sessions:
    hits = [f for f in files if f"/sub-{subj}/ses-{sid.replace('-', '')[:8]}/" in f]
    need(len(hits) == 1, f"session {sid}: {hits}")
    if not hits:
        continue
    f = hits[0]
    need(pat.search(f) is not None, f"bad file name {f}")
    # "Common principles: Tabular files": tab separated, header row, n/a for missing, no empty cells.
    # One physical line per row: text cells escape tab, newline, CR and backslash, never quote.
    t = [line.split("\t") for line in open(f, newline="", encoding="utf-8").read().split("\n")[:-1]]
    need(t[0][:2] == ["onset", "duration"], f"{f}: onset, duration must come first")
    need(len(t) == n + 1, f"{f}: {len(t) - 1} rows, want {n}")
    need(all(len(r) == len(t[0]) for r in t), f"{f}: ragged rows")
    need(all(c != "" for r in t for c in r), f"{f}: empty cell (use n/a)")
    rt = t[0].index("response_time")
    db_rt = [r[0] for r in con.execute("SELECT rt_ms FROM trials WHERE session_id = ? ORDER BY trial", (sid,))]
    for r, want in zip(t[1:], db_rt):
        if want is None:
            need(r[rt] == "n/a", f"{f}: missing rt must be n/a, got {r[rt]}")
        else:
            need(abs(float(r[rt]) - want / 1000) <= 5e-10, f"{f}: response_time {r[rt]} != {want} ms")
    for r in t[1:]:
        float(r[0]); float(r[1])   # onset and duration are numbers (seconds)
        # at most nine decimals: times come from nanosecond clocks
        need(all(len(c.split(".")[1]) <= 9 for c in (r[0], r[1], r[rt]) if "." in c), f"{f}: {r[:2]}")
    side = json.load(open(f[:-4] + ".json"))
    for col in t[0]:
        need(col in side and "Description" in side[col], f"{f}: sidecar lacks {col}")
    need(side["onset"].get("Units") == "s" and side["response_time"].get("Units") == "s", "times in s")
    need("Levels" in side["category"] and "Levels" in side["correct"], "categorical Levels")
    sp = side.get("StimulusPresentation", {})
    for k in ("ScreenDistance", "ScreenRefreshRate", "ScreenResolution", "ScreenSize"):
        need(k in sp, f"StimulusPresentation lacks {k}")
    need(abs(sp.get("ScreenDistance", 0) - 0.573) < 1e-9, "ScreenDistance in metres")
for b in bad[:20]:
    print(b)
sys.exit(1 if bad else 0)
PYEOF
check "bids dataset follows the specification's layout and tabular rules" $PY "$WORK/bids.py" "$WORK/bids" "$DB"
# Two exports into one folder: participants.tsv lists both subjects (merged, not overwritten).
expect_exit "bids export of one subject" 0 "$TACHIST" export --db "$DB" --format bids --subject S01 --out "$WORK/bids2"
expect_exit "bids export of the other into the same folder" 0 "$TACHIST" export --db "$DB" --format bids --subject S02 --out "$WORK/bids2"
expect_eq "participants.tsv keeps both" "participant_id sub-S01 sub-S02" "$(tr '\n' ' ' <"$WORK/bids2/participants.tsv" | sed 's/ $//')"
expect_exit "bids to stdout is a usage error" 2 "$TACHIST" export --db "$DB" --format bids --out -
