# e2e make_deps — the Makefile's first-run path on a machine that lacks a package, without touching
# the machine: a scratch tree holds the real Makefile and a one-line program, and stand-ins for
# dpkg-query and apt-get on PATH play a Debian system where `tachist-fake-dev` is missing until
# apt-get "installs" it, which puts its pkg-config file in place. `make demo` as root must install it
# and then compile with its flags in the same run (flags computed after `deps`, not when the
# Makefile is read); as another user it must print the one sudo line and stop; a library
# pkg-config cannot find is named.
. tests/e2e/lib.sh
mktree() { # DIR: the real Makefile and a program that compiles only with the new package's flags
  mkdir -p "$1/app/cmd" "$1/include" "$1/assets-demo"
  cp "$ROOT/Makefile" "$1/Makefile"
  printf '#ifndef TACHIST_FAKE_FLAG\n#error the flags were computed before deps ran\n#endif\n#include <stdio.h>\nint main(void) { puts("fake demo ran"); return 0; }\n' >"$1/app/cmd/main.c"
  : >"$1/assets-demo/stimuli.csv"
}
mkfakes() { # DIR: dpkg-query and apt-get stand-ins; DIR/missing lists what is not installed
  mkdir -p "$1/bin" "$1/pc"
  echo tachist-fake-dev >"$1/missing"
  cat >"$1/bin/dpkg-query" <<EOF
#!/bin/sh
for p; do :; done
grep -qx "\$p" "$1/missing" && exit 1
printf 'install ok installed'
EOF
  cat >"$1/bin/apt-get" <<EOF
#!/bin/sh
[ "\$1" = update ] && exit 0
for p; do
  case "\$p" in -*|install) continue ;; esac
  grep -vx "\$p" "$1/missing" >"$1/missing.new"; mv "$1/missing.new" "$1/missing"
  printf 'Name: tachistfake\nDescription: stand-in\nVersion: 1\nCflags: -DTACHIST_FAKE_FLAG=1\nLibs:\n' >"$1/pc/tachistfake.pc"
done
EOF
  chmod 755 "$1/bin/dpkg-query" "$1/bin/apt-get"
}
FAKE="DEB_PKGS=tachist-fake-dev PKGS=tachistfake"

# As root: one `make demo` installs the missing package, then builds with its flags and runs.
if [ "$(id -u)" = 0 ]; then
  mktree "$WORK/tree"; mkfakes "$WORK/f"
  # shellcheck disable=SC2086
  (cd "$WORK/tree" && PATH="$WORK/f/bin:$PATH" PKG_CONFIG_PATH="$WORK/f/pc" make -s $FAKE demo) \
    >"$WORK/demo.out" 2>&1
  expect_eq "root: make demo as the first command exits 0" 0 $?
  check "it installed the missing package" grep -q '^deps: installing tachist-fake-dev$' "$WORK/demo.out"
  check "then built with that package's pkg-config flags and ran the demo" grep -q '^fake demo ran$' "$WORK/demo.out"
  (cd "$WORK/tree" && PATH="$WORK/f/bin:$PATH" PKG_CONFIG_PATH="$WORK/f/pc" make -s $FAKE deps) >"$WORK/deps2.out" 2>&1
  expect_eq "a second make deps has nothing to do" "0:" "$?:$(cat "$WORK/deps2.out")"
else
  skip "root: make demo installs the missing package, then builds with its flags" "not root: deps only prints the sudo line here"
fi

# As another user: the one sudo line, and nothing built.
if user_scratch; then
  mktree "$USERDIR/tree"; mkfakes "$USERDIR/f"
  chmod -R a+rX "$USERDIR/tree" "$USERDIR/f"
  # shellcheck disable=SC2086
  (cd "$USERDIR/tree" && as_user env PATH="$USERDIR/f/bin:$PATH" PKG_CONFIG_PATH="$USERDIR/f/pc" make -s $FAKE demo) \
    >"$WORK/user.out" 2>&1
  rc=$?
  check "user: make demo stops (exit $rc)" test "$rc" != 0
  expect_eq "and prints the one command to run" \
    "deps: missing packages. Run:|  sudo apt-get install -y tachist-fake-dev" \
    "$(grep -v '^make' "$WORK/user.out" | tr '\n' '|' | sed 's/|$//')"
  check "and builds nothing" test ! -e "$USERDIR/tree/build"
  grep -qx tachist-fake-dev "$USERDIR/f/missing"
  check "and installs nothing" test $? = 0
else
  skip "user: make demo prints the sudo line and stops" "no folder another user can read"
fi

# A library pkg-config cannot find is named and stops the build; reading the Makefile alone
# (a target that compiles nothing) never asks pkg-config.
mktree "$WORK/t2"
(cd "$WORK/t2" && make -s PKGS="sqlite3 tachistnope" BUILD=b b/tachist) >"$WORK/nope.out" 2>&1
rc=$?
check "a missing pkg-config library stops the build (exit $rc)" test "$rc" != 0
check "naming it" grep -q 'pkg-config cannot find: tachistnope; run `make deps`' "$WORK/nope.out"
(cd "$WORK/t2" && make -s PKGS=tachistnope DEB_PKGS=make deps) >"$WORK/read.out" 2>&1
expect_eq "make deps does not evaluate the flags" "0:" "$?:$(cat "$WORK/read.out")"
