# e2e merge — `tachist merge --into FILE DB...` pools databases keyed by session UUID; a second
# merge adds nothing; an old schema (tests/data/store_v1.sql) is migrated, a newer one refused.
. tests/e2e/lib.sh
FILL=$ROOT/$BUILD/tools/store_fill
count() { sqlite3 "$1" "SELECT (SELECT count(*) FROM sessions) || ' ' || (SELECT count(*) FROM trials) || ' ' || (SELECT count(*) FROM frames) || ' ' || (SELECT count(*) FROM events)"; }
"$FILL" "$WORK/a.db" 2 10 --subject RIGA >/dev/null
"$FILL" "$WORK/b.db" 1 6 --subject RIGB >/dev/null
sqlite3 "$WORK/v1.db" <tests/data/store_v1.sql >/dev/null
expect_exit "merge two rigs and a version-1 file" 0 "$TACHIST" merge --into "$WORK/all.db" "$WORK/a.db" "$WORK/b.db" "$WORK/v1.db"
expect_eq "sessions, trials, frames, events pooled" "4 29 26 4" "$(count "$WORK/all.db")"
check "the old file was read through a migrated copy" grep -q "schema version 1" "$WORK/last.out"
expect_eq "the old source file itself is unchanged" 1 "$(sqlite3 "$WORK/v1.db" 'PRAGMA user_version')"
expect_exit "merging the same files again" 0 "$TACHIST" merge --into "$WORK/all.db" "$WORK/a.db" "$WORK/b.db" "$WORK/v1.db"
expect_eq "a second merge adds nothing" "4 29 26 4" "$(count "$WORK/all.db")"
expect_eq "and says so" 3 "$(grep -c ': 0 sessions added, 0 updated, 0 trials added, 0 events added' "$WORK/last.out")"
expect_eq "merged file checks ok" ok "$(sqlite3 "$WORK/all.db" 'PRAGMA integrity_check')"
expect_eq "merged trials equal their sources" \
  "$(sqlite3 "$WORK/a.db" 'SELECT session_id, trial, image, rt_ms, onset_ns, labels FROM trials ORDER BY 1, 2' | md5sum)" \
  "$(sqlite3 "$WORK/all.db" "SELECT session_id, trial, image, rt_ms, onset_ns, labels FROM trials WHERE session_id IN (SELECT id FROM sessions WHERE subject = 'RIGA') ORDER BY 1, 2" | md5sum)"
# A session that continued on the rig after an earlier merge: the new trials and the final
# status come across.
"$FILL" "$WORK/c.db" 1 4 --subject RIGC --running >"$WORK/c.id"
expect_exit "merge a running session" 0 "$TACHIST" merge --into "$WORK/all.db" "$WORK/c.db"
C=$(cat "$WORK/c.id")
sqlite3 "$WORK/c.db" "INSERT INTO trials (session_id, trial, block, block_trial, timed_out) VALUES ('$C', 4, 1, 4, 1); UPDATE sessions SET status = 'complete', ended_utc = '2026-12-01T23:00:00.000Z'"
expect_exit "merge it again after it finished" 0 "$TACHIST" merge --into "$WORK/all.db" "$WORK/c.db"
check "one session updated, one trial added" grep -q ": 0 sessions added, 1 updated, 1 trials added" "$WORK/last.out"
expect_eq "its status is now complete" complete "$(sqlite3 "$WORK/all.db" "SELECT status FROM sessions WHERE id = '$C'")"

sqlite3 "$WORK/future.db" "CREATE TABLE sessions(id); PRAGMA user_version = 99;"
expect_exit "a newer schema is refused" 1 "$TACHIST" merge --into "$WORK/all.db" "$WORK/future.db"
check "with a message naming the version" grep -q "schema version 99 is newer" "$WORK/last.err"
expect_exit "a missing source fails" 1 "$TACHIST" merge --into "$WORK/all.db" "$WORK/none.db"
expect_exit "merging a file into itself fails" 1 "$TACHIST" merge --into "$WORK/all.db" "$WORK/all.db"
expect_exit "no sources is a usage error" 2 "$TACHIST" merge --into "$WORK/all.db"
expect_exit "no --into is a usage error" 2 "$TACHIST" merge "$WORK/a.db"
expect_eq "failed merges changed nothing" "5 34 30 5" "$(count "$WORK/all.db")"

# Opening a version-1 file in place migrates it (sessions reads it).
expect_exit "sessions on a version-1 file" 0 "$TACHIST" sessions --db "$WORK/v1.db"
expect_eq "the file is now version 3" 3 "$(sqlite3 "$WORK/v1.db" 'PRAGMA user_version')"
expect_eq "its trials survived the migration" "3 512.5" "$(sqlite3 "$WORK/v1.db" "SELECT count(*) || ' ' || (SELECT rt_ms FROM trials WHERE trial = 0) FROM trials")"
expect_eq "new columns have their defaults" "0|" "$(sqlite3 "$WORK/v1.db" 'SELECT anticipation, level_requested FROM trials WHERE trial = 0')"
