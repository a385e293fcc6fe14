# e2e bad_inputs — every case in tests/data/bad/ (malformed protocols, rigs and lists; missing,
# truncated, lying and non-image files; devices; hex, NaN and overflowing numbers; NUL bytes)
# makes `tachist check` exit 1 with exactly the diagnostics in the case's `expect` file (stderr,
# byte for byte; a sanitizer report would break the match), every line in our own form.
# A case is a folder with protocol.ini (and list.csv, rig.ini, images as needed); `args`, when
# present, replaces the default arguments "CASE/protocol.ini --rig RIG". RIG is the case's rig.ini
# or tests/data/good/rig.ini. Regenerate an expect file only after reading the new output.
. tests/e2e/lib.sh
expect_exit "the good corpus protocol checks clean" 0 "$TACHIST" check tests/data/good/protocol.ini --rig tests/data/good/rig.ini
n=0
for d in tests/data/bad/*/; do
  d=${d%/}
  name=$(basename "$d")
  if [ -f "$d/args" ]; then
    args=$(cat "$d/args")
  elif [ -f "$d/rig.ini" ]; then
    args="$d/protocol.ini --rig $d/rig.ini"
  else
    args="$d/protocol.ini --rig tests/data/good/rig.ini"
  fi
  case "$args" in *--rig*) ;; *) args="$args --rig tests/data/good/rig.ini" ;; esac
  # shellcheck disable=SC2086
  "$TACHIST" check $args >"$WORK/out" 2>"$WORK/err"; rc=$?
  if [ "${UPDATE_EXPECT:-}" = 1 ]; then cp "$WORK/err" "$d/expect"; fi
  if [ "$rc" = 1 ] && cmp -s "$WORK/err" "$d/expect"; then
    ok "$name"
  else
    notok "$name (exit $rc)"
    diff "$d/expect" "$WORK/err" | sed 's/^/#   /' | head -n 20
  fi
  # Every line is ours: FILE[:LINE]: error|warning: ..., or the closing count (never a library's
  # own "libpng error:" or a sanitizer's report).
  if grep -Evq '^[^ ]+(:[0-9]+)?: (error|warning): |^[0-9]+ errors?, [0-9]+ warnings?$' "$WORK/err"; then
    notok "$name: every message in the FILE[:LINE]: error form"
    grep -Ev '^[^ ]+(:[0-9]+)?: (error|warning): |^[0-9]+ errors?, [0-9]+ warnings?$' "$WORK/err" | sed 's/^/#   /' | head -n 5
  fi
  n=$((n + 1))
done
expect_eq "the corpus has at least 120 cases ($n)" 1 "$([ "$n" -ge 120 ] && echo 1 || echo 0)"
