# e2e fuzz — the protocol, rig and stimulus-list parsers under libFuzzer for about 6 s each, side by side
# (tests/fuzz/run.sh): no crash, leak or sanitizer report.
. tests/e2e/lib.sh
if sh tests/fuzz/run.sh "${FUZZ_SECONDS:-6}" >"$WORK/fuzz.out" 2>&1; then
  ok "parsers survive fuzzing"
else
  notok "parsers survive fuzzing"; sed 's/^/#   /' "$WORK/fuzz.out" | tail -n 40
fi
