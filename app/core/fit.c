/* fit — maximum-likelihood psychometric fits and the parametric bootstrap (see fit.h).
 *
 * The points are copied, sorted by level and merged (equal levels pooled) into a small model
 * struct. The search works on unconstrained parameters θ:
 *   logistic, normal:  θ0 = α,      θ1 = ln β
 *   weibull:           θ0 = ln α,   θ1 = ln β      (levels ≤ 0 give F = 0)
 *   λ free:            θ2 with λ = λmax·(1 + sin θ2)/2, which keeps λ in [0, λmax] and lets the
 *                      optimum sit on either bound with a zero derivative.
 * The main fit runs Nelder–Mead (GSL nmsimplex2) from a grid of starts and restarts from the best;
 * bootstrap refits start at the ML estimate and use BFGS with the analytic gradient, falling back
 * to Nelder–Mead. Bootstrap sample b draws from its own mt19937 seeded from (seed, b), so the
 * result does not depend on the number of threads. */
#include "fit.h"

#include <math.h>
#include <pthread.h>
#include <stdlib.h>
#include <stdio.h>
#include <string.h>

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_multimin.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>

#include "diag.h"
#include "stats.h"

#define P_EPS 1e-12

struct model {
	size_t n;
	double *x, *logx;          /* levels and their logs (Weibull; −inf for x ≤ 0) */
	unsigned long *nt, *k;
	enum psyfn_shape shape;
	double gamma;
	bool lapse_free;
	double lapse, lapse_max;
	double sign;               /* +1: P rises with the level; −1: it falls (logistic, normal) */
	double lnb_lim;            /* steepness bound on ln β (see slope_bound); ±inf = none */
	size_t npar;
};

void fit_opts_default(struct fit_opts *o, int m)
{
	memset(o, 0, sizeof *o);
	o->m = m;
	o->shape = PSYFN_WEIBULL;
	o->lapse_free = true;
	o->lapse = 0;
	o->lapse_max = 0.06;
	o->pc_threshold = m >= 2 ? 1.0 / m + (1.0 - 1.0 / m) / 2 : 0.75;
	o->nboot = 1000;
	o->seed = 1;
	o->conf = 0.95;
	o->threads = 1;
	o->direction = 0;
}

int fit_lapse_parse(const char *s, struct fit_opts *o)
{
	if (!strcmp(s, "free")) {
		o->lapse_free = true;
		return 0;
	}
	char *end;
	double v = strtod(s, &end);
	if (end == s || *end || !(v >= 0 && v < 1))
		return -1;
	o->lapse_free = false;
	o->lapse = v;
	return 0;
}

/* θ1 -> ln β held to the steepness bound: at least lnb_lim for the logistic and normal (β is a
 * scale), at most lnb_lim for the Weibull (β is an exponent). Past the bound the likelihood is flat
 * in θ1, so the optimum of a runaway slope sits on the bound. */
static double lnb(const struct model *md, double t1)
{
	if (md->shape == PSYFN_WEIBULL)
		return t1 > md->lnb_lim ? md->lnb_lim : t1;
	return t1 < md->lnb_lim ? md->lnb_lim : t1;
}

static bool at_bound(const struct model *md, double t1)
{
	if (!isfinite(md->lnb_lim))
		return false;
	return md->shape == PSYFN_WEIBULL ? t1 >= md->lnb_lim : t1 <= md->lnb_lim;
}

/* θ -> α, β, λ. */
static void decode(const struct model *md, const double *th, double *a, double *b, double *l)
{
	*a = md->shape == PSYFN_WEIBULL ? exp(th[0]) : th[0];
	*b = md->sign * exp(lnb(md, th[1]));
	*l = md->lapse_free ? md->lapse_max * (1 + sin(th[2])) / 2 : md->lapse;
}

/* F, dF/dθ0 and dF/dθ1 at point I. */
static double core(const struct model *md, size_t i, const double *th, double *d0, double *d1)
{
	double b = md->sign * exp(lnb(md, th[1]));   /* z = (x − α)/β: dz/dθ1 = −z for either sign */
	double g1 = at_bound(md, th[1]) ? 0 : 1;      /* flat in θ1 past the bound */
	if (md->shape == PSYFN_WEIBULL) {
		if (md->logx[i] == -INFINITY) {
			*d0 = *d1 = 0;
			return 0;
		}
		double t = md->logx[i] - th[0];
		double u = exp(b * t);
		double e = exp(-u);
		*d0 = e * (-b * u);
		*d1 = g1 * e * (u * b * t);
		return -expm1(-u);
	}
	double z = (md->x[i] - th[0]) / b, F, f;
	if (md->shape == PSYFN_LOGISTIC) {
		F = 1.0 / (1.0 + exp(-z));
		f = F * (1 - F);
	} else {
		F = gsl_cdf_ugaussian_P(z);
		f = exp(-0.5 * z * z) * 0.3989422804014327;   /* φ(z) = e^(−z²/2)/√(2π) */
	}
	*d0 = -f / b;
	*d1 = -g1 * f * z;
	return F;
}

