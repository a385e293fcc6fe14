# bench_pool_pg — `tachist pool --into` a throwaway PostgreSQL cluster (tests/e2e/pg.inc) with
# 1,000,000 trials, against psql's \copy of the same trial rows from a CSV file into an empty table
# of the same shape (target ratio <= 1.5); then a second pooling of the same file (nothing to send).
# Figures only; nothing here asserts a time.
set -u
. tests/e2e/lib.sh
. tests/e2e/pg.inc
T=$ROOT/$BUILD/tools
ROWS=${POOL_BENCH_ROWS:-1000000}
if ! pg_start; then
  echo "   skipped: $PG_WHY"
  exit 0
fi
"$T/store_fill" "$WORK/big.db" 1 1000 --plain --flips 0 >/dev/null || exit 1
sqlite3 "$WORK/big.db" "WITH RECURSIVE k(i) AS (SELECT 1 UNION ALL SELECT i + 1 FROM k WHERE i < $ROWS / 1000 - 1)
  INSERT INTO trials (session_id, trial, block, block_name, block_trial, practice, stim, image,
    category, choice, level, source, labels, response_key, response, response_category, correct,
    rt_ms, timed_out, frames_planned, frames_actual, dropped_frames, timing_ok, onset_ns, offset_ns,
    start_ns, staircase, anticipation, key_sdl_ms, level_requested, repeat_of, rt_clock)
  SELECT session_id, trial + 1000 * i, block, block_name, block_trial + 1000 * i, practice, stim, image,
    category, choice, level, source, labels, response_key, response, response_category, correct,
    rt_ms, timed_out, frames_planned, frames_actual, dropped_frames, timing_ok, onset_ns + i * 2000000000000,
    offset_ns, start_ns, staircase, anticipation, key_sdl_ms, level_requested, repeat_of, rt_clock
  FROM trials, k WHERE trial < 1000;" || exit 1
now() { date +%s.%N; }
t0=$(now)
"$TACHIST" pool --into "$PGCONN" "$WORK/big.db" >"$WORK/pool.out" || exit 1
t1=$(now)
"$TACHIST" pool --into "$PGCONN" "$WORK/big.db" >"$WORK/pool2.out" || exit 1
t2=$(now)
rows=$(pg_sql "SELECT count(*) FROM tachist.trials")
# The baseline: the same columns of the same rows as CSV, \copy into an empty table of the same
# shape (its primary key included), in schema base.
cols=$(pg_sql "SELECT string_agg(attname, ', ' ORDER BY attnum) FROM pg_attribute WHERE attrelid = 'tachist.trials'::regclass AND attnum > 0 AND NOT attisdropped")
sqlite3 -csv "$WORK/big.db" "SELECT $cols FROM trials" >"$WORK/trials.csv" || exit 1
pg_sql "CREATE SCHEMA base; CREATE TABLE base.trials (LIKE tachist.trials INCLUDING ALL)" || exit 1
t3=$(now)
psql "$PGCONN" -XAtq -v ON_ERROR_STOP=1 -c "\\copy base.trials ($cols) FROM '$WORK/trials.csv' WITH (FORMAT csv)" || exit 1
t4=$(now)
echo "   pooling $rows trials (one session) into PostgreSQL over a Unix socket:"
awk -v a="$t0" -v b="$t1" -v c="$t2" -v d="$t3" -v e="$t4" 'BEGIN {
  printf "     tachist pool --into     %7.2f s\n", b - a
  printf "     psql \\copy from CSV     %7.2f s   (the same rows and columns, into an empty table with its key)\n", e - d
  printf "     ratio                   %7.2f     (target <= 1.5)\n", (b - a) / (e - d)
  printf "     pooling it again        %7.2f s   (nothing to send)\n", c - b }'
