# e2e shapes — no function in app/ is longer than 120 lines (tests/tools/fnlen.sh), one check per
# source file; and the counter itself, on planted functions of 120 and 121 lines.
. tests/e2e/lib.sh

# The counter: a definition of exactly LIMIT lines passes, one more line fails and is named.
mkfn() { # FILE BODY-LINES: one function whose definition spans BODY-LINES + 3 lines
  { printf 'static int\nplanted(int x)\n{\n'; i=0
    while [ $i -lt "$2" ]; do printf '\tx += %d;\n' $i; i=$((i + 1)); done
    printf '}\n'; } >"$1"
}
mkfn "$WORK/a.c" 116
expect_exit "a function of 120 lines passes" 0 sh tests/tools/fnlen.sh "$WORK/a.c"
mkfn "$WORK/b.c" 117
expect_exit "a function of 121 lines fails" 1 sh tests/tools/fnlen.sh "$WORK/b.c"
expect_eq "it is named with its length" "$WORK/b.c:1: planted is 121 lines" "$(cat "$WORK/last.out")"

for f in app/*/*.c; do
  if sh tests/tools/fnlen.sh "$f" >"$WORK/out"; then
    ok "$f: no function over 120 lines"
  else
    notok "$f: functions over 120 lines"; sed 's/^/#   /' "$WORK/out"
  fi
done
