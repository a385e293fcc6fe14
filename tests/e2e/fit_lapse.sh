# e2e fit_lapse — fits with a free lapse rate whose maximum-likelihood lapse lies on a bound (0 or
# the upper limit) are fits, not refusals, and fit_run's likelihood is at least that of an
# independent optimiser (scipy.optimize L-BFGS-B, tests/tools/fit_ref.py) on simulated data sets.
# FIT_SETS data sets (60 here; `make soak` runs 500 in tests/soak/fit_lapse_500.sh).
. tests/e2e/lib.sh
PY=/usr/bin/python3
SETS=${FIT_SETS:-60}

# The data set of the original report: lapse free, ML lapse 0. Reference values: scipy L-BFGS-B on
# the same likelihood (tests/tools/fit_ref.py), alpha 2.069, beta 2.503, lambda 0.
printf 'level,n,k\n0.7,40,24\n1,40,18\n1.3,40,27\n1.6,40,30\n2,40,31\n2.5,40,36\n3.2,40,39\n' >"$WORK/bound.csv"
expect_exit "fit with the ML lapse on its bound (0) is a fit" 0 "$TACHIST" fit "$WORK/bound.csv" --m 2 --json
got=$($PY -c 'import json,sys; j=json.load(open(sys.argv[1])); print("%.3f %.3f %.3f" % (j["alpha"], j["beta"], j["lambda"]))' "$WORK/last.out" 2>/dev/null)
expect_eq "alpha, beta, lambda = scipy's 2.069 2.503 0.000" "2.069 2.503 0.000" "$got"

$PY "$ROOT/tests/tools/fit_ref.py" make "$SETS" 16 >"$WORK/sets.txt"
"$ROOT/$BUILD/tools/fit_batch" <"$WORK/sets.txt" >"$WORK/out.txt"
$PY "$ROOT/tests/tools/fit_ref.py" compare "$WORK/sets.txt" "$WORK/out.txt"
