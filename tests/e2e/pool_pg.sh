# e2e pool_pg — `tachist pool --into` a PostgreSQL server (a throwaway cluster, tests/e2e/pg.inc):
# three rigs (one session resumed after its first pooling) pooled twice give exactly the union;
# export/report/sessions --db SERVER equal the same from a pooled SQLite file byte for byte;
# a newer server schema, a table of another shape, an unreachable server and a refused password
# are refused with clear messages; a connection dropped mid-session leaves nothing of that
# session, which arrives at the next pooling; `pool --follow` killed 3 times while a rig writes
# never leaves a partial session (20 kills: tests/soak/pool_pg_kill.sh).
. tests/e2e/lib.sh
. tests/e2e/pg.inc
FILL=$ROOT/$BUILD/tools/store_fill
CHECKS="union, export equality, refusals, dropped connection, follow kills"
if ! pg_start; then
  for c in $CHECKS; do skip "pool_pg: $c" "$PG_WHY"; done
  exit 0
fi
ok "a throwaway PostgreSQL cluster started ($PGBIN)"
srv_count() {  # SCHEMA
  pg_sql "SELECT (SELECT count(*) FROM $1.sessions) || ' ' || (SELECT count(*) FROM $1.trials) || ' ' || (SELECT count(*) FROM $1.frames) || ' ' || (SELECT count(*) FROM $1.events)"
}
sq_count() { sqlite3 "$1" "SELECT (SELECT count(*) FROM sessions) || ' ' || (SELECT count(*) FROM trials) || ' ' || (SELECT count(*) FROM frames) || ' ' || (SELECT count(*) FROM events)"; }

# -- three rigs, one with a session that is resumed after the first pooling ------------------
"$FILL" "$WORK/a.db" 2 10 --subject RIGA >/dev/null
"$FILL" "$WORK/b.db" 1 6 --subject RIGB >/dev/null
sqlite3 "$WORK/b.db" "UPDATE trials SET image = 'dir\\sub\\a.png' WHERE trial = 0"   # a backslash, escaped in COPY
"$FILL" "$WORK/c.db" 1 4 --subject RIGC --running >"$WORK/c.id"
C=$(cat "$WORK/c.id")
sqlite3 "$WORK/c.db" "UPDATE sessions SET status = 'interrupted', owner_pid = NULL"
expect_exit "pool three rigs into the server" 0 "$TACHIST" pool --into "$PGCONN" "$WORK/a.db" "$WORK/b.db" "$WORK/c.db"
expect_eq "sessions, trials, frames, events on the server" "4 30 30 4" "$(srv_count tachist)"
expect_eq "with a schema version row" 5 "$(pg_sql 'SELECT version FROM tachist.schema_version')"
expect_eq "ns integers are bigint, times timestamptz, ids uuid" "bigint uuid timestamp with time zone uuid" \
  "$(pg_sql "SELECT string_agg(format_type(atttypid, atttypmod), ' ' ORDER BY attname) FROM pg_attribute WHERE attrelid = 'tachist.trials'::regclass AND attname IN ('onset_ns', 'session_id')") $(pg_sql "SELECT format_type(atttypid, atttypmod) FROM pg_attribute WHERE attrelid = 'tachist.sessions'::regclass AND attname = 'started_utc'") $(pg_sql "SELECT format_type(atttypid, atttypmod) FROM pg_attribute WHERE attrelid = 'tachist.sessions'::regclass AND attname = 'id'")" 
# The interrupted session is resumed on its rig: two more trials, then complete.
sqlite3 "$WORK/c.db" "INSERT INTO trials (session_id, trial, block, block_trial, timed_out, frames_planned, frames_actual, dropped_frames, timing_ok, onset_ns, offset_ns, start_ns)
  VALUES ('$C', 4, 1, 4, 1, 3, 3, 0, 1, 9000000001, 9050000001, 8900000001), ('$C', 5, 1, 5, 0, 3, 4, 1, 0, 9900000002, 9966666668, 9800000002);
  INSERT INTO events (session_id, seq, mono_ns, kind, detail) VALUES ('$C', 1, 5, 'resume', NULL);
  UPDATE sessions SET status = 'complete', ended_utc = '2026-12-01T23:00:00.000Z'"
