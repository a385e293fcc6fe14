# e2e export_old — the exported column list holds for old databases too: each fixture of an
# earlier schema (tests/data/store_v1.sql .. store_v4.sql) is exported in CSV, TSV, JSON and BIDS
# straight from the old file (read through a migrated copy; the file itself is not written), and
# every table equals, cell for cell, the same data brought to the current schema by `pool`
# (reference: Python's csv, json and sqlite3 modules in tests/tools/check_export.py).
. tests/e2e/lib.sh
PY=/usr/bin/python3
for v in 1 2 3 4; do
  old=$WORK/v$v.db; mig=$WORK/mig$v.db
  sqlite3 "$old" <"tests/data/store_v$v.sql" >/dev/null
  sum=$(md5sum <"$old")
  "$TACHIST" pool --into "$mig" "$old" >/dev/null 2>&1
  check "v$v: pooled into a current database" test -s "$mig"
  for f in csv tsv json; do
    expect_exit "v$v: export $f" 0 "$TACHIST" export --db "$old" --format "$f" --out "$WORK/v$v.$f"
    check "v$v: $f has the exported columns and equals the migrated data" \
      $PY tests/tools/check_export.py "$mig" "$f" "$WORK/v$v.$f"
  done
  expect_exit "v$v: export bids" 0 "$TACHIST" export --db "$old" --format bids --out "$WORK/bids$v"
  # BIDS "Tabular files": onset, duration (and our response_time), then the same columns.
  expect_eq "v$v: the BIDS table's header is onset, duration, response_time and the CSV's columns" \
    "onset	duration	response_time	$(head -n 1 "$WORK/v$v.tsv" | tr -d '\r')" \
    "$(cat "$WORK"/bids$v/sub-*/ses-*/beh/*_beh.tsv | head -n 1)"
  expect_eq "v$v: the BIDS table has one line per trial" \
    "$(sqlite3 "$mig" 'SELECT count(*) FROM trials')" \
    "$(cat "$WORK"/bids$v/sub-*/ses-*/beh/*_beh.tsv | grep -vc '^onset')"
  expect_eq "v$v: the old file was not written" "$sum" "$(md5sum <"$old")"
done
