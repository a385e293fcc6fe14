# e2e fit — `tachist fit` on CSV files: layouts, output, honest failures, bad cells (FILE:LINE),
# and agreement with outside references computed at test time: R glm with psyphy's mafc.probit
# link (cumulative normal, lambda = 0) and a scipy likelihood maximisation (Weibull, logistic).
. tests/e2e/lib.sh
PY=/usr/bin/python3

# Invented data: counts per level for 2AFC and 4AFC.
printf 'level,n,k\n0.5,40,22\n1,40,25\n1.5,40,30\n2,40,35\n2.5,40,38\n3,40,39\n' >"$WORK/g2.csv"
printf 'level,n,k\n0.1,60,17\n0.2,60,21\n0.3,60,33\n0.4,60,45\n0.5,60,52\n0.6,60,57\n' >"$WORK/g4.csv"
# Accuracy that falls as the level (say a perturbation budget) rises.
printf 'level,n,k\n0,40,39\n4,40,36\n8,40,30\n12,40,22\n16,40,13\n20,40,10\n' >"$WORK/fall.csv"
# The 4AFC counts as one row per trial, without a header (level,correct).
$PY - "$WORK/g4.csv" >"$WORK/t4.csv" <<'PYEOF'
import csv, sys
rows = list(csv.DictReader(open(sys.argv[1])))
for r in rows:
    n, k = int(r["n"]), int(r["k"])
    for i in range(n):
        print("%s,%d" % (r["level"], 1 if i < k else 0))
PYEOF

expect_exit "fit grouped 2AFC exits 0" 0 "$TACHIST" fit "$WORK/g2.csv" --m 2
check "text output names the threshold" grep -q '^threshold at pc 0.75' "$WORK/last.out"
check "text output has a bootstrap interval" grep -q 'parametric bootstrap, 1000 samples' "$WORK/last.out"
expect_exit "fit --json exits 0" 0 "$TACHIST" fit "$WORK/g2.csv" --m 2 --json
cp "$WORK/last.out" "$WORK/g2.json"
check "json has the contract keys" $PY -c '
import json, sys
d = json.load(open(sys.argv[1]))
for k in ("alpha", "beta", "lambda", "threshold", "threshold_lower", "threshold_upper", "deviance"):
    assert isinstance(d[k], float), k
assert d["threshold_lower"] < d["threshold"] < d["threshold_upper"]
assert 0 <= d["lambda"] <= 0.06
' "$WORK/g2.json"
expect_exit "same seed, same intervals" 0 "$TACHIST" fit "$WORK/g2.csv" --m 2 --json
expect_eq "bootstrap reproducible" "$(cat "$WORK/g2.json")" "$(cat "$WORK/last.out")"

# Trial rows and grouped rows of the same data give the same fit.
"$TACHIST" fit "$WORK/g4.csv" --m 4 --shape logistic --json --boot 0 >"$WORK/a.json"
"$TACHIST" fit "$WORK/t4.csv" --m 4 --shape logistic --json --boot 0 >"$WORK/b.json"
check "trial rows equal grouped rows" $PY -c '
import json, sys
a, b = json.load(open(sys.argv[1])), json.load(open(sys.argv[2]))
assert b["input"] == "trials" and a["input"] == "grouped"
for k in ("alpha", "beta", "lambda", "deviance"):
    assert abs(a[k] - b[k]) < 1e-6 * (1 + abs(a[k])), (k, a[k], b[k])
' "$WORK/a.json" "$WORK/b.json"

