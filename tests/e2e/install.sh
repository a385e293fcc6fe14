# e2e install — `make install` puts the binary and tachist(1) under DESTDIR/PREFIX and nothing
# else, the page lints clean (mandoc -T lint; groff -ww where groff is installed) with one section
# per command, and `make uninstall` takes both away again.
. tests/e2e/lib.sh
D=$WORK/dest
# -o: install what is built; never rebuild the test binary here with other flags.
make -s -o "$BUILD/tachist" BUILD="$BUILD" DESTDIR="$D" PREFIX=/usr install >"$WORK/inst.out" 2>&1
expect_eq "make install exits 0" 0 $?
expect_eq "it installs the binary and the page, nothing else" \
  "./usr/bin/tachist ./usr/share/man/man1/tachist.1" "$(cd "$D" && find . -type f | sort | tr '\n' ' ' | sed 's/ $//')"
check "the installed binary runs" "$D/usr/bin/tachist" --version
PAGE=$D/usr/share/man/man1/tachist.1
mandoc -T lint -W all "$PAGE" >"$WORK/lint" 2>&1
expect_eq "mandoc -T lint -W all finds nothing" "" "$(cat "$WORK/lint")"
if command -v groff >/dev/null; then
  groff -ww -z -man "$PAGE" >"$WORK/groff" 2>&1
  expect_eq "groff -ww finds nothing" "" "$(cat "$WORK/groff")"
else
  skip "groff -ww finds nothing" "groff is not installed (mandoc checked the page)"
fi
cmds=$("$TACHIST" --help | sed -n 's/^  \([a-z][a-z]*\)  .*/\1/p' | sort | tr '\n' ' ')
expect_eq "one section per command" "$cmds" "$(sed -n 's/^\.SS //p' "$PAGE" | sort | tr '\n' ' ')"
mandoc -T utf8 "$PAGE" >"$WORK/page.txt" 2>&1
check "the page renders with the report options" grep -q -- '--boot N' "$WORK/page.txt"
make -s BUILD="$BUILD" DESTDIR="$D" PREFIX=/usr uninstall >"$WORK/un.out" 2>&1
expect_eq "make uninstall exits 0" 0 $?
expect_eq "and leaves no file behind" "" "$(find "$D" -type f)"
# PREFIX and DESTDIR honoured elsewhere too.
make -s -o "$BUILD/tachist" BUILD="$BUILD" DESTDIR="$D" PREFIX=/opt/t install >/dev/null 2>&1
check "PREFIX=/opt/t installs under it" test -x "$D/opt/t/bin/tachist" -a -f "$D/opt/t/share/man/man1/tachist.1"
