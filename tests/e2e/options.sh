# e2e options — every command's --help against what its parser accepts, run through the real
# binary: each option --help lists is accepted (the parser goes on to the next word and refuses a
# made-up option there), the synopsis names exactly the listed options, and a usage error has one
# wording and exit 2. Every command is on an option table: one without is a failure.
. tests/e2e/lib.sh
BOGUS=--zz-not-an-option
cmds=$("$TACHIST" --help | sed -n 's/^  \([a-z][a-z]*\)  .*/\1/p')
check "tachist --help lists the commands" test -n "$cmds"
for c in $cmds; do
  "$TACHIST" "$c" --help >"$WORK/help" 2>&1
  if ! grep -q '^options:$' "$WORK/help"; then
    notok "$c: --help lists its options (no option table)"
    continue
  fi
  sed -n '/^options:$/,$p' "$WORK/help" | sed -n 's/^  --\([a-z0-9-]*\)\( [A-Z][A-Z0-9.]*\)\{0,1\}  *.*/\1\2/p' >"$WORK/opts"
  sed -n '/^options:$/,$p' "$WORK/help" | sed -n 's/^  --\([a-z0-9-]*\)\( [A-Z][A-Z0-9.]*\)\{0,1\}$/\1\2/p' >>"$WORK/opts"
  sed -n '1,/^$/p' "$WORK/help" | grep -o -- '--[a-z0-9-]*' | sed 's/^--//' | sort -u >"$WORK/syn"
  cut -d' ' -f1 "$WORK/opts" | sort -u >"$WORK/names"
  expect_eq "$c: the synopsis and the option list name the same options" \
    "$(cat "$WORK/names")" "$(cat "$WORK/syn")"
  bad=""
  while read -r name arg; do
    # The words before the first option on the synopsis line naming it, or on the line it
    # continues (PROTOCOL, FILE.csv, the calculation or action): given literally, the parser takes
    # them as arguments.
    pre=$(sed -n '1,/^$/p' "$WORK/help" | awk -v opt="--$name" '
      { sub(/^usage: /, ""); sub(/^ */, "") }
      /^tachist / { head = ""; for (i = 3; i <= NF; i++) { if ($i ~ /^[[-]/) break; head = head $i " " } }
      !done && $0 ~ (opt "([^a-z0-9-]|$)") { printf "%s", head; done = 1 }')
    val=""; [ -n "$arg" ] && val=100
    # shellcheck disable=SC2086
    "$TACHIST" "$c" $pre "--$name" $val "$BOGUS" >"$WORK/o" 2>"$WORK/e"; rc=$?
    if [ "$rc" != 2 ] || grep -q -- "unknown option '--$name" "$WORK/e"; then
      bad="$bad --$name(exit $rc: $(head -n 1 "$WORK/e"))"
    fi
  done <"$WORK/opts"
  expect_eq "$c: the parser accepts every option --help lists ($(wc -l <"$WORK/opts"))" "" "$bad"
  expect_exit "$c: an unknown option is a usage error" 2 "$TACHIST" "$c" "$BOGUS"
  expect_eq "$c: in the one wording" "tachist $c: unknown option '$BOGUS'" "$(head -n 1 "$WORK/last.err")"
  check "$c: followed by the usage" grep -q "^usage: tachist $c" "$WORK/last.err"
done