# Reference: R glm, binomial family with psyphy's mafc.probit(m) link, is the cumulative normal
# with guess rate 1/m and no lapse: P = 1/m + (1 - 1/m) * pnorm(b0 + b1 x), so alpha = -b0/b1 and
# beta = 1/b1. Grouped counts for m = 2, trial rows for m = 4.
for spec in "g2.csv 2 grouped" "t4.csv 4 trials" "fall.csv 4 grouped"; do
  set -- $spec
  "$TACHIST" fit "$WORK/$1" --m "$2" --shape normal --lapse 0 --json --boot 0 >"$WORK/n.json"
  if [ "$3" = grouped ]; then
    rcode="d <- read.csv('$WORK/$1'); f <- glm(cbind(k, n - k) ~ level, family = binomial(mafc.probit($2)), data = d)"
  else
    rcode="d <- read.csv('$WORK/$1', header = FALSE, col.names = c('level', 'correct')); f <- glm(correct ~ level, family = binomial(mafc.probit($2)), data = d)"
  fi
  Rscript -e "suppressMessages(library(psyphy)); $rcode; b <- coef(f); cat(sprintf('%.10f %.10f %.10f\n', -b[1]/b[2], 1/b[2], deviance(f)))" >"$WORK/r.txt" 2>"$WORK/r.err"
  check "R glm mafc.probit($2) ran ($3)" test -s "$WORK/r.txt"
  check "normal fit agrees with R glm mafc.probit($2) on $3 rows" $PY -c '
import json, sys
d = json.load(open(sys.argv[1])); a, b, dev = map(float, open(sys.argv[2]).read().split())
assert abs(d["alpha"] - a) < 1e-4 * (1 + abs(a)), (d["alpha"], a)
assert abs(d["beta"] - b) < 1e-4 * (1 + abs(b)), (d["beta"], b)
if sys.argv[3] == "grouped":   # deviance against the same saturated model only for counts
    assert abs(d["deviance"] - dev) < 1e-5 * (1 + dev), (d["deviance"], dev)
print("# tachist", d["alpha"], d["beta"], "R", a, b)
' "$WORK/n.json" "$WORK/r.txt" "$3"
done

# Reference: scipy.optimize maximises the same binomial likelihood (several Nelder-Mead starts,
# then L-BFGS-B within the lapse bounds). tachist's maximum must be at least as high and its
# parameters the same.
cat >"$WORK/sp.py" <<'PYEOF'
import csv, json, sys
import numpy as np
from scipy.optimize import minimize
from scipy.stats import norm
path, m, shape, lapse, js = sys.argv[1], int(sys.argv[2]), sys.argv[3], sys.argv[4], sys.argv[5]
rows = list(csv.DictReader(open(path)))
x = np.array([float(r["level"]) for r in rows]); n = np.array([float(r["n"]) for r in rows])
k = np.array([float(r["k"]) for r in rows]); g = 1.0 / m
def F(a, b):
    if shape == "weibull":
        return 1 - np.exp(-(x / a) ** b)
    return 1 / (1 + np.exp(-(x - a) / b))
def nll(p):
    a, b = p[0], p[1]
    lam = p[2] if lapse == "free" else float(lapse)
    if b <= 0 or (shape == "weibull" and a <= 0) or not (0 <= lam <= 0.06):
        return 1e300
    pr = np.clip(g + (1 - g - lam) * F(a, b), 1e-12, 1 - 1e-12)
    return -np.sum(k * np.log(pr) + (n - k) * np.log1p(-pr))
best = None
span = x.max() - x.min()
for a0 in np.linspace(x.min() + 0.2 * span, x.max() - 0.2 * span, 4):
    for b0 in ((1.0, 2.0, 4.0) if shape == "weibull" else (0.05 * span, 0.2 * span)):
        p0 = [a0, b0] + ([0.02] if lapse == "free" else [])
        r = minimize(nll, p0, method="Nelder-Mead", options={"xatol": 1e-10, "fatol": 1e-12, "maxiter": 20000})
        if best is None or r.fun < best.fun:
            best = r
bounds = [(1e-9, None), (1e-9, None)] + ([(0, 0.06)] if lapse == "free" else [])
r = minimize(nll, best.x, method="L-BFGS-B", bounds=bounds, options={"ftol": 1e-15, "gtol": 1e-10})
if r.fun < best.fun:
    best = r