/* Negative log-likelihood at θ, and its gradient into G when G is not NULL. */
static double nll(const struct model *md, const double *th, double *g)
{
	double a, b, l;
	decode(md, th, &a, &b, &l);
	(void)a;
	(void)b;
	double s = 1 - md->gamma - l;
	double dl = md->lapse_free ? md->lapse_max * cos(th[2]) / 2 : 0;
	double sum = 0;
	if (g)
		g[0] = g[1] = g[2] = 0;
	for (size_t i = 0; i < md->n; i++) {
		double d0, d1;
		double F = core(md, i, th, &d0, &d1);
		double p = md->gamma + s * F;
		if (p < P_EPS)
			p = P_EPS;
		if (p > 1 - P_EPS)
			p = 1 - P_EPS;
		double k = (double)md->k[i], nk = (double)(md->nt[i] - md->k[i]);
		sum -= k * log(p) + nk * log1p(-p);
		if (g) {
			double w = -(k / p - nk / (1 - p));
			g[0] += w * s * d0;
			g[1] += w * s * d1;
			g[2] += w * (-F) * dl;
		}
	}
	/* Past the steepness bound the likelihood is flat in θ1; a quadratic wall there gives the
	 * minimisers a unique optimum on the bound (the wall is 0 on the bound, so the fitted
	 * likelihood is unchanged). */
	if (at_bound(md, th[1])) {
		double e = th[1] - md->lnb_lim;
		sum += e * e;
		if (g)
			g[1] += 2 * e;
	}
	return sum;
}

static double mm_f(const gsl_vector *v, void *p)
{
	double th[3] = {0, 0, 0};
	for (size_t i = 0; i < v->size; i++)
		th[i] = gsl_vector_get(v, i);
	double r = nll(p, th, NULL);
	return isfinite(r) ? r : GSL_POSINF;
}

static void mm_df(const gsl_vector *v, void *p, gsl_vector *g)
{
	double th[3] = {0, 0, 0}, gg[3];
	for (size_t i = 0; i < v->size; i++)
		th[i] = gsl_vector_get(v, i);
	nll(p, th, gg);
	for (size_t i = 0; i < v->size; i++)
		gsl_vector_set(g, i, gg[i]);
}

static void mm_fdf(const gsl_vector *v, void *p, double *f, gsl_vector *g)
{
	*f = mm_f(v, p);
	mm_df(v, p, g);
}

/* Nelder–Mead from TH (updated in place). Returns true on convergence; *VAL gets the minimum. */
static bool nm_search(const struct model *md, double *th, int maxit, double tol, double *val)
{
	size_t np = md->npar;
	gsl_multimin_function fn = {mm_f, np, (void *)md};
	gsl_vector *x = gsl_vector_alloc(np), *step = gsl_vector_alloc(np);
	double steps[3] = {md->shape == PSYFN_WEIBULL ? 0.2 : 0.0, 0.3, 0.5};
	if (md->shape != PSYFN_WEIBULL) {
		double r = md->x[md->n - 1] - md->x[0];
		steps[0] = 0.1 * (r > 0 ? r : 1);
	}
	for (size_t i = 0; i < np; i++) {
		gsl_vector_set(x, i, th[i]);
		gsl_vector_set(step, i, steps[i]);
	}
	gsl_multimin_fminimizer *s = gsl_multimin_fminimizer_alloc(gsl_multimin_fminimizer_nmsimplex2, np);
	gsl_multimin_fminimizer_set(s, &fn, x, step);
	int status = GSL_CONTINUE;
	for (int it = 0; it < maxit && status == GSL_CONTINUE; it++) {
		if (gsl_multimin_fminimizer_iterate(s) != GSL_SUCCESS)
			break;
		status = gsl_multimin_test_size(gsl_multimin_fminimizer_size(s), tol);
	}
	for (size_t i = 0; i < np; i++)
		th[i] = gsl_vector_get(s->x, i);
	*val = s->fval;
	gsl_multimin_fminimizer_free(s);
	gsl_vector_free(x);
	gsl_vector_free(step);
	return status == GSL_SUCCESS && isfinite(*val);
}

