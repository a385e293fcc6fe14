# soak store_race — two processes creating the same new database at once, many times over (the
# quick version, 50 pairs, is store_testConcurrentCreate in test_store): every writer must
# complete and every file must hold both sessions. Pairs from $RACE_PAIRS (default 500).
. tests/e2e/lib.sh
FILL=$ROOT/$BUILD/tools/store_fill
PAIRS=${RACE_PAIRS:-500}
bad=0
i=0
while [ "$i" -lt "$PAIRS" ]; do
  db=$WORK/race$i.db
  "$FILL" "$db" 1 2 --plain --flips 2 --subject A >/dev/null 2>"$WORK/a.err" & a=$!
  "$FILL" "$db" 1 2 --plain --flips 2 --subject B >/dev/null 2>"$WORK/b.err" & b=$!
  wait $a; ra=$?
  wait $b; rb=$?
  n=$(sqlite3 "$db" 'SELECT count(*) FROM sessions' 2>/dev/null)
  if [ "$ra" != 0 ] || [ "$rb" != 0 ] || [ "$n" != 2 ]; then
    bad=$((bad + 1))
    [ "$bad" -le 3 ] && echo "# pair $i: exits $ra $rb, $n sessions: $(cat "$WORK/a.err" "$WORK/b.err" | head -n 2)"
  fi
  rm -f "$db" "$db-wal" "$db-shm"
  i=$((i + 1))
done
expect_eq "$PAIRS pairs of processes creating one new database: all complete" 0 "$bad"