d = json.load(open(js))
mine = [d["alpha"], d["beta"]] + ([d["lambda"]] if lapse == "free" else [])
print("# scipy", list(best.x), -best.fun, "tachist", mine, -nll(mine))
assert nll(mine) <= best.fun + 1e-6, "scipy found a higher likelihood"
for u, v in zip(mine, best.x):
    assert abs(u - v) < 2e-3 * (1 + abs(v)), (u, v)
PYEOF
for spec in "g2.csv 2 weibull free" "g2.csv 2 weibull 0" "g4.csv 4 weibull free" \
            "g2.csv 2 logistic 0" "g4.csv 4 logistic free" "g4.csv 4 logistic 0.02"; do
  set -- $spec
  "$TACHIST" fit "$WORK/$1" --m "$2" --shape "$3" --lapse "$4" --json --boot 0 >"$WORK/s.json"
  check "$3 fit (m=$2, lapse $4) agrees with scipy ML" $PY "$WORK/sp.py" "$WORK/$1" "$2" "$3" "$4" "$WORK/s.json"
done

# Bad input: non-numeric cells name FILE:LINE, every problem is listed, exit 1.
printf 'level,correct\n1,1\n1,x\nabc,1\n2,0,1\n' >"$WORK/bad.csv"
expect_exit "non-numeric cells exit 1" 1 "$TACHIST" fit "$WORK/bad.csv" --m 2
check "bad correct cell named with its line" grep -q "bad.csv:3: error: correct 'x' must be 0 or 1" "$WORK/last.err"
check "bad level cell named with its line" grep -q "bad.csv:4: error: level 'abc' is not a number" "$WORK/last.err"
check "wrong column count named with its line" grep -q "bad.csv:5: error: 3 columns where the first row has 2" "$WORK/last.err"
printf 'level,n,k\n1,10,11\n2,x,3\n' >"$WORK/bad2.csv"
expect_exit "k > n and bad n exit 1" 1 "$TACHIST" fit "$WORK/bad2.csv" --m 2
check "k larger than n named" grep -q "bad2.csv:2: error: k (11) is larger than n (10)" "$WORK/last.err"
check "non-numeric n named" grep -q "bad2.csv:3: error: n 'x' is not a whole number" "$WORK/last.err"
# Hex, infinities and NaN are not plain decimal numbers (strtod would take them).
printf 'level,correct\n0x10,1\ninf,0\nnan,1\n 2 ,1\n' >"$WORK/hex.csv"
expect_exit "hex, inf and nan levels exit 1" 1 "$TACHIST" fit "$WORK/hex.csv" --m 2
check "hex level named" grep -q "hex.csv:2: error: level '0x10' is not a number" "$WORK/last.err"
check "inf level named" grep -q "hex.csv:3: error: level 'inf' is not a number" "$WORK/last.err"
check "nan level named" grep -q "hex.csv:4: error: level 'nan' is not a number" "$WORK/last.err"
expect_eq "a level with spaces around is still a number" 0 "$(grep -c "hex.csv:5" "$WORK/last.err")"
: >"$WORK/empty.csv"
expect_exit "empty file exits 1" 1 "$TACHIST" fit "$WORK/empty.csv" --m 2
check "empty file says so" grep -q "empty.csv: error: no data rows" "$WORK/last.err"
expect_exit "missing file exits 1" 1 "$TACHIST" fit "$WORK/nope.csv" --m 2
check "missing file says so" grep -q "nope.csv: error: cannot open" "$WORK/last.err"