/* BFGS with the analytic gradient from TH. Returns true on convergence. */
static bool bfgs_search(const struct model *md, double *th, double *val)
{
	size_t np = md->npar;
	gsl_multimin_function_fdf fn = {mm_f, mm_df, mm_fdf, np, (void *)md};
	gsl_vector *x = gsl_vector_alloc(np);
	for (size_t i = 0; i < np; i++)
		gsl_vector_set(x, i, th[i]);
	gsl_multimin_fdfminimizer *s =
		gsl_multimin_fdfminimizer_alloc(gsl_multimin_fdfminimizer_vector_bfgs2, np);
	gsl_multimin_fdfminimizer_set(s, &fn, x, 0.05, 0.1);
	double ntot = 0;
	for (size_t i = 0; i < md->n; i++)
		ntot += (double)md->nt[i];
	double gtol = 1e-6 * (1 + ntot);
	int status = gsl_multimin_test_gradient(s->gradient, gtol);
	for (int it = 0; it < 200 && status == GSL_CONTINUE; it++) {
		if (gsl_multimin_fdfminimizer_iterate(s) != GSL_SUCCESS)
			break;
		status = gsl_multimin_test_gradient(s->gradient, gtol);
	}
	bool ok = status == GSL_SUCCESS && isfinite(s->f);
	if (ok) {
		for (size_t i = 0; i < np; i++)
			th[i] = gsl_vector_get(s->x, i);
		*val = s->f;
	}
	gsl_multimin_fdfminimizer_free(s);
	gsl_vector_free(x);
	return ok;
}

static int cmp_point(const void *a, const void *b)
{
	double x = ((const struct fit_point *)a)->level, y = ((const struct fit_point *)b)->level;
	return (x > y) - (x < y);
}

/* +1 when proportion correct rises with the level, −1 when it falls: the sign of the
 * trial-weighted covariance of level and proportion correct (ties and single levels: +1). */
static double direction(const double *x, const unsigned long *nt, const unsigned long *k, size_t n)
{
	double sn = 0, sx = 0, sp = 0, cov = 0;
	for (size_t i = 0; i < n; i++) {
		sn += (double)nt[i];
		sx += (double)nt[i] * x[i];
		sp += (double)k[i];
	}
	for (size_t i = 0; i < n && sn > 0; i++)
		if (nt[i])
			cov += (double)nt[i] * (x[i] - sx / sn) * ((double)k[i] / (double)nt[i] - sp / sn);
	return cov < 0 ? -1 : 1;
}

int fit_direction(const struct fit_point *pts, size_t npts)
{
	double *x = xmalloc((npts + 1) * sizeof *x);
	unsigned long *nt = xmalloc((npts + 1) * sizeof *nt), *k = xmalloc((npts + 1) * sizeof *k);
	for (size_t i = 0; i < npts; i++) {
		x[i] = pts[i].level;
		nt[i] = pts[i].n;
		k[i] = pts[i].k;
	}
	double d = direction(x, nt, k, npts);
	free(x);
	free(nt);
	free(k);
	return d < 0 ? -1 : 1;
}

/* The steepness bound, in ln β: the fitted F must take at least the smallest spacing g between
 * adjacent tested levels (in ln level for the Weibull, whose F is a Gumbel CDF in ln x) to rise
 * from 0.1 to 0.9. Steeper functions are indistinguishable from a step on the levels tested, and
 * without the bound the ML slope of such data runs to infinity. The 10–90% width of each shape:
 * logistic 2·ln 9·β, normal 2·z(0.9)·β, Weibull (ln(−ln 0.1) − ln(−ln 0.9))/β. Recalled from
 * memory: the Bayesian method of Schütt, Harmeling, Macke & Wichmann (2016, Vision Research 122)
 * lets its prior on the width fall to zero below the smallest level spacing for the same reason. */
static double slope_bound(const struct model *md)
{
	double g = INFINITY, prev = NAN;
	for (size_t i = 0; i < md->n; i++) {
		double u = md->shape == PSYFN_WEIBULL ? md->logx[i] : md->x[i];
		if (!isfinite(u))
			continue;
		if (isfinite(prev) && u - prev < g)
			g = u - prev;
		prev = u;
	}
	bool weib = md->shape == PSYFN_WEIBULL;
	if (!(g > 0 && isfinite(g)))
		return weib ? INFINITY : -INFINITY;
	if (weib)
		return log((log(-log(0.1)) - log(-log(0.9))) / g);
	double w = md->shape == PSYFN_LOGISTIC ? 2 * log(9.0) : 2 * gsl_cdf_ugaussian_Pinv(0.9);
	return log(g / w);
}

