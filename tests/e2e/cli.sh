# e2e cli — the command line contract: help, version, unknown commands, exit codes.
. tests/e2e/lib.sh
expect_exit "tachist --version exits 0" 0 "$TACHIST" --version
check "version line names tachist" grep -q '^tachist [0-9]' "$WORK/last.out"
expect_exit "unknown command is a usage error" 2 "$TACHIST" frobnicate
expect_exit "help without a terminal exits 0" 0 "$TACHIST" </dev/null
for c in console check run timing sessions report export fit calc stimuli pool demo; do
  expect_exit "$c --help exits 0" 0 "$TACHIST" "$c" --help
  check "$c --help prints usage" grep -q "^usage: tachist $c" "$WORK/last.out"
done