# Data that cannot support a fit: a message, exit 1, no number printed for the fit.
printf 'level,n,k\n0.5,20,14\n0.5,20,12\n' >"$WORK/eq.csv"
expect_exit "all levels equal exits 1" 1 "$TACHIST" fit "$WORK/eq.csv" --m 2 --shape logistic
check "all levels equal says so" grep -q "every trial is at one level" "$WORK/last.err"
check "no alpha printed for a failed fit" sh -c "! grep -q '^alpha' '$WORK/last.out'"
"$TACHIST" fit "$WORK/eq.csv" --m 2 --json >"$WORK/eq.json"
check "failed fit in JSON: null numbers and a message" $PY -c '
import json, sys
d = json.load(open(sys.argv[1]))
assert d["status"] == "unsupported" and d["message"]
assert all(d[k] is None for k in ("alpha", "beta", "lambda", "threshold", "deviance"))
' "$WORK/eq.json"
printf 'level,correct\n1,0\n2,1\n3,0\n4,1\n5,1\n' >"$WORK/one.csv"
"$TACHIST" fit "$WORK/one.csv" --m 2 --shape logistic >"$WORK/one.out" 2>&1
check "one trial per level: no NaN printed" sh -c "! grep -qi 'nan' '$WORK/one.out'"
printf 'level,n,k\n1,40,20\n2,40,21\n3,40,40\n4,40,40\n' >"$WORK/step.csv"
expect_exit "a step exits 1" 1 "$TACHIST" fit "$WORK/step.csv" --m 2 --shape logistic
check "a step says the slope cannot be estimated" grep -q "slope cannot be estimated" "$WORK/last.err"
for f in eq step one; do
  "$TACHIST" fit "$WORK/$f.csv" --m 2 --json >"$WORK/x.json" 2>/dev/null
  check "no NaN in JSON ($f)" sh -c "! grep -qi 'nan' '$WORK/x.json'"
done

# Falling data: the Weibull cannot describe them and says so; the logistic gets beta < 0.
expect_exit "falling data with the Weibull exits 1" 1 "$TACHIST" fit "$WORK/fall.csv" --m 4
check "falling data: the Weibull says why" grep -q "falls as the level rises" "$WORK/last.err"
"$TACHIST" fit "$WORK/fall.csv" --m 4 --shape logistic --json --boot 200 >"$WORK/fall.json"
check "falling logistic: beta < 0, threshold inside its interval" $PY -c '
import json, sys
d = json.load(open(sys.argv[1]))
assert d["status"] == "ok" and d["beta"] < 0
assert d["threshold_lower"] < d["threshold"] < d["threshold_upper"]
' "$WORK/fall.json"

# Usage errors exit 2.
expect_exit "missing --m is a usage error" 2 "$TACHIST" fit "$WORK/g2.csv"
expect_exit "--m 1 is a usage error" 2 "$TACHIST" fit "$WORK/g2.csv" --m 1
expect_exit "bad --shape is a usage error" 2 "$TACHIST" fit "$WORK/g2.csv" --m 2 --shape gumbel
expect_exit "bad --lapse is a usage error" 2 "$TACHIST" fit "$WORK/g2.csv" --m 2 --lapse lots

# The two forms --help names are the headers the reader takes: each column list it gives in
# parentheses, as a header over two rows, reads without a "must be" or "column" error.
"$TACHIST" fit --help | tr '\n' ' ' | grep -o '(level,[a-z,]*' | sed 's/^(//' >"$WORK/forms"
expect_eq "fit --help names two input forms" 2 "$(wc -l <"$WORK/forms" | tr -d ' ')"
while read -r form; do
  case "$form" in
    *,*,*) printf '%s\n1,10,6\n2,10,9\n' "$form" >"$WORK/form.csv" ;;
    *) printf '%s\n1,0\n2,1\n' "$form" >"$WORK/form.csv" ;;
  esac
  "$TACHIST" fit "$WORK/form.csv" --m 2 --boot 0 --lapse 0 >/dev/null 2>"$WORK/form.err"
  check "the form $form from --help is read" test -z "$(grep 'form.csv:[0-9]*: error' "$WORK/form.err")"
done <"$WORK/forms"
