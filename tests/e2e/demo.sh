# e2e demo — `tachist demo` without a display: headless with the model observer, the whole demo
# protocol, block summaries, every trial stored with exact timing.
. tests/e2e/lib.sh
unset DISPLAY WAYLAND_DISPLAY
cd "$WORK"
expect_exit "demo without a display exits 0" 0 "$TACHIST" demo --db "$WORK/demo.db"
check "demo says it runs headless with the model observer" grep -q 'headless (simulated timing), observer model:' "$WORK/last.out"
expect_eq "two block summaries" 2 "$(grep -c '^block [12] ' "$WORK/last.out")"
check "session complete line" grep -q '^session .* complete$' "$WORK/last.out"
expect_eq "156 trials (12 practice + 144 main), all with exact timing" "156|156" \
  "$(sqlite3 "$WORK/demo.db" 'select count(*), sum(timing_ok) from trials')"
# The demo model's accuracy falls with the noise budget (slope < 0): clean images beat budget 32.
acc0=$(sqlite3 "$WORK/demo.db" 'select avg(correct) from trials where level=0')
acc32=$(sqlite3 "$WORK/demo.db" 'select avg(correct) from trials where level=32')
check "accuracy at budget 0 ($acc0) above budget 32 ($acc32)" awk -v a="$acc0" -v b="$acc32" 'BEGIN { exit !(a > b + 0.3) }'
check "demo prints accuracy per noise budget" grep -q '^ *32 *36 ' "$WORK/last.out"
check "demo says where to look next" grep -qx 'more:' "$WORK/last.out"
# The database path is one shell word: bare, or in single quotes when $WORK has a space.
check "one command per line: report" grep -Eq "^  tachist report --db ('[^']+'|[^ ']+) --session [0-9a-f]{8}\$" "$WORK/last.out"
check "one command per line: export" grep -Eq "^  tachist export --db ('[^']+'|[^ ']+) --format csv --session [0-9a-f]{8} --out demo.csv\$" "$WORK/last.out"
cmdline=$(sed -n 's/^  tachist report //p' "$WORK/last.out")
eval "set -- $cmdline"
expect_eq "the printed report command is read back by the shell as its words" \
  "--db|$WORK/demo.db|--session" "$1|$2|$3"
# The demo exists to show the analysis: its report must carry a psychometric fit with a threshold
# and a bootstrap interval, not a refusal (the demo model's threshold lies between its levels).
expect_exit "report on the demo database" 0 "$TACHIST" report --db "$WORK/demo.db"
check "demo report fits the main block" grep -q 'block main: logistic alpha' "$WORK/last.out"
check "demo report gives a threshold with an interval" grep -Eq '^ +threshold [0-9.]+ \[[0-9.]+, [0-9.]+\]' "$WORK/last.out"
