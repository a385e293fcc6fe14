# soak fit_lapse_500 — tests/e2e/fit_lapse.sh with 500 simulated data sets.
FIT_SETS=500 exec sh tests/e2e/fit_lapse.sh