/* Builds the model from the points: sorted, merged, empty points dropped. */
static void model_init(struct model *md, const struct fit_point *pts, size_t npts,
		       const struct fit_opts *o)
{
	memset(md, 0, sizeof *md);
	struct fit_point *v = xmalloc((npts ? npts : 1) * sizeof *v);
	if (npts)
		memcpy(v, pts, npts * sizeof *v);
	qsort(v, npts, sizeof *v, cmp_point);
	md->x = xmalloc((npts ? npts : 1) * sizeof *md->x);
	md->logx = xmalloc((npts ? npts : 1) * sizeof *md->logx);
	md->nt = xmalloc((npts ? npts : 1) * sizeof *md->nt);
	md->k = xmalloc((npts ? npts : 1) * sizeof *md->k);
	for (size_t i = 0; i < npts; i++) {
		if (v[i].n == 0)
			continue;
		if (md->n > 0 && md->x[md->n - 1] == v[i].level) {
			md->nt[md->n - 1] += v[i].n;
			md->k[md->n - 1] += v[i].k;
			continue;
		}
		md->x[md->n] = v[i].level;
		md->logx[md->n] = v[i].level > 0 ? log(v[i].level) : -INFINITY;
		md->nt[md->n] = v[i].n;
		md->k[md->n] = v[i].k;
		md->n++;
	}
	free(v);
	md->shape = o->shape;
	md->gamma = 1.0 / o->m;
	md->lapse_free = o->lapse_free;
	md->lapse = o->lapse;
	md->lapse_max = o->lapse_max;
	md->npar = o->lapse_free ? 3 : 2;
	md->sign = o->direction < 0 ? -1 : 1;
	if (o->direction == 0)
		md->sign = direction(md->x, md->nt, md->k, md->n);
	md->lnb_lim = slope_bound(md);
}

static void model_clear(struct model *md)
{
	free(md->x);
	free(md->logx);
	free(md->nt);
	free(md->k);
}

static double lapse_theta(const struct model *md, double lambda)
{
	double u = 2 * lambda / md->lapse_max - 1;
	return asin(fmax(-1.0, fmin(1.0, u)));
}

static void fill_psyfn(const struct model *md, const double *th, struct psyfn *f)
{
	f->shape = md->shape;
	f->gamma = md->gamma;
	decode(md, th, &f->alpha, &f->beta, &f->lambda);
}

/* Checks the data before fitting; returns 0 or -1 with R->reason set. */
static int precheck(const struct model *md, const struct fit_opts *o, struct fit_result *r)
{
	if (o->m < 2) {
		snprintf(r->reason, sizeof r->reason, "m must be at least 2 (got %d)", o->m);
		return -1;
	}
	if (o->lapse_free ? !(o->lapse_max >= 0 && o->lapse_max < 1 - 1.0 / o->m)
			  : !(o->lapse >= 0 && o->lapse < 1 - 1.0 / o->m)) {
		snprintf(r->reason, sizeof r->reason,
			 "the lapse rate must be at least 0 and below 1 - 1/m");
		return -1;
	}
	if (md->n == 0) {
		snprintf(r->reason, sizeof r->reason, "there are no trials to fit");
		return -1;
	}
	for (size_t i = 0; i < md->n; i++)
		if (md->k[i] > md->nt[i]) {
			snprintf(r->reason, sizeof r->reason,
				 "more correct trials than trials at level %g", md->x[i]);
			return -1;
		}
	if (md->n < 2) {
		snprintf(r->reason, sizeof r->reason,
			 "every trial is at one level (%g): a psychometric function needs at least "
			 "two different levels", md->x[0]);
		return -1;
	}
	if (md->shape == PSYFN_WEIBULL) {
		if (md->x[0] < 0) {
			snprintf(r->reason, sizeof r->reason,
				 "the Weibull needs levels of 0 or more (found %g); use the logistic "
				 "or normal shape", md->x[0]);
			return -1;
		}
		if (md->sign < 0) {
			snprintf(r->reason, sizeof r->reason,
				 "proportion correct falls as the level rises, and the Weibull can only "
				 "rise: use the logistic or normal shape");
			return -1;
		}
		size_t npos = 0;
		for (size_t i = 0; i < md->n; i++)
			npos += md->x[i] > 0;
		if (npos < 2) {
			snprintf(r->reason, sizeof r->reason,
				 "the Weibull needs at least two different levels above 0");
			return -1;
		}
	}
	if (md->n <= md->npar) {
		snprintf(r->reason, sizeof r->reason,
			 "%zu levels cannot support a fit of %zu free parameters (%s): a fit needs "
			 "more levels than parameters, or a fixed lapse rate", md->n, md->npar,
			 md->npar == 3 ? "position, slope and lapse rate" : "position and slope");
		return -1;
	}
	return 0;
}

/* Nelder–Mead from TH, a restart, and a gradient polish; TH and *VAL get the result. Returns true
 * on convergence. */
