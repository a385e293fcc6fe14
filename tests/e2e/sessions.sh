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
# store_fill has exited: the session it left running belongs to a gone process on this host.
# Here it is handed to this (live) shell so it stays running; the recovery case is checked below.
sqlite3 "$DB" "UPDATE sessions SET owner_pid = $$, owner_host = '$(uname -n)' WHERE id = '$(cat "$WORK/run.id")'"
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
# Recovery on listing: a running session whose process on this host is gone shows as
# interrupted at once; one owned on another host is left running.
"$FILL" "$DB" 1 2 --subject S03 --running >"$WORK/dead.id"
"$FILL" "$DB" 1 2 --subject S04 --running >"$WORK/far.id"
sqlite3 "$DB" "UPDATE sessions SET owner_host = 'elsewhere.invalid' WHERE id = '$(cat "$WORK/far.id")'"
expect_exit "sessions after a crash" 0 "$TACHIST" sessions --db "$DB"
check "the crashed session shows interrupted" grep -q "^$(cut -c1-8 "$WORK/dead.id")  S03 .* interrupted " "$WORK/last.out"
check "another host's session stays running" grep -q "^$(cut -c1-8 "$WORK/far.id")  S04 .* running " "$WORK/last.out"
check "the live owner's session stays running" grep -q "^$(cut -c1-8 "$WORK/run.id")  S02 .* running " "$WORK/last.out"
