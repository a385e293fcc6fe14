# bench_pool_pg — `tachist pool --into` a throwaway PostgreSQL cluster (tests/e2e/pg.inc) with
# 1,000,000 trials, against psql's \copy of the same trial rows from a CSV file into an empty table
# of the same shape (target ratio <= 1.5); then a second pooling of the same file (nothing to send).
# The two are run side by side in alternation, ROUNDS times (default 3), each into a fresh schema
# after a CHECKPOINT (so neither pays for the other's write-ahead log), and the medians compared.
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
ROUNDS=${POOL_BENCH_ROUNDS:-3}
"$TACHIST" pool --into "$PGCONN" --schema shape "$WORK/big.db" >/dev/null || exit 1
cols=$(pg_sql "SELECT string_agg(attname, ', ' ORDER BY attnum) FROM pg_attribute WHERE attrelid = 'shape.trials'::regclass AND attnum > 0 AND NOT attisdropped")
sqlite3 -csv "$WORK/big.db" "SELECT $cols FROM trials" >"$WORK/trials.csv" || exit 1
rows=$(pg_sql "SELECT count(*) FROM shape.trials")
: >"$WORK/ours"; : >"$WORK/base"; : >"$WORK/again"
r=1
while [ "$r" -le "$ROUNDS" ]; do
  # The baseline: the same columns of the same rows as CSV, \copy into an empty table of the same
  # shape (its primary key included).
  pg_sql "CREATE SCHEMA base$r; CREATE TABLE base$r.trials (LIKE shape.trials INCLUDING ALL); CHECKPOINT" || exit 1
  t0=$(now)
  psql "$PGCONN" -XAtq -v ON_ERROR_STOP=1 -c "\\copy base$r.trials ($cols) FROM '$WORK/trials.csv' WITH (FORMAT csv)" || exit 1
  t1=$(now)
  pg_sql "CHECKPOINT" || exit 1
  t2=$(now)
  "$TACHIST" pool --into "$PGCONN" --schema round$r "$WORK/big.db" >"$WORK/pool.out" || exit 1
  t3=$(now)
  "$TACHIST" pool --into "$PGCONN" --schema round$r "$WORK/big.db" >"$WORK/pool2.out" || exit 1
  t4=$(now)
  got=$(pg_sql "SELECT count(*) FROM round$r.trials")
  [ "$got" = "$rows" ] || { echo "   round $r: the server holds $got trials, not $rows"; exit 1; }
  awk -v a="$t0" -v b="$t1" 'BEGIN { printf "%.3f\n", b - a }' >>"$WORK/base"
  awk -v a="$t2" -v b="$t3" 'BEGIN { printf "%.3f\n", b - a }' >>"$WORK/ours"
  awk -v a="$t3" -v b="$t4" 'BEGIN { printf "%.3f\n", b - a }' >>"$WORK/again"
  r=$((r + 1))
done
median() { sort -n "$1" | awk '{ v[NR] = $1 } END { print (NR % 2) ? v[(NR + 1) / 2] : (v[NR / 2] + v[NR / 2 + 1]) / 2 }'; }
ours=$(median "$WORK/ours"); base=$(median "$WORK/base"); again=$(median "$WORK/again")
echo "   pooling $rows trials (one session) into PostgreSQL over a Unix socket, $ROUNDS rounds:"
printf '     tachist pool --into      %ss\n' "$(tr '\n' ' ' <"$WORK/ours")"
printf '     psql \\copy from CSV      %ss   (the same rows and columns, into an empty table with its key)\n' \
  "$(tr '\n' ' ' <"$WORK/base")"
awk -v a="$ours" -v b="$base" -v c="$again" 'BEGIN {
  printf "     medians                  %.2f s against %.2f s\n", a, b
  printf "     ratio                    %.2f     (target <= 1.5)\n", a / b
  printf "     pooling it again         %.2f s   (nothing to send; median)\n", c }'
