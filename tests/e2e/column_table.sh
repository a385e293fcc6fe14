# e2e column_table — a trial column added to the column table alone reaches every export format.
# Builds the store and export tests once more with TACHIST_TEST_COLUMN, which adds the one
# descriptor row `test_column` (app/io/store_columns.c), its field and its value (7 * trial + 3);
# test_export then finds it, with that value on every row, in CSV, TSV, JSON and BIDS (header,
# cells and the sidecar's description), with no other change to the store or the writers.
. tests/e2e/lib.sh
# Make cannot name a target with a space in it, and $WORK lies under $TMPDIR, which may have one:
# the build goes in a folder of its own under build/, relative to the checkout.
B=build/e2e-column-table.$$
on_exit 'rm -rf "$B"'
if nice make -s BUILD="$B" CFLAGS="-O0 -DTACHIST_TEST_COLUMN" "$B/tests/test_export" "$B/tests/test_store" >"$WORK/make.out" 2>&1; then
  ok "the test build with one more trial column compiles"
else
  notok "the test build with one more trial column compiles"; sed 's/^/#   /' "$WORK/make.out" | tail -n 20
fi
"$B/tests/test_export" >"$WORK/export.out" 2>&1
expect_eq "test_export passes with the extra column in every format" 0 $?
grep -q "export_testBids" "$WORK/export.out"
expect_eq "the BIDS check ran" 0 $?
"$B/tests/test_store" >"$WORK/store.out" 2>&1
expect_eq "test_store passes with the extra column" 0 $?
grep '\[  \(ERROR\|FAILED\)' "$WORK/export.out" "$WORK/store.out" | head -n 10 | sed 's/^/#   /'
