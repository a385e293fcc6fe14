# Shared helpers for end-to-end scripts: source it, then call ok/notok/check. Each script runs the
# real binary ($TACHIST) in a scratch folder ($WORK) and prints TAP-like lines that tests/run.sh counts.
set -u
TACHIST=${TACHIST:-$(pwd)/build/san/tachist}
ROOT=$(pwd)
WORK=$(mktemp -d "${TMPDIR:-/tmp}/tachist-e2e.XXXXXX")
USERDIR=
# on_exit CMD: runs CMD (shell text) when the script exits, before the scratch folders go; the
# latest first. Helpers that start servers or panes register their stop here, never with trap.
EXIT_CMDS=""
on_exit() { EXIT_CMDS="$1; $EXIT_CMDS"; }
trap 'eval "$EXIT_CMDS"; rm -rf "$WORK" ${USERDIR:+"$USERDIR"}' EXIT
export SDL_VIDEODRIVER=${SDL_VIDEODRIVER:-dummy}
ok()    { echo "ok - $*"; }
notok() { echo "not ok - $*"; }
# skip NAME REASON: a check not made here, counted apart by tests/run.sh (never as a pass)
skip()  { echo "ok - $1 # SKIP $2"; }
# check NAME COMMAND...: ok when the command succeeds
check() { name=$1; shift; if "$@"; then ok "$name"; else notok "$name"; fi; }
# expect_eq NAME EXPECTED ACTUAL: ok when equal, else prints both
expect_eq() {
  if [ "$2" = "$3" ]; then ok "$1"; else notok "$1"; echo "#   expected: $2"; echo "#   actual:   $3"; fi
}
# expect_exit NAME CODE COMMAND...: ok when the command exits with CODE
expect_exit() {
  name=$1; want=$2; shift 2; "$@" >"$WORK/last.out" 2>"$WORK/last.err"; got=$?
  if [ "$got" = "$want" ]; then ok "$name"; else notok "$name"; echo "#   expected exit $want, got $got"; sed 's/^/#   /' "$WORK/last.err" | head -n 20; fi
}

# A short protocol over the demo stimuli, shared by the run-layer scripts.
# mkproto FILE LIST SIZE_DEG: 6 practice trials (exemplar 1, clean) and 24 test trials (exemplar 2)
mkproto() {
cat >"$1" <<PROTO
[experiment]
name = e2e
list = $2
[categories]
ring = s
bar = d
cross = f
chevron = j
wedge = k
lattice = l
[timing]
fixation_ms = 100
blank_ms = 50
stimulus_ms = 50
mask_ms = 50
response_ms = 1500
feedback_ms = 100
iti_ms = 100
[display]
size_deg = $3
background = 128
fixation_deg = 0.3
mask = noise
feedback = mark
[block warm]
select = level=0 & exemplar=1
practice = yes
[block test]
select = exemplar=2
repeat_faults = yes
PROTO
}

# Checks that need another user. Root ignores permission bits, so as root as_user runs COMMAND as
# nobody; otherwise as ourselves. Nobody may not reach the checkout or $WORK (a clone in a mode-700
# home, a private TMPDIR), so user_scratch makes $USERDIR: a mode-755 folder nobody can enter, in
# the first of $TMPDIR, /tmp, /var/tmp, /dev/shm that works, holding copies of the binary
# ($USERDIR/tachist), the leak suppressions and a temporary folder ($TMPDIR for that user, which
# may not reach ours). Copy there whatever else that user must read.
# Returns 1 (with $USERDIR empty) when there is no such folder; the caller then skips its checks.
as_user() {
  if [ "$(id -u)" = 0 ]; then
    setpriv --reuid=65534 --regid=65534 --clear-groups \
      env LSAN_OPTIONS="suppressions=$USERDIR/lsan.supp:print_suppressions=0" TMPDIR="$USERDIR/tmp" "$@"
  else
    "$@"
  fi
}
user_scratch() {
  for base in "${TMPDIR:-/tmp}" /tmp /var/tmp /dev/shm; do
    d=$(mktemp -d "$base/tachist-user.XXXXXX" 2>/dev/null) || continue
    chmod 755 "$d"; USERDIR=$d
    mkdir -m 1777 "$d/tmp" || { rm -rf "$d"; USERDIR=; continue; }
    if as_user test -x "$d"; then
      cp "$TACHIST" "$d/tachist" && cp "$ROOT/tests/lsan.supp" "$d/lsan.supp" &&
        chmod 755 "$d/tachist" && chmod 644 "$d/lsan.supp" && return 0
    fi
    rm -rf "$d"; USERDIR=
  done
  return 1
}
