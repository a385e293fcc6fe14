# e2e pool — `tachist pool --into FILE DB...` pools databases keyed by session UUID; a second
# pooling adds nothing; an old schema (tests/data/store_v1.sql) is migrated, a newer one refused.
. tests/e2e/lib.sh
FILL=$ROOT/$BUILD/tools/store_fill
count() { sqlite3 "$1" "SELECT (SELECT count(*) FROM sessions) || ' ' || (SELECT count(*) FROM trials) || ' ' || (SELECT count(*) FROM frames) || ' ' || (SELECT count(*) FROM events)"; }
"$FILL" "$WORK/a.db" 2 10 --subject RIGA >/dev/null
"$FILL" "$WORK/b.db" 1 6 --subject RIGB >/dev/null
sqlite3 "$WORK/v1.db" <tests/data/store_v1.sql >/dev/null
expect_exit "pool two rigs and a version-1 file" 0 "$TACHIST" pool --into "$WORK/all.db" "$WORK/a.db" "$WORK/b.db" "$WORK/v1.db"
expect_eq "sessions, trials, frames, events pooled" "4 29 26 4" "$(count "$WORK/all.db")"
check "the old file was read through a migrated copy" grep -q "schema version 1" "$WORK/last.out"
expect_eq "the old source file itself is unchanged" 1 "$(sqlite3 "$WORK/v1.db" 'PRAGMA user_version')"
expect_exit "pooling the same files again" 0 "$TACHIST" pool --into "$WORK/all.db" "$WORK/a.db" "$WORK/b.db" "$WORK/v1.db"
expect_eq "a second pooling adds nothing" "4 29 26 4" "$(count "$WORK/all.db")"
expect_eq "and says so" 3 "$(grep -c ': 0 sessions added, 0 updated, 0 trials added, 0 events added' "$WORK/last.out")"
expect_eq "pooled file checks ok" ok "$(sqlite3 "$WORK/all.db" 'PRAGMA integrity_check')"
expect_eq "pooled trials equal their sources" \
  "$(sqlite3 "$WORK/a.db" 'SELECT session_id, trial, image, rt_ms, onset_ns, labels FROM trials ORDER BY 1, 2' | md5sum)" \
  "$(sqlite3 "$WORK/all.db" "SELECT session_id, trial, image, rt_ms, onset_ns, labels FROM trials WHERE session_id IN (SELECT id FROM sessions WHERE subject = 'RIGA') ORDER BY 1, 2" | md5sum)"
# A session that continued on the rig after an earlier pool: the new trials and the final
# status come across.
"$FILL" "$WORK/c.db" 1 4 --subject RIGC --running >"$WORK/c.id"
expect_exit "pool a running session" 0 "$TACHIST" pool --into "$WORK/all.db" "$WORK/c.db"
C=$(cat "$WORK/c.id")
sqlite3 "$WORK/c.db" "INSERT INTO trials (session_id, trial, block, block_trial, timed_out) VALUES ('$C', 4, 1, 4, 1); UPDATE sessions SET status = 'complete', ended_utc = '2026-12-01T23:00:00.000Z'"
expect_exit "pool it again after it finished" 0 "$TACHIST" pool --into "$WORK/all.db" "$WORK/c.db"
check "one session updated, one trial added" grep -q ": 0 sessions added, 1 updated, 1 trials added" "$WORK/last.out"
expect_eq "its status is now complete" complete "$(sqlite3 "$WORK/all.db" "SELECT status FROM sessions WHERE id = '$C'")"

sqlite3 "$WORK/future.db" "CREATE TABLE sessions(id); PRAGMA user_version = 99; PRAGMA application_id = 1952671859;"
expect_exit "a newer schema is refused" 1 "$TACHIST" pool --into "$WORK/all.db" "$WORK/future.db"
check "with a message naming the version" grep -q "schema version 99 is newer" "$WORK/last.err"
expect_exit "a missing source fails" 1 "$TACHIST" pool --into "$WORK/all.db" "$WORK/none.db"
expect_exit "pooling a file into itself fails" 1 "$TACHIST" pool --into "$WORK/all.db" "$WORK/all.db"
expect_exit "no sources is a usage error" 2 "$TACHIST" pool --into "$WORK/all.db"
expect_exit "no --into is a usage error" 2 "$TACHIST" pool "$WORK/a.db"
expect_eq "failed poolings changed nothing" "5 34 30 5" "$(count "$WORK/all.db")"

# Reading never writes: `sessions` on a version-1 file reads it through a migrated copy and
# leaves it as it was; a writer (pooling into it) migrates it in place.
before=$(sha256sum <"$WORK/v1.db")
expect_exit "sessions on a version-1 file" 0 "$TACHIST" sessions --db "$WORK/v1.db"
expect_eq "reading left the file byte for byte as it was" "$before" "$(sha256sum <"$WORK/v1.db")"
expect_exit "pooling into a version-1 file" 0 "$TACHIST" pool --into "$WORK/v1.db" "$WORK/b.db"
expect_eq "the file is now version 5" 5 "$(sqlite3 "$WORK/v1.db" 'PRAGMA user_version')"
expect_eq "its trials survived the migration" "3 512.5" "$(sqlite3 "$WORK/v1.db" "SELECT count(*) || ' ' || (SELECT rt_ms FROM trials WHERE trial = 0) FROM trials WHERE session_id NOT IN (SELECT id FROM sessions WHERE subject = 'RIGB')")"
expect_eq "new columns have their defaults" "0||frame" "$(sqlite3 "$WORK/v1.db" 'SELECT anticipation, level_requested, rt_clock FROM trials WHERE trial = 0 AND session_id NOT IN (SELECT id FROM sessions WHERE subject = '"'RIGB'"')')"
# A damaged source is named as the damaged file, not the target.
"$FILL" "$WORK/dmg.db" 3 200 --subject DMG >/dev/null
sqlite3 "$WORK/dmg.db" 'PRAGMA journal_mode = DELETE' >/dev/null
dd if=/dev/zero of="$WORK/dmg.db" bs=4096 seek=3 count=30 conv=notrunc 2>/dev/null
expect_exit "pooling a damaged source fails" 1 "$TACHIST" pool --into "$WORK/all.db" "$WORK/dmg.db"
check "the message names the damaged source" grep -q "dmg.db: the database file is damaged" "$WORK/last.err"
check "and not the target" sh -c "! grep -q 'all.db' '$WORK/last.err'"
# A foreign SQLite file is refused by name, and pooling into one leaves it unchanged.
sqlite3 "$WORK/other.db" "CREATE TABLE notes(t); INSERT INTO notes VALUES ('x')"
expect_exit "a foreign source is refused" 1 "$TACHIST" pool --into "$WORK/all.db" "$WORK/other.db"
check "as not a tachist database" grep -q "other.db: not a tachist database" "$WORK/last.err"
before=$(sha256sum <"$WORK/other.db")
expect_exit "pooling into a foreign file is refused" 1 "$TACHIST" pool --into "$WORK/other.db" "$WORK/a.db"
expect_eq "which is left byte for byte as it was" "$before" "$(sha256sum <"$WORK/other.db")"
check "and not switched to WAL" test ! -e "$WORK/other.db-wal"
# The old command name points to the new one.
expect_exit "the retired command name is an error" 2 "$TACHIST" "mer""ge" --into "$WORK/all.db" "$WORK/a.db"
check "naming pool" grep -q "tachist pool" "$WORK/last.err"