expect_exit "pool the three rigs again" 0 "$TACHIST" pool --into "$PGCONN" "$WORK/a.db" "$WORK/b.db" "$WORK/c.db"
check "the resumed session is brought up to date, not duplicated" grep -q "c.db: 0 sessions added, 1 updated, 2 trials added, 1 events added" "$WORK/last.out"
expect_eq "its status on the server" complete "$(pg_sql "SELECT status FROM tachist.sessions WHERE id = '$C'")"
expect_exit "and once more" 0 "$TACHIST" pool --into "$PGCONN" "$WORK/a.db" "$WORK/b.db" "$WORK/c.db"
expect_eq "a third pooling changes nothing" 3 "$(grep -c ': 0 sessions added, 0 updated, 0 trials added, 0 events added' "$WORK/last.out")"
expect_exit "pool the same rigs into a SQLite file" 0 "$TACHIST" pool --into "$WORK/all.db" "$WORK/a.db" "$WORK/b.db" "$WORK/c.db"
expect_eq "the server holds exactly the union (as the pooled file)" "$(sq_count "$WORK/all.db")" "$(srv_count tachist)"
expect_eq "the union is the sum of the rigs" "4 32 30 5" "$(srv_count tachist)"

# -- readers: the same tables from the server as from the pooled file --------------------------
for f in csv tsv json bids; do
  "$TACHIST" export --db "$PGCONN" --format "$f" --out "$WORK/srv.$f" >/dev/null 2>"$WORK/srv.err" || sed 's/^/#   /' "$WORK/srv.err"
  "$TACHIST" export --db "$WORK/all.db" --format "$f" --out "$WORK/file.$f" >/dev/null
  check "export --format $f from the server equals the pooled file's, byte for byte" diff -r "$WORK/srv.$f" "$WORK/file.$f"
done
check "and the exported CSV matches the database cell by cell (check_export.py)" \
  /usr/bin/python3 "$ROOT/tests/tools/check_export.py" "$WORK/all.db" csv "$WORK/srv.csv"
if [ -n "$PGURI" ]; then
  "$TACHIST" sessions --db "$PGURI" --json >"$WORK/s1.json"; "$TACHIST" sessions --db "$WORK/all.db" --json >"$WORK/s2.json"
  check "sessions --db postgresql://... equals the file's (but for the db name)" sh -c "grep -v '\"db\":' '$WORK/s1.json' >'$WORK/s1.x'; grep -v '\"db\":' '$WORK/s2.json' | cmp -s - '$WORK/s1.x'"
else
  skip "sessions --db postgresql://..." "the scratch folder's name would need escaping in a URI"
fi
"$TACHIST" report --db "$PGCONN" --all --json >"$WORK/r1.json"; "$TACHIST" report --db "$WORK/all.db" --all --json >"$WORK/r2.json"
check "report --json from the server equals the file's (but for the database name)" sh -c "grep -v '\"database\":' '$WORK/r1.json' >'$WORK/r1.x'; grep -v '\"database\":' '$WORK/r2.json' | cmp -s - '$WORK/r1.x'"
before=$(srv_count tachist)
pg_sql "CREATE DATABASE empty"
expect_exit "a reader of a database without tachist data fails" 1 "$TACHIST" sessions --db "host='$PGDIR' user=tachist dbname=empty"
check "saying so" grep -q "no tachist data in schema tachist" "$WORK/last.err"
expect_eq "and creates nothing there" 0 "$(psql "host='$PGDIR' user=tachist dbname=empty" -XAtq -c "SELECT count(*) FROM pg_namespace WHERE nspname = 'tachist'")"
expect_eq "readers never write" "$before" "$(srv_count tachist)"

