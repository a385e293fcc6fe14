"""fit_ref — simulated psychometric data and an independent maximum-likelihood fit (scipy.optimize)
for checking `fit_run` with a free lapse rate. Run with /usr/bin/python3.

  fit_ref.py make N SEED        prints N data sets, one per line, in tests/tools/fit_batch's input form
  fit_ref.py compare SETS OUT   fits each line of SETS with scipy and compares with fit_batch's OUT;
                                prints one TAP line per property and a summary

Model (the same as app/core/fit.c): P(x) = g + (1 - g - lam) * F(x), Weibull F = 1 - exp(-(x/a)^b),
g = 1/m, lam in [0, 0.06]; log-likelihood sum k ln P + (n - k) ln(1 - P) without the constant.
scipy's L-BFGS-B (analytic gradient) with the lapse boxed to [0, 0.06] and the slope to fit.c's
steepness bound, from 2 x 2 x 3 starts, is the reference; a parameter on its box bound is an ordinary result for it."""
import math
import sys

import numpy as np
from scipy.optimize import minimize

LAPSE_MAX = 0.06
LEVELS = [0.7, 1.0, 1.3, 1.6, 2.0, 2.5, 3.2]


def make(n, seed):
    rng = np.random.default_rng(seed)
    out = []
    # The data set of the original report first (its ML lapse is 0).
    out.append("2 weibull free " + " ".join("%g %d %d" % t for t in
               [(0.7, 40, 24), (1, 40, 18), (1.3, 40, 27), (1.6, 40, 30), (2, 40, 31),
                (2.5, 40, 36), (3.2, 40, 39)]))
    while len(out) < n:
        a = rng.uniform(1.2, 2.4)
        b = rng.uniform(1.5, 5.0)
        lam = rng.choice([0.0, 0.0, 0.01, 0.03, 0.06])
        ntr = int(rng.choice([20, 40, 80]))
        pts = []
        for x in LEVELS:
            p = 0.5 + (0.5 - lam) * (1 - math.exp(-(x / a) ** b))
            pts.append((x, ntr, int(rng.binomial(ntr, p))))
        out.append("2 weibull free " + " ".join("%g %d %d" % t for t in pts))
    print("\n".join(out))


def loglik(th, x, n, k, g):
    """Log-likelihood and its gradient in (a, b, lam)."""
    a, b, lam = th
    r = x / a
    u = r ** b
    e = np.exp(-u)
    F = 1 - e
    s = 1 - g - lam
    p = np.clip(g + s * F, 1e-12, 1 - 1e-12)
    w = k / p - (n - k) / (1 - p)
    dFa = e * u * (-b / a)
    dFb = e * u * np.log(r)
    grad = np.array([np.sum(w * s * dFa), np.sum(w * s * dFb), np.sum(w * -F)])
    return float(np.sum(k * np.log(p) + (n - k) * np.log1p(-p))), grad


def slope_max(x):
    """app/core/fit.c's steepness bound for the Weibull: F may not rise from 0.1 to 0.9 over less
    than the smallest spacing of ln levels (the model tachist fits; scipy gets it as a box)."""
    lx = np.log(np.sort(x[x > 0]))
    gap = np.min(np.diff(lx))
    return (math.log(-math.log(0.1)) - math.log(-math.log(0.9))) / gap


def ref_fit(x, n, k, g):
    best = None
    bmax = slope_max(x)

    def f(t):
        v, gr = loglik(t, x, n, k, g)
        return -v, -gr
    for a0 in np.quantile(x, [0.3, 0.7]):
        for b0 in (2.0, 6.0):
            for l0 in (0.0, 0.03, 0.06):
                r = minimize(f, [a0, min(b0, bmax), l0], jac=True, method="L-BFGS-B",
                             bounds=[(1e-2, 100), (0.05, bmax), (0.0, LAPSE_MAX)],
                             options={"ftol": 1e-15, "gtol": 1e-9, "maxiter": 2000})
                if best is None or r.fun < best.fun:
                    best = r
    return best


def compare(sets, outs):
    lines = [l.split() for l in open(sets) if l.strip()]
    res = [l.rstrip("\n") for l in open(outs)]
    refused = worse = bounded = onbound = 0
    worst = 0.0
    for i, (f, r) in enumerate(zip(lines, res)):
        m = int(f[0])
        v = np.array([float(t) for t in f[3:]]).reshape(-1, 3)
        x, n, k = v[:, 0], v[:, 1], v[:, 2]
        ref = ref_fit(x, n, k, 1.0 / m)
        onbound += ref.x[2] < 1e-6 or ref.x[2] > LAPSE_MAX - 1e-6
        w = r.split()
        if w[0] != "ok":
            refused += 1
            print("#   set %d refused (%s); scipy: a %.4f b %.4f lambda %.4f" % (i, r, *ref.x))
            continue
        bounded += w[5] == "1"
        ll = float(w[4])
        d = -ref.fun - ll   # > 0: scipy found a higher likelihood than tachist
        worst = max(worst, d)
        if d > 1e-6:
            worse += 1
            print("#   set %d: tachist loglik %.9f (a %s b %s lambda %s), scipy %.9f (a %.6f b %.6f lambda %.6f)"
                  % (i, ll, w[1], w[2], w[3], -ref.fun, *ref.x))
    total = len(lines)
    print("%s - %d simulated data sets with a free lapse: %d refused (scipy's ML lapse on a bound in %d)"
          % ("ok" if refused == 0 and len(res) == total else "not ok", total, refused, onbound))
    print("%s - tachist's likelihood at least scipy's (L-BFGS-B) within 1e-6 in %d of %d (largest shortfall %.2g; slope on its bound in %d)"
          % ("ok" if worse == 0 else "not ok", total - refused - worse, total - refused,
             max(worst, 0.0), bounded))


if __name__ == "__main__":
    if sys.argv[1] == "make":
        make(int(sys.argv[2]), int(sys.argv[3]))
    else:
        compare(sys.argv[2], sys.argv[3])