static bool descend(const struct model *md, double *th, double *val)
{
	double v, best;
	nm_search(md, th, 4000, 1e-6, &v);
	best = v;
	/* Restart from the best point with a fresh simplex: Nelder–Mead can stall on a ridge. */
	bool ok = nm_search(md, th, 4000, 1e-6, &v);
	if (v <= best)
		best = v;
	/* Polish with the gradient: the simplex stops where function values stop resolving. A simplex
	 * that reached the optimum but keeps a size just over the tolerance (values equal to the last
	 * digit, so it no longer contracts) still converges here: BFGS's test is the gradient. */
	double t[3];
	memcpy(t, th, sizeof t);
	if (bfgs_search(md, t, &v) && v <= best) {
		memcpy(th, t, sizeof t);
		best = v;
		ok = true;
	}
	*val = best;
	return ok;
}

/* Grid of starting points, then a descent (see descend) from the best of them and a gradient search
 * from the next two (a full descent while none has converged). The binomial
 * likelihood of these models is close to unimodal in (α, β) for a given λ, so a coarse grid
 * (9 positions × 5 slopes × 2 lapse rates, 90 likelihood evaluations) finds the right basin.
 * Returns true on convergence with the best converged θ in TH (the best θ seen when none
 * converged). */
static bool ml_search(const struct model *md, double *th, double *best_val)
{
	double lo, hi;
	if (md->shape == PSYFN_WEIBULL) {
		size_t i = 0;
		while (md->logx[i] == -INFINITY)
			i++;
		lo = md->logx[i];
		hi = md->logx[md->n - 1];
	} else {
		lo = md->x[0];
		hi = md->x[md->n - 1];
	}
	double r = hi - lo;
	static const double bw_weibull[5] = {0.5, 1.0, 2.0, 4.0, 8.0};
	static const double bw_frac[5] = {0.02, 0.05, 0.1, 0.2, 0.5};
	static const double bl[2] = {0.01, 0.04};
	/* The best NSTART grid points, best first. */
	enum { NSTART = 3 };
	double start[NSTART][3], sval[NSTART];
	for (int i = 0; i < NSTART; i++)
		sval[i] = INFINITY;
	int nl = md->lapse_free ? 2 : 1;
	for (int a = 0; a < 9; a++)
		for (int b = 0; b < 5; b++)
			for (int c = 0; c < nl; c++) {
				double t[3] = {lo + r * (a + 0.5) / 9.0,
					       md->shape == PSYFN_WEIBULL ? log(bw_weibull[b])
									  : log(bw_frac[b] * r),
					       md->lapse_free ? lapse_theta(md, bl[c]) : 0};
				double v = nll(md, t, NULL);
				int at = NSTART;
				while (at > 0 && v < sval[at - 1])
					at--;
				if (at == NSTART)
					continue;
				for (int i = NSTART - 1; i > at; i--) {
					sval[i] = sval[i - 1];
					memcpy(start[i], start[i - 1], sizeof start[i]);
				}
				sval[at] = v;
				memcpy(start[at], t, sizeof t);
			}
	/* Descend from each: the likelihood can have a second, poorer optimum (typically a steep
	 * function on the steepness bound next to a shallower one), and the best grid point does not
	 * always lie in the better basin. */
	bool ok = false;
	*best_val = INFINITY;
	for (int i = 0; i < NSTART && isfinite(sval[i]); i++) {
		double t[3], v;
		memcpy(t, start[i], sizeof t);
		bool c;
		if (ok) {
			/* Once one descent converged, a gradient search alone (a fraction of the
			 * cost) tells whether another start lies in a better basin. */
			c = bfgs_search(md, t, &v);
			if (!c || !(v < *best_val - 1e-9 * (1 + fabs(*best_val))))
				continue;   /* the same optimum (to rounding) or a poorer one */
		} else {
			c = descend(md, t, &v);
		}
		if ((c && (!ok || v < *best_val)) || (!ok && !c && v < *best_val)) {
			memcpy(th, t, sizeof t);
			*best_val = v;
			ok = ok || c;
		}
	}
	return ok;
}

/* d(−log-likelihood)/dλ at θ (θ0, θ1 of MD; λ = MD->lapse, MD's lapse fixed). */
static double lapse_slope(const struct model *md, const double *th)
{
	double s = 1 - md->gamma - md->lapse, sum = 0;
	for (size_t i = 0; i < md->n; i++) {
		double d0, d1;
		double F = core(md, i, th, &d0, &d1);
		double p = fmin(1 - P_EPS, fmax(P_EPS, md->gamma + s * F));
		double k = (double)md->k[i], nk = (double)(md->nt[i] - md->k[i]);
		sum += (k / p - nk / (1 - p)) * F;
	}
	return sum;
}