# -- refusals -------------------------------------------------------------------------------
expect_exit "pool into a new schema" 0 "$TACHIST" pool --into "$PGCONN" --schema future "$WORK/b.db"
pg_sql "UPDATE future.schema_version SET version = 99"
expect_exit "a server schema newer than this build is refused" 1 "$TACHIST" pool --into "$PGCONN" --schema future "$WORK/a.db"
check "naming the version" grep -q "version 99, newer than this tachist" "$WORK/last.err"
expect_eq "and nothing was added" 1 "$(pg_sql 'SELECT count(*) FROM future.sessions')"
pg_sql "CREATE SCHEMA other; CREATE TABLE other.sessions (id integer, note text)"
expect_exit "a table of another shape in the way is refused" 1 "$TACHIST" pool --into "$PGCONN" --schema other "$WORK/a.db"
check "with a message naming it" grep -q "schema other already holds tables tachist did not make" "$WORK/last.err"
pg_sql "CREATE SCHEMA bent; CREATE TABLE bent.schema_version (version integer, written_utc timestamptz); INSERT INTO bent.schema_version VALUES (5, now()); CREATE TABLE bent.sessions (id text); CREATE TABLE bent.trials (session_id uuid)"
expect_exit "a table whose column has another type is refused" 1 "$TACHIST" pool --into "$PGCONN" --schema bent "$WORK/a.db"
check "naming the column and both types" grep -q "table bent.sessions is not tachist's: its column id is text, tachist keeps uuid there" "$WORK/last.err"
expect_exit "an unreachable server fails" 1 "$TACHIST" pool --into "host=$WORK/nowhere user=tachist dbname=postgres" "$WORK/a.db"
check "saying it cannot connect" grep -q "cannot connect to the PostgreSQL server" "$WORK/last.err"
expect_exit "a refused password fails" 1 env PGPASSWORD=wrong "$TACHIST" pool --into "$PGCONN" "$WORK/a.db"
check "with the server's reason" grep -q "password authentication failed" "$WORK/last.err"
expect_exit "a bad schema name is a usage error" 2 "$TACHIST" pool --into "$PGCONN" --schema 'x; drop' "$WORK/a.db"
expect_exit "--follow into a file is a usage error" 2 "$TACHIST" pool --into "$WORK/all.db" --follow "$WORK/a.db"
expect_exit "--schema into a file is a usage error" 2 "$TACHIST" pool --into "$WORK/all.db" --schema lab "$WORK/a.db"
check "saying --schema needs a server for --into" grep -q -- "--schema needs a PostgreSQL server for --into" "$WORK/last.err"
expect_eq "the refusals left the server as it was" "4 32 30 5" "$(srv_count tachist)"

# -- a connection dropped in the middle of a session -------------------------------------------
"$FILL" "$WORK/d.db" 2 8 --subject RIGD >"$WORK/d.ids"
pg_sql "CREATE FUNCTION tachist.drop_me() RETURNS trigger LANGUAGE plpgsql AS \$\$ BEGIN
  PERFORM pg_terminate_backend(pg_backend_pid()); RETURN NULL; END \$\$;
  CREATE TRIGGER drop_me BEFORE INSERT ON tachist.events FOR EACH ROW EXECUTE FUNCTION tachist.drop_me()"
expect_exit "a connection dropped while a session is sent fails" 1 "$TACHIST" pool --into "$PGCONN" "$WORK/d.db"
check "saying the connection was lost" grep -q "connection to the server was lost" "$WORK/last.err"
expect_eq "nothing of that rig's sessions is on the server" "0 0" \
  "$(pg_sql "SELECT (SELECT count(*) FROM tachist.sessions WHERE subject = 'RIGD') || ' ' || (SELECT count(*) FROM tachist.trials t JOIN tachist.sessions s ON s.id = t.session_id WHERE s.subject = 'RIGD')")"
pg_sql "DROP TRIGGER drop_me ON tachist.events"
expect_exit "the next pooling" 0 "$TACHIST" pool --into "$PGCONN" "$WORK/d.db"
check "sends both sessions whole" grep -q "d.db: 2 sessions added, 0 updated, 16 trials added, 2 events added" "$WORK/last.out"

# -- deleting on the server: sessions take their rows with them -----------------------------
# The server's tables carry no per-row reference to sessions (it would double the time of taking
# a session; every session's rows arrive in the transaction that writes its row); triggers do
# what ON DELETE CASCADE does in the SQLite file.
rows_of() { pg_sql "SELECT (SELECT count(*) FROM tachist.trials WHERE session_id IN ($1)) || ' ' || (SELECT count(*) FROM tachist.frames WHERE session_id IN ($1)) || ' ' || (SELECT count(*) FROM tachist.events WHERE session_id IN ($1))"; }
D_IDS=$(sed "s/.*/'&'/" "$WORK/d.ids" | paste -sd, -)
expect_eq "the dropped rig's sessions have their rows" "16 16 2" "$(rows_of "$D_IDS")"
pg_sql "DELETE FROM tachist.sessions WHERE subject = 'RIGD'" >/dev/null
expect_eq "deleting sessions on the server deletes their trials, frames and events" "0 0 0" "$(rows_of "$D_IDS")"
A1=$(pg_sql "SELECT id FROM tachist.sessions WHERE subject = 'RIGA' ORDER BY id LIMIT 1")
pg_sql "SELECT 1 FROM tachist.frames WHERE session_id = '$A1' AND trial = 0" | grep -q 1 || notok "a pooled trial has its frame row"
pg_sql "DELETE FROM tachist.trials WHERE session_id = '$A1' AND trial = 0" >/dev/null
expect_eq "deleting a trial deletes its frames" 0 "$(pg_sql "SELECT count(*) FROM tachist.frames WHERE session_id = '$A1' AND trial = 0")"
expect_eq "and nothing else" "4 31 29 5" "$(srv_count tachist)"

