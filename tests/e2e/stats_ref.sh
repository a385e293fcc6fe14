# e2e stats_ref — `tachist calc ci` and `tachist calc dprime` against reference libraries run here:
# Python statsmodels proportion_confint (method="wilson" and method="beta"), R psyphy dprime.mAFC,
# the m = 2 closed form Pc = Φ(d′/√2) (scipy.stats.norm), and Newcombe (1998) Table I.
. tests/e2e/lib.sh
PY=/usr/bin/python3
# The numbers of a `calc --json` answer (keys lower, upper or dprime), in that order, via awk.
val() { "$TACHIST" calc "$@" --json | awk -F'[:,]' '/"(lower|upper|dprime)"/ { gsub(/[ \t]/, "", $2); printf "%s%s", sep, $2; sep = " " } END { print "" }'; }

# Newcombe RG (1998) Stat Med 17:857-872, Table I, Wilson score without continuity correction
# (values recalled from memory; statsmodels below checks the same cases at full precision).
for c in "81 263 0.2553 0.3662" "15 148 0.0624 0.1605" "0 20 0.0000 0.1611" "1 29 0.0061 0.1718"; do
  set -- $c
  got=$(val ci --k "$1" --n "$2" | $PY -c 'import sys; a,b=map(float,sys.stdin.read().split()); print("%.4f %.4f" % (a,b))')
  expect_eq "Wilson $1/$2 = Newcombe (1998) Table I" "$3 $4" "$got"
done

# statsmodels proportion_confint(k, n, alpha, method="wilson" | "beta"): tachist's answers are
# collected first, then one Python run compares them all and prints one check line per case.
: >"$WORK/ci.txt"
for method in wilson exact; do
  for kn in "0 1" "1 1" "0 20" "3 20" "10 20" "20 20" "81 263" "15 148" "1 29" "499 1000" "1 10000"; do
    set -- $kn
    echo "$method $1 $2 0.95 $(val ci --k "$1" --n "$2" --method $method)" >>"$WORK/ci.txt"
  done
done
echo "wilson 7 30 0.9 $(val ci --k 7 --n 30 --level 0.9)" >>"$WORK/ci.txt"
$PY - "$WORK/ci.txt" <<'PYEOF'
import sys
from statsmodels.stats.proportion import proportion_confint
n_cases = 0
for line in open(sys.argv[1]):
    meth, k, n, level, lo, hi = line.split()
    sm = "wilson" if meth == "wilson" else "beta"
    rlo, rhi = proportion_confint(int(k), int(n), alpha=1 - float(level), method=sm)
    good = abs(float(lo) - rlo) < 1e-9 and abs(float(hi) - rhi) < 1e-9
    print("%s - %s %s/%s at %s equals statsmodels method=%r" % ("ok" if good else "not ok", meth, k, n, level, sm))
    if not good:
        print("#   tachist %s %s, statsmodels %r %r" % (lo, hi, rlo, rhi))
    n_cases += 1
print("ok - statsmodels compared %d cases" % n_cases if n_cases == 23 else "not ok - only %d cases" % n_cases)
PYEOF

# R psyphy dprime.mAFC(Pc, m) for m = 2, 4, 9: psyphy integrates the same integral with R's
# integrate() and solves with uniroot() at its default tolerance (about 1.2e-4), so agreement is
# asked to 5e-4.
: >"$WORK/pairs.txt"
for m in 2 4 9; do
  for pc in 0.55 0.6 0.7 0.75 0.8 0.9 0.95 0.99; do
    echo "$m $pc $(val dprime --m $m --pc $pc)" >>"$WORK/pairs.txt"
  done
done
Rscript -e 'suppressMessages(library(psyphy)); d <- read.table(commandArgs(TRUE)[1]); for (i in seq_len(nrow(d))) cat(sprintf("%d %s %.10f %.10f\n", d[i,1], format(d[i,2]), d[i,3], dprime.mAFC(d[i,2], d[i,1])))' "$WORK/pairs.txt" >"$WORK/r.txt" 2>"$WORK/r.err"
expect_eq "R psyphy answered every case" 24 "$(wc -l <"$WORK/r.txt" | tr -d ' ')"
while read -r m pc ours theirs; do
  check "d' m=$m pc=$pc equals psyphy dprime.mAFC" awk -v a="$ours" -v b="$theirs" 'BEGIN { d = a - b; if (d < 0) d = -d; exit !(d < 5e-4) }'
done <"$WORK/r.txt"

# m = 2: Pc = Φ(d′/√2), so d′ = √2·Φ⁻¹(Pc) (scipy.stats.norm.ppf).
: >"$WORK/m2.txt"
for pc in 0.51 0.6 0.76 0.9 0.99 0.999; do
  echo "$pc $(val dprime --m 2 --pc $pc)" >>"$WORK/m2.txt"
done
echo "0.975 $(val dprime --m 2 --pc 1 --n 20) (pc 1 of 20 uses 1 - 1/(2N), Macmillan & Kaplan 1985)" >>"$WORK/m2.txt"
$PY - "$WORK/m2.txt" <<'PYEOF'
import sys, math
from scipy.stats import norm
for line in open(sys.argv[1]):
    f = line.split()
    pc, got = float(f[0]), float(f[1])
    want = math.sqrt(2) * norm.ppf(pc)
    print("%s - d' m=2 pc=%s equals sqrt(2)*norm.ppf(pc)%s" % ("ok" if abs(got - want) < 1e-7 else "not ok", f[0], " " + " ".join(f[2:]) if len(f) > 2 else ""))
PYEOF

# Proportions of 0 and 1: refused without a trial count, 1/(2N) with one (Macmillan & Kaplan 1985).
expect_exit "pc 1 without --n is a usage error" 2 "$TACHIST" calc dprime --m 4 --pc 1
check "pc 1 says why" grep -q "give --n" "$WORK/last.err"
expect_exit "k > n is a usage error" 2 "$TACHIST" calc ci --k 5 --n 3
expect_exit "fractional n is a usage error" 2 "$TACHIST" calc ci --k 1 --n 2.5
expect_exit "unknown method is a usage error" 2 "$TACHIST" calc ci --k 1 --n 2 --method jeffreys
expect_exit "m = 1 is a usage error" 2 "$TACHIST" calc dprime --m 1 --pc 0.7
expect_exit "calc ci text" 0 "$TACHIST" calc ci --k 81 --n 263
expect_eq "ci sentence" "81 of 263 = 0.3080, 95% Wilson score interval [0.2553, 0.3662]" "$(cat "$WORK/last.out")"
