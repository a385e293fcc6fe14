# Shared helpers for end-to-end scripts: source it, then call ok/notok/check. Each script runs the
# real binary ($TACHIST) in a scratch folder ($WORK) and prints TAP-like lines that tests/run.sh counts.
set -u
TACHIST=${TACHIST:-$(pwd)/build/san/tachist}
ROOT=$(pwd)
WORK=$(mktemp -d "${TMPDIR:-/tmp}/tachist-e2e.XXXXXX")
trap 'rm -rf "$WORK"' EXIT
export SDL_VIDEODRIVER=${SDL_VIDEODRIVER:-dummy}
ok()    { echo "ok - $*"; }
notok() { echo "not ok - $*"; }
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
