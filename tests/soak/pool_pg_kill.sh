# soak pool_pg_kill — `pool --follow` into a throwaway PostgreSQL cluster killed (SIGKILL) at 20
# random moments while a rig writes 20 sessions: the server never holds a partial session, and
# after a restart everything arrives once. The short version (3 kills) is in tests/e2e/pool_pg.sh.
. tests/e2e/lib.sh
. tests/e2e/pg.inc
if ! pg_start; then
  skip "pool --follow killed 20 times" "$PG_WHY"
  exit 0
fi
follow_kill_check 20 20 60