# -- a value the server's column type cannot take ---------------------------------------------
"$FILL" "$WORK/w.db" 1 4 --subject WIDE >/dev/null
sqlite3 "$WORK/w.db" "UPDATE trials SET frames_actual = 3000000000 WHERE trial = 2"
expect_exit "a source integer beyond the server's integer column fails" 1 "$TACHIST" pool --into "$PGCONN" "$WORK/w.db"
check "naming the column and the value" grep -q "column frames_actual holds a value the server's integer cannot take ('3000000000')" "$WORK/last.err"
expect_eq "and nothing of that session is on the server" 0 "$(pg_sql "SELECT count(*) FROM tachist.sessions WHERE subject = 'WIDE'")"

# -- the server lists tachist's connections under its name -----------------------------------
"$TACHIST" pool --into "$PGCONN" --follow --interval 0.1 "$WORK/a.db" >/dev/null 2>&1 &
ap=$!
n=0
while [ "$n" -lt 300 ] && [ "$(pg_sql "SELECT count(*) FROM pg_stat_activity WHERE application_name = 'tachist'")" != 1 ]; do sleep 0.1; n=$((n + 1)); done
expect_eq "a pooling connection shows as application tachist on the server" 1 "$(pg_sql "SELECT count(*) FROM pg_stat_activity WHERE application_name = 'tachist'")"
kill -TERM "$ap"; wait "$ap"

# -- pool --follow: ended sessions only; an unreachable server is retried ----------------------
"$FILL" "$WORK/f.db" 1 3 --subject RUNNING --running >/dev/null
"$FILL" "$WORK/f.db" 1 3 --subject ENDED >/dev/null
"$TACHIST" pool --into "$PGCONN" --schema followed --follow --interval 0.1 "$WORK/f.db" >"$WORK/f.out" 2>"$WORK/f.err" &
fp=$!
n=0
while [ "$n" -lt 300 ] && [ "$(pg_sql "SELECT count(*) FROM followed.sessions" 2>/dev/null)" != 1 ]; do sleep 0.1; n=$((n + 1)); done
sleep 0.5
kill -TERM "$fp"; wait "$fp"
expect_eq "pool --follow sends the ended session and leaves the running one" "ENDED" \
  "$(pg_sql "SELECT string_agg(subject, ' ') FROM followed.sessions")"
# Readers take --schema for a server's other schema, and refuse it for a file.
"$TACHIST" sessions --db "$PGCONN" --schema followed >"$WORK/fs.out" 2>"$WORK/fs.err"
check "sessions --db SERVER --schema followed lists that schema's one session" \
  sh -c "grep -c ENDED '$WORK/fs.out' | grep -qx 1 && ! grep -q RIGA '$WORK/fs.out'"
"$TACHIST" export --db "$PGCONN" --schema followed --format csv --out "$WORK/fs.csv" 2>/dev/null
expect_eq "export --schema followed writes that schema's 3 trials" 4 "$(wc -l <"$WORK/fs.csv")"
expect_exit "report --schema with a file for --db is a usage error" 2 "$TACHIST" report --db "$WORK/all.db" --schema followed
check "saying --schema needs a server" grep -q -- "--schema needs a PostgreSQL server for --db" "$WORK/last.err"
expect_exit "a reader's bad schema name is a usage error" 2 "$TACHIST" sessions --db "$PGCONN" --schema 'x; drop'
expect_exit "a schema without tachist data is refused" 1 "$TACHIST" sessions --db "$PGCONN" --schema nothing_here
check "naming it" grep -q "no tachist data in schema nothing_here" "$WORK/last.err"
"$TACHIST" pool --into "host=$WORK/nowhere user=tachist dbname=postgres" --follow --interval 0.1 "$WORK/a.db" >"$WORK/f.out" 2>"$WORK/f.err" &
fp=$!
sleep 4
kill -TERM "$fp"; wait "$fp"; frc=$?
expect_eq "pool --follow with the server unreachable keeps trying and stops on SIGTERM with 0" 0 "$frc"
expect_eq "telling the outage once, not at every retry" 1 "$(grep -c 'cannot connect to the PostgreSQL server' "$WORK/f.err")"

# -- pool --follow killed at random moments while a rig writes -------------------------------
follow_kill_check 3 6 40