/* λ free: the best λ may lie on a bound (0 or λmax), where the free search can wander along a flat
 * valley without meeting its convergence test. So the model is also fitted with λ fixed at each
 * bound; a bound fit is a constrained optimum when the likelihood would fall on moving λ inside
 * (Karush–Kuhn–Tucker: d(−ℓ)/dλ ≥ 0 at 0, ≤ 0 at λmax, within a small tolerance). The best
 * likelihood among the converged candidates wins, its θ expressed in the free model's terms.
 * CONV says whether the free search converged (TH, *VAL hold its result); returns whether any
 * candidate did. */
static bool lapse_bound_search(const struct model *md, double *th, double *val, bool conv)
{
	double ntot = 0;
	for (size_t i = 0; i < md->n; i++)
		ntot += (double)md->nt[i];
	const double bounds[2] = {0.0, md->lapse_max};
	for (int b = 0; b < 2; b++) {
		struct model mb = *md;
		mb.lapse_free = false;
		mb.lapse = bounds[b];
		mb.npar = 2;
		double t[3] = {0, 0, 0}, v;
		if (!ml_search(&mb, t, &v))
			continue;
		t[1] = lnb(&mb, t[1]);
		v = nll(&mb, t, NULL);
		double g = lapse_slope(&mb, t), tol = 1e-6 * (1 + ntot);
		if (b == 0 ? g < -tol : g > tol)
			continue;   /* the likelihood rises inside: not an optimum of the free model */
		if (conv && !(v < *val))
			continue;
		th[0] = t[0];
		th[1] = t[1];
		th[2] = b == 0 ? -M_PI / 2 : M_PI / 2;
		*val = v;
		conv = true;
	}
	return conv;
}

/* Data the fitted function cannot speak for: flat across levels or a step between two levels.
 * STALLED: the search did not converge; then a rise from F = 0.1 to 0.9 with no tested level
 * inside it also counts as a step (the search was sharpening it without end). */
static int postcheck(const struct model *md, const double *th, struct fit_result *r, bool stalled)
{
	double d0, d1;
	size_t below = 0, above = 0;
	for (size_t i = 0; i < md->n; i++) {
		double F = core(md, i, th, &d0, &d1);
		below += F < 1e-3;
		above += F > 1 - 1e-3;
	}
	double lo = md->x[0], hi = md->x[md->n - 1];
	double a = md->shape == PSYFN_WEIBULL ? exp(th[0]) : th[0];
	if (below == md->n || above == md->n) {
		snprintf(r->reason, sizeof r->reason,
			 "proportion correct does not change across the levels tested (%g to %g): "
			 "the data put the threshold outside them, so no fit is reported", lo, hi);
		return -1;
	}
	/* Levels where the fitted F is neither at chance nor at ceiling. */
	size_t inside = 0;
	for (size_t i = 0; i < md->n; i++) {
		double F = core(md, i, th, &d0, &d1);
		inside += F > 0.01 && F < 0.99;
	}
	if (below + above == md->n || (stalled && inside <= 1)) {
		/* Walk the levels in the direction F rises (index I of the walk is level AT(I)). */
		size_t n = md->n, j = 0, k = n - 1;
#define AT(i) (md->sign > 0 ? (i) : n - 1 - (i))
		while (j + 1 < n && core(md, AT(j + 1), th, &d0, &d1) <= 0.01)
			j++;
		while (k > 0 && core(md, AT(k - 1), th, &d0, &d1) >= 0.99)
			k--;
		double xa = md->x[AT(j)], xb = md->x[AT(k)];
#undef AT
		snprintf(r->reason, sizeof r->reason,
			 "proportion correct %s between levels %g and %g with %s in between: the "
			 "slope cannot be estimated (test more levels in that range, or fix the lapse "
			 "rate)", md->sign > 0 ? "rises from chance to ceiling"
					       : "falls from ceiling to chance", fmin(xa, xb), fmax(xa, xb),
			 k > j + 1 ? "one level" : "no level");
		return -1;
	}
	/* On the steepness bound the data did not limit the slope; that is only a fit when some level
	 * was caught mid-transition: its Wilson 95% interval lies above chance and below 1. */
	if (at_bound(md, th[1])) {
		size_t mid = 0;
		for (size_t i = 0; i < md->n; i++) {
			double l, u;
			if (!stats_ci(STATS_CI_WILSON, md->k[i], md->nt[i], 0.95, &l, &u) &&
			    l > md->gamma && u < 1)
				mid++;
		}
		if (mid == 0) {
			snprintf(r->reason, sizeof r->reason,
				 "proportion correct jumps between two levels with no level caught "
				 "between chance and ceiling: the slope cannot be estimated (test more "
				 "levels in that range, or fix the lapse rate)");
			return -1;
		}
	}
	bool far = md->shape == PSYFN_WEIBULL ? (a > hi * 1e3) : (a > hi + 10 * (hi - lo) ||
								   a < lo - 10 * (hi - lo));
	if (far) {
		snprintf(r->reason, sizeof r->reason,
			 "the fitted position lies far outside the levels tested (%g to %g): the "
			 "data do not constrain it", lo, hi);
		return -1;
	}
	return 0;
}

