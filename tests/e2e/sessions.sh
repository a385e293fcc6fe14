# e2e sessions — `tachist sessions` lists what a database holds, with status and trial counts.
. tests/e2e/lib.sh
FILL=$ROOT/$BUILD/tools/store_fill
PY=/usr/bin/python3
DB=$WORK/s.db
expect_exit "missing database fails" 1 "$TACHIST" sessions --db "$DB"
check "missing database is not created" test ! -e "$DB"
expect_exit "bad option is a usage error" 2 "$TACHIST" sessions --db "$DB" --bogus
"$FILL" "$DB" 2 7 --subject S01 >/dev/null
"$FILL" "$DB" 1 3 --subject S02 --running >"$WORK/run.id"
expect_exit "sessions lists" 0 "$TACHIST" sessions --db "$DB"
expect_eq "one line per session plus the header" 4 "$(wc -l <"$WORK/last.out")"
check "a running session shows as running" grep -q "^$(cut -c1-8 "$WORK/run.id")  S02 .* running  *3 " "$WORK/last.out"
expect_exit "sessions --json" 0 "$TACHIST" sessions --db "$DB" --json
expect_eq "json lists three sessions with their trial counts" "7 7 3" \
  "$($PY -c 'import json,sys; d=json.load(open(sys.argv[1])); print(*[s["trials"] for s in d["sessions"]])' "$WORK/last.out")"
expect_eq "json carries the full id and status" "$(cat "$WORK/run.id") running" \
  "$($PY -c 'import json,sys; s=json.load(open(sys.argv[1]))["sessions"][2]; print(s["id"], s["status"])' "$WORK/last.out")"
expect_exit "sessions --subject" 0 "$TACHIST" sessions --db "$DB" --subject S02 --json
expect_eq "subject filter" 1 "$($PY -c 'import json,sys; print(len(json.load(open(sys.argv[1]))["sessions"]))' "$WORK/last.out")"
: >"$WORK/empty.db"
expect_exit "an empty file becomes an empty database" 0 "$TACHIST" sessions --db "$WORK/empty.db"
check "and says it has no sessions" grep -q "no sessions" "$WORK/last.out"
printf 'not a database at all, just some text that fills more than a header\n%.0s' 1 2 3 4 5 6 7 8 >"$WORK/junk.db"
expect_exit "a file that is not a database fails" 1 "$TACHIST" sessions --db "$WORK/junk.db"
check "with a message saying so" grep -q "not a database" "$WORK/last.err"
