# soak ci_all — the exact interval for every (k, n <= 1000) at 90, 95 and 99% (1,504,500 intervals):
# none may fail or fall outside 0 <= lower <= k/n <= upper <= 1. Minutes, so not part of `make test`.
. tests/e2e/lib.sh
NMAX=${CI_NMAX:-1000}
if "$ROOT/$BUILD/tools/ci_table" --all "$NMAX" >"$WORK/all.txt"; then
  ok "exact interval over every (k, n <= $NMAX) at 90/95/99%: $(tail -n 1 "$WORK/all.txt")"
else
  notok "exact interval over every (k, n <= $NMAX) at 90/95/99%"; sed 's/^/#   /' "$WORK/all.txt" | tail -n 21
fi