struct boot_job {
	const struct model *md;
	const double *th0;
	const double *p;       /* fitted probability per point */
	const struct fit_opts *o;
	int first, stride;
	double *alpha, *beta, *lambda, *thr;
	unsigned char *ok;     /* 0 failed, 1 converged, 2 converged with a reachable threshold */
};

static uint64_t mix64(uint64_t z)
{
	z += 0x9e3779b97f4a7c15ULL;
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
	z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
	return z ^ (z >> 31);
}

static void *boot_worker(void *arg)
{
	struct boot_job *j = arg;
	const struct model *md = j->md;
	struct model bm = *md;
	bm.k = xmalloc(md->n * sizeof *bm.k);
	gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
	/* The derivative in θ2 vanishes on a lapse bound, so a gradient search started there would
	 * never move λ: start the refits 1% of the range inside. */
	double start2 = j->th0[2];
	if (md->lapse_free) {
		double l = md->lapse_max * (1 + sin(start2)) / 2;
		start2 = lapse_theta(md, fmin(0.99 * md->lapse_max, fmax(0.01 * md->lapse_max, l)));
	}
	for (int b = j->first; b < j->o->nboot; b += j->stride) {
		gsl_rng_set(rng, (unsigned long)(mix64(j->o->seed ^ mix64((uint64_t)b)) & 0xffffffffUL));
		for (size_t i = 0; i < md->n; i++)
			bm.k[i] = gsl_ran_binomial(rng, j->p[i], (unsigned int)md->nt[i]);
		double th[3] = {j->th0[0], j->th0[1], start2}, v;
		bool conv = bfgs_search(&bm, th, &v);
		if (!conv) {
			memcpy(th, j->th0, sizeof th);
			th[2] = start2;
			conv = nm_search(&bm, th, 4000, 1e-6, &v);
		}
		if (!conv && bm.lapse_free)
			conv = lapse_bound_search(&bm, th, &v, false);
		j->ok[b] = 0;
		if (!conv)
			continue;
		struct psyfn f;
		fill_psyfn(&bm, th, &f);
		j->alpha[b] = f.alpha;
		j->beta[b] = f.beta;
		j->lambda[b] = f.lambda;
		j->thr[b] = psyfn_inverse(&f, j->o->pc_threshold);
		j->ok[b] = isfinite(j->thr[b]) ? 2 : 1;
	}
	gsl_rng_free(rng);
	free(bm.k);
	return NULL;
}

/* Percentile interval of the N values V (sorted in place). */
static void pct_interval(double *v, size_t n, double conf, double out[2])
{
	gsl_sort(v, 1, n);
	out[0] = gsl_stats_quantile_from_sorted_data(v, 1, n, (1 - conf) / 2);
	out[1] = gsl_stats_quantile_from_sorted_data(v, 1, n, 1 - (1 - conf) / 2);
}

