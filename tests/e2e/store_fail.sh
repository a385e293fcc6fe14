# e2e store_fail — storage failures stop cleanly and lose no committed trial: a full disk (a
# 512 KiB tmpfs mounted in a private namespace with `unshare`), and a read-only database file.
. tests/e2e/lib.sh
FILL=$ROOT/$BUILD/tools/store_fill
# -- full disk ---------------------------------------------------------------------------------
mkdir "$WORK/tiny"
cat >"$WORK/full.sh" <<SHEOF
mount -t tmpfs -o size=512k tmpfs "$WORK/tiny" || exit 77
"$FILL" "$WORK/tiny/x.db" 1 100000 --flips 100 >"$WORK/fill.out" 2>"$WORK/fill.err"
echo "rc \$?" >"$WORK/full.res"
sqlite3 "$WORK/tiny/x.db" 'PRAGMA integrity_check' >>"$WORK/full.res" 2>&1
sqlite3 "$WORK/tiny/x.db" "SELECT count(*), coalesce(max(trial) + 1, 0), (SELECT status FROM sessions) FROM trials" >>"$WORK/full.res" 2>&1
SHEOF
unshare -rm sh "$WORK/full.sh"; rc=$?
if [ "$rc" = 77 ] || [ ! -s "$WORK/full.res" ]; then
  skip "full disk" "cannot mount a tmpfs in a private namespace here"
else
  expect_eq "full disk stops the writer with exit 1" "rc 1" "$(sed -n 1p "$WORK/full.res")"
  check "with a message naming the full disk" grep -q "disk is full" "$WORK/fill.err"
  expect_eq "the database still checks ok" ok "$(sed -n 2p "$WORK/full.res")"
  n=$(sed -n 's/^committed //p' "$WORK/fill.out")
  check "some trials were committed before the disk filled" test "${n:-0}" -gt 10
  expect_eq "every committed trial is there, indices contiguous, session aborted" "$n|$n|aborted" "$(sed -n 3p "$WORK/full.res")"
fi
# -- the same through `tachist run` ----------------------------------------------------------------
RIG=$ROOT/assets-demo/rig.ini
sed -e "s|^list = .*|list = $ROOT/assets-demo/stimuli.csv|" -e 's/^break_every.*//' \
    -e 's/^fixation_ms = .*/fixation_ms = 100/; s/^iti_ms = .*/iti_ms = 100/' \
    -e 's/^select = exemplar=.*/select = exemplar=3,4/' protocols/demo.ini >"$WORK/p.ini"
mkdir "$WORK/tiny2"
cat >"$WORK/runfull.sh" <<SHEOF
mount -t tmpfs -o size=448k tmpfs "$WORK/tiny2" || exit 77
"$TACHIST" run "$WORK/p.ini" --rig "$RIG" --headless --observer model:seed=1 --seed 5 --subject FULL --db "$WORK/tiny2/r.db" >"$WORK/run.out" 2>"$WORK/run.err"
echo "rc \$?" >"$WORK/runfull.res"
sqlite3 "$WORK/tiny2/r.db" 'PRAGMA integrity_check' >>"$WORK/runfull.res" 2>&1
sqlite3 "$WORK/tiny2/r.db" "SELECT count(*), coalesce(max(trial) + 1, 0), (SELECT status FROM sessions) FROM trials" >>"$WORK/runfull.res" 2>&1
SHEOF
unshare -rm sh "$WORK/runfull.sh"; rc=$?
if [ "$rc" = 77 ] || [ ! -s "$WORK/runfull.res" ]; then
  skip "run on a full disk" "cannot mount a tmpfs in a private namespace here"
else
  expect_eq "run on a full disk stops with exit 1" "rc 1" "$(sed -n 1p "$WORK/runfull.res")"
  check "run names the full disk" grep -q "disk is full" "$WORK/run.err"
  expect_eq "its database checks ok" ok "$(sed -n 2p "$WORK/runfull.res")"
  res=$(sed -n 3p "$WORK/runfull.res")
  n=${res%%|*}
  check "trials were stored before the disk filled ($n)" test "${n:-0}" -gt 0
  expect_eq "every stored trial is contiguous and the session is aborted" "$n|$n|aborted" "$res"
fi
# -- read-only file ----------------------------------------------------------------------------
# Run as another user (nobody, when we are root) from a scratch folder that user can read, holding
# copies of everything it must read: the binary, the demo rig, list and images, the protocol.
if ! user_scratch; then
  for what in "merging into a read-only database" "listing, exporting and merging from it" \
              "run on a read-only database"; do
    skip "$what" "no folder that the unprivileged user can enter (\$TMPDIR, /tmp, /var/tmp, /dev/shm)"
  done
  exit 0
fi
U=$USERDIR
UT=$U/tachist
cp -R "$ROOT/assets-demo" "$U/assets-demo"
chmod -R a+rX "$U/assets-demo"
sed -e "s|^list = .*|list = $U/assets-demo/stimuli.csv|" "$WORK/p.ini" >"$U/p.ini"
chmod 644 "$U/p.ini"
"$FILL" "$U/other.db" 1 3 --subject OTHER >/dev/null
chmod 644 "$U/other.db"
# (a) the file is read-only, its folder writable; (b) the folder is read-only too (a share).
mkdir "$U/rw" "$U/ro"
chmod 777 "$U/rw"
for where in rw ro; do
  db=$U/$where/x.db
  "$FILL" "$db" 1 5 --subject RO >/dev/null
  chmod 444 "$db"
  [ "$where" = ro ] && chmod 555 "$U/ro"
  before=$(sqlite3 "$db" 'SELECT count(*) FROM trials')
  as_user "$UT" merge --into "$db" "$U/other.db" >"$WORK/ro.out" 2>"$WORK/ro.err"
  expect_eq "$where: merging into a read-only database fails" 1 $?
  check "$where: with a message saying the database is read-only" grep -q "read-only" "$WORK/ro.err"
  expect_eq "$where: its trials are intact" "$before" "$(sqlite3 "$db" 'SELECT count(*) FROM trials')"
  as_user "$UT" sessions --db "$db" >"$WORK/ro.out" 2>"$WORK/ro.err"
  expect_eq "$where: a read-only database can still be listed" 0 $?
  as_user "$UT" export --db "$db" --format csv --out - >"$WORK/ro.csv" 2>"$WORK/ro.err"
  expect_eq "$where: and exported" 5 "$(grep -c '^[0-9a-f]\{8\}-' "$WORK/ro.csv")"
  as_user "$UT" merge --into "$U/rw/pool.db" "$db" >"$WORK/ro.out" 2>"$WORK/ro.err"
  expect_eq "$where: and merged from" 0 $?
done
chmod 755 "$U/ro"
expect_eq "the pool got both read-only sessions" 2 "$(sqlite3 "$U/rw/pool.db" 'SELECT count(*) FROM sessions')"
# The protocol, rig and list are readable, so only the database can be what run refuses.
expect_exit "the unprivileged user can read the protocol, rig and list" 0 \
  as_user "$UT" check "$U/p.ini" --rig "$U/assets-demo/rig.ini"
cp "$U/rw/x.db" "$U/rw/run.db"
chmod 444 "$U/rw/run.db"
as_user "$UT" run "$U/p.ini" --rig "$U/assets-demo/rig.ini" --headless --observer model:seed=1 --subject RO --db "$U/rw/run.db" >"$WORK/run.out" 2>"$WORK/run.err"
expect_eq "run on a read-only database fails" 1 $?
check "run says the database is read-only" grep -q "read-only" "$WORK/run.err"
