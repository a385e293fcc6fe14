# bench_store — the store's trial commit latency against a bare SQLite insert of the same row
# (target ratio <= 1.5), and export of 1,000,000 trials to CSV against the sqlite3 shell's CSV
# output of the same table (target ratio <= 1.2), with peak memory at 100,000 and 1,000,000 rows
# (must not grow with the row count). Figures only; nothing here asserts a time.
set -u
ROOT=$(pwd)
T=$ROOT/$BUILD/tools
W=$(mktemp -d "${TMPDIR:-/tmp}/bench-store.XXXXXX")
trap 'rm -rf "$W"' EXIT
N=${STORE_BENCH_TRIALS:-1000}
ROWS=${STORE_BENCH_ROWS:-1000000}

# -- commit latency ---------------------------------------------------------------------------
"$T/store_bench" "$W" "$N" 150 >"$W/lat" || exit 1
read -r _ s50 s99 <<EOF2
$(sed -n 1p "$W/lat")
EOF2
read -r _ b50 b99 <<EOF2
$(sed -n 2p "$W/lat")
EOF2
echo "   trial commit, $N trials with 150 flips each, WAL + synchronous=FULL, on $(df -P "$W" | awk 'NR==2 {print $1}'):"
printf '     store_trial_put   p50 %9.1f us   p99 %9.1f us\n' "$s50" "$s99"
printf '     bare SQLite       p50 %9.1f us   p99 %9.1f us\n' "$b50" "$b99"
awk -v a="$s50" -v b="$b50" -v c="$s99" -v d="$b99" 'BEGIN { printf "     ratio             p50 %9.2f      p99 %9.2f      (target <= 1.5)\n", a / b, c / d }'

# -- export -----------------------------------------------------------------------------------
# A session of 1,000 trials written through the store, then copied in SQL up to ROWS rows.
"$T/store_fill" "$W/big.db" 1 1000 --plain --flips 0 >/dev/null || exit 1
grow() {  # DB TARGET_ROWS
  sqlite3 "$1" "WITH RECURSIVE k(i) AS (SELECT 1 UNION ALL SELECT i + 1 FROM k WHERE i < $2 / 1000 - 1)
    INSERT INTO trials (session_id, trial, block, block_name, block_trial, practice, stim, image,
      category, choice, level, source, labels, response_key, response, response_category, correct,
      rt_ms, timed_out, frames_planned, frames_actual, dropped_frames, timing_ok, onset_ns, offset_ns,
      start_ns, staircase, anticipation, key_sdl_ms, level_requested, repeat_of, rt_clock)
    SELECT session_id, trial + 1000 * i, block, block_name, block_trial + 1000 * i, practice, stim, image,
      category, choice, level, source, labels, response_key, response, response_category, correct,
      rt_ms, timed_out, frames_planned, frames_actual, dropped_frames, timing_ok, onset_ns + i * 2000000000000,
      offset_ns, start_ns, staircase, anticipation, key_sdl_ms, level_requested, repeat_of, rt_clock
    FROM trials, k WHERE trial < 1000;" || exit 1
}
cp "$W/big.db" "$W/mid.db"
grow "$W/mid.db" 100000
grow "$W/big.db" "$ROWS"
peak() { sed -n 's/.*Maximum resident set size (kbytes): //p' "$1"; }
secs() { sed -n 's/.*Elapsed (wall clock) time (h:mm:ss or m:ss): //p' "$1" | awk -F: '{ if (NF == 3) print $1 * 3600 + $2 * 60 + $3; else print $1 * 60 + $2 }'; }
/usr/bin/time -v "$TACHIST" export --db "$W/mid.db" --format csv --out "$W/mid.csv" 2>"$W/t_mid" || exit 1
/usr/bin/time -v "$TACHIST" export --db "$W/big.db" --format csv --out "$W/big.csv" 2>"$W/t_ours" || exit 1
/usr/bin/time -v sqlite3 -csv -header "$W/big.db" "SELECT * FROM trials" >"$W/cli.csv" 2>"$W/t_cli" || exit 1
# The same columns and order as the export (labels as their stored JSON text).
/usr/bin/time -v sqlite3 -csv -header "$W/big.db" "SELECT t.session_id, s.subject, s.protocol_name AS protocol,
  s.started_utc, block + 1 AS block, block_name, practice, block_trial + 1 AS block_trial, trial + 1 AS trial,
  image, category, level, source, labels, response_key, response_category AS response, correct, rt_ms,
  rt_clock, timed_out, anticipation, frames_planned, frames_actual, dropped_frames, timing_ok, onset_ns,
  staircase, repeat_of + 1 AS repeat_of
  FROM trials t JOIN sessions s ON s.id = t.session_id ORDER BY s.started_utc, t.session_id, t.trial" >"$W/cli2.csv" 2>"$W/t_cli2" || exit 1
rows=$(($(sqlite3 "$W/big.db" 'SELECT count(*) FROM trials')))
echo "   export of $rows trials to CSV:"
printf '     tachist export     %7.2f s   peak %7d KiB   (%d MB written)\n' "$(secs "$W/t_ours")" "$(peak "$W/t_ours")" $(($(wc -c <"$W/big.csv") / 1000000))
printf '     sqlite3 -csv       %7.2f s   peak %7d KiB   (%d MB written, all %d columns of the table)\n' "$(secs "$W/t_cli")" "$(peak "$W/t_cli")" $(($(wc -c <"$W/cli.csv") / 1000000)) "$(sqlite3 "$W/big.db" "SELECT count(*) FROM pragma_table_info('trials')")"
printf '     sqlite3 -csv same columns %5.2f s   peak %7d KiB   (%d MB written)\n' "$(secs "$W/t_cli2")" "$(peak "$W/t_cli2")" $(($(wc -c <"$W/cli2.csv") / 1000000))
awk -v a="$(secs "$W/t_ours")" -v b="$(secs "$W/t_cli")" -v c="$(secs "$W/t_cli2")" 'BEGIN { printf "     ratio              %7.2f against the whole table, %.2f against the same columns   (target <= 1.2)\n", a / b, a / c }'
printf '     peak memory at 100,000 rows %d KiB, at %d rows %d KiB (must not grow with rows)\n' "$(peak "$W/t_mid")" "$rows" "$(peak "$W/t_ours")"