static void bootstrap(const struct model *md, const double *th0, const struct fit_opts *o,
		      struct fit_result *r)
{
	int B = o->nboot;
	double *p = xmalloc(md->n * sizeof *p);
	for (size_t i = 0; i < md->n; i++)
		p[i] = psyfn_eval(&r->f, md->x[i]);
	double *alpha = xmalloc((size_t)B * sizeof *alpha), *beta = xmalloc((size_t)B * sizeof *beta);
	double *lambda = xmalloc((size_t)B * sizeof *lambda), *thr = xmalloc((size_t)B * sizeof *thr);
	unsigned char *ok = xcalloc((size_t)B, 1);
	int T = o->threads < 1 ? 1 : o->threads > 64 ? 64 : o->threads;
	struct boot_job jobs[64];
	pthread_t tid[64];
	bool started[64] = {false};
	for (int t = 0; t < T; t++) {
		jobs[t] = (struct boot_job){md, th0, p, o, t, T, alpha, beta, lambda, thr, ok};
		if (t > 0)
			started[t] = pthread_create(&tid[t], NULL, boot_worker, &jobs[t]) == 0;
	}
	boot_worker(&jobs[0]);
	for (int t = 1; t < T; t++) {
		if (started[t])
			pthread_join(tid[t], NULL);
		else
			boot_worker(&jobs[t]);
	}
	/* Compact the converged samples to the front of each array. */
	size_t nc = 0, nt = 0;
	for (int b = 0; b < B; b++) {
		if (!ok[b])
			continue;
		alpha[nc] = alpha[b];
		beta[nc] = beta[b];
		lambda[nc] = lambda[b];
		nc++;
	}
	for (int b = 0; b < B; b++)
		if (ok[b] == 2)
			thr[nt++] = thr[b];
	r->nboot = B;
	r->nboot_failed = B - (int)nc;
	r->threshold_ci_n = (int)nt;
	if (nc >= 2 && nc * 2 >= (size_t)B) {
		r->has_ci = true;
		pct_interval(alpha, nc, o->conf, r->alpha_ci);
		pct_interval(beta, nc, o->conf, r->beta_ci);
		pct_interval(lambda, nc, o->conf, r->lambda_ci);
		if (nt >= 2 && nt * 2 >= (size_t)B)
			pct_interval(thr, nt, o->conf, r->threshold_ci);
		else
			r->threshold_ci[0] = r->threshold_ci[1] = NAN;
	}
	free(p);
	free(alpha);
	free(beta);
	free(lambda);
	free(thr);
	free(ok);
}

struct fit_point *fit_group(const double *levels, const int *correct, size_t n, size_t *npts)
{
	*npts = 0;
	if (n == 0)
		return NULL;
	struct fit_point *v = xmalloc(n * sizeof *v);
	for (size_t i = 0; i < n; i++)
		v[i] = (struct fit_point){levels[i], 1, correct[i] ? 1u : 0u};
	qsort(v, n, sizeof *v, cmp_point);
	size_t m = 0;
	for (size_t i = 0; i < n; i++) {
		if (m > 0 && v[m - 1].level == v[i].level) {
			v[m - 1].n += v[i].n;
			v[m - 1].k += v[i].k;
		} else {
			v[m++] = v[i];
		}
	}
	*npts = m;
	return v;
}

int fit_run(const struct fit_point *pts, size_t npts, const struct fit_opts *o,
	    struct fit_result *r)
{
	memset(r, 0, sizeof *r);
	r->threshold = r->deviance = r->loglik = NAN;
	r->pc_threshold = o->pc_threshold;
	struct model md;
	model_init(&md, pts, npts, o);
	r->npoints = md.n;
	for (size_t i = 0; i < md.n; i++)
		r->ntrials += md.nt[i];
	r->f.shape = o->shape;
	r->f.gamma = o->m > 0 ? 1.0 / o->m : NAN;
	r->status = FIT_UNSUPPORTED;
	int rc = -1;
	gsl_error_handler_t *old = gsl_set_error_handler_off();
	if (precheck(&md, o, r) < 0)
		goto out;
	double th[3] = {0, 0, 0}, val;
	bool conv = ml_search(&md, th, &val);
	if (md.lapse_free)
		conv = lapse_bound_search(&md, th, &val, conv);
	if (!conv) {
		/* A search that runs off towards a step or a flat line is the data's doing: say so. */
		if (postcheck(&md, th, r, true) < 0)
			goto out;
		r->status = FIT_NO_CONVERGENCE;
		snprintf(r->reason, sizeof r->reason,
			 "the maximum-likelihood search did not converge");
		goto out;
	}
	th[1] = lnb(&md, th[1]);   /* onto the bound (drops the wall term below) */
	val = nll(&md, th, NULL);
	if (postcheck(&md, th, r, false) < 0)
		goto out;
	fill_psyfn(&md, th, &r->f);
	r->slope_bounded = at_bound(&md, th[1]);
	r->loglik = -val;
	double dev = 0;
	for (size_t i = 0; i < md.n; i++) {
		double p = psyfn_eval(&r->f, md.x[i]);
		p = fmin(1 - P_EPS, fmax(P_EPS, p));
		double n = (double)md.nt[i], k = (double)md.k[i];
		if (k > 0)
			dev += k * log(k / (n * p));
		if (n - k > 0)
			dev += (n - k) * log((n - k) / (n * (1 - p)));
	}
	r->deviance = 2 * dev;
	r->dof = (int)md.n - (int)md.npar;
	r->threshold = psyfn_inverse(&r->f, o->pc_threshold);
	r->threshold_ok = isfinite(r->threshold);
	r->status = FIT_OK;
	rc = 0;
	if (o->nboot > 0)
		bootstrap(&md, th, o, r);
out:
	gsl_set_error_handler(old);
	model_clear(&md);
	return rc;
}
