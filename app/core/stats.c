/* stats — binomial intervals, m-AFC d′ and reaction-time summaries (see stats.h).
 *
 * Everything works on plain numbers and arrays the caller owns. The d′ integral is evaluated with
 * GSL's QAGI (the whole real line) and inverted with Brent's root finder; the intervals use GSL's
 * normal and beta quantiles; GSL's beta inverse gives up on some ordinary counts, so its answer is
 * checked and a bracketing solver on the incomplete beta function takes over. Error handling of
 * GSL is switched off locally (main also switches it off at start-up): a failed integration returns
 * NaN and a failed interval -1 instead of aborting the program. */
#include "stats.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_cdf.h>
#include <gsl/gsl_errno.h>
#include <gsl/gsl_integration.h>
#include <gsl/gsl_math.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_roots.h>
#include <gsl/gsl_sf_gamma.h>
#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>

int stats_ci_method_parse(const char *s, enum stats_ci_method *out)
{
	if (!strcmp(s, "wilson"))
		*out = STATS_CI_WILSON;
	else if (!strcmp(s, "exact"))
		*out = STATS_CI_EXACT;
	else
		return -1;
	return 0;
}

const char *stats_ci_method_name(enum stats_ci_method m)
{
	return m == STATS_CI_EXACT ? "exact" : "wilson";
}

struct beta_root {
	double p, a, b;
};

/* I_x(a, b) − p, or NaN when GSL reports an error (an underflow is a value of 0, not an error). */
static double beta_root_fn(double x, void *vp)
{
	const struct beta_root *br = vp;
	gsl_sf_result r;
	int st = gsl_sf_beta_inc_e(br->a, br->b, x, &r);
	if (st == GSL_EUNDRFLW)
		r.val = 0.0;
	else if (st != GSL_SUCCESS)
		return NAN;
	return r.val - br->p;
}

/* Bracketing fallback for beta_pinv: Brent's method on the regularized incomplete beta over
 * [0, 1], where it rises from 0 to 1, to a relative width of 1e-14. Returns 0 or -1. */
static int beta_pinv_bracket(double p, double a, double b, double *x)
{
	struct beta_root br = {p, a, b};
	gsl_function f = {beta_root_fn, &br};
	gsl_root_fsolver *s = gsl_root_fsolver_alloc(gsl_root_fsolver_brent);
	int rc = gsl_root_fsolver_set(s, &f, 0.0, 1.0), status = GSL_CONTINUE;
	for (int it = 0; rc == GSL_SUCCESS && status == GSL_CONTINUE && it < 500; it++) {
		if (gsl_root_fsolver_iterate(s) != GSL_SUCCESS)
			break;
		status = gsl_root_test_interval(gsl_root_fsolver_x_lower(s),
						gsl_root_fsolver_x_upper(s), 1e-300, 1e-14);
	}
	double root = gsl_root_fsolver_root(s);
	gsl_root_fsolver_free(s);
	if (status != GSL_SUCCESS || !(root >= 0 && root <= 1))
		return -1;
	*x = root;
	return 0;
}

/* The P quantile of Beta(A, B) into *X. GSL's inverse first; it gives up ("failed to converge")
 * for some ordinary arguments, for example P = 0.025, A = 2, B = 259, so an answer that is not a
 * finite number in [0, 1] goes to the bracketing solver, which cannot fail on a continuous
 * function with a sign change. GSL's error handler is off here whatever the caller set.
 * Returns 0 or -1. */
static int beta_pinv(double p, double a, double b, double *x)
{
	gsl_error_handler_t *old = gsl_set_error_handler_off();
	double g = gsl_cdf_beta_Pinv(p, a, b);
	int rc = 0;
	if (isfinite(g) && g >= 0 && g <= 1)
		*x = g;
	else
		rc = beta_pinv_bracket(p, a, b, x);
	gsl_set_error_handler(old);
	return rc;
}

int stats_ci(enum stats_ci_method method, unsigned long k, unsigned long n, double conf,
	     double *lower, double *upper)
{
	if (n == 0 || k > n || !(conf > 0 && conf < 1))
		return -1;
	double a = 1.0 - conf;
	double p = (double)k / (double)n, nn = (double)n;
	if (method == STATS_CI_WILSON) {
		double z = gsl_cdf_ugaussian_Qinv(a / 2);
		double z2 = z * z;
		double centre = (p + z2 / (2 * nn)) / (1 + z2 / nn);
		double half = z / (1 + z2 / nn) * sqrt(p * (1 - p) / nn + z2 / (4 * nn * nn));
		*lower = k == 0 ? 0.0 : fmax(0.0, centre - half);
		*upper = k == n ? 1.0 : fmin(1.0, centre + half);
	} else {
		/* Clopper–Pearson: Beta(a/2; k, n−k+1) and Beta(1−a/2; k+1, n−k). The upper quantile is
		 * taken from the mirrored distribution (Q(x; a, b) = P(1 − x; b, a)), so both ends go
		 * through the one checked inverse below. */
		double lo = 0.0, up = 0.0;
		if (k > 0 && beta_pinv(a / 2, (double)k, (double)(n - k + 1), &lo) < 0)
			return -1;
		if (k < n && beta_pinv(a / 2, (double)(n - k), (double)(k + 1), &up) < 0)
			return -1;
		*lower = lo;
		*upper = 1.0 - up;
	}
	return 0;
}

struct pc_params {
	double d;
	int m;
};

static double pc_integrand(double x, void *vp)
{
	const struct pc_params *pp = vp;
	double phi = gsl_ran_ugaussian_pdf(x - pp->d);
	if (phi == 0.0)
		return 0.0;
	return phi * pow(gsl_cdf_ugaussian_P(x), pp->m - 1);
}

double stats_pc_mafc(double d, int m)
{
	if (m < 2 || !isfinite(d))
		return NAN;
	gsl_error_handler_t *old = gsl_set_error_handler_off();
	gsl_integration_workspace *w = gsl_integration_workspace_alloc(256);
	struct pc_params pp = {d, m};
	gsl_function f = {pc_integrand, &pp};
	double r = NAN, err;
	/* Centred on d′, where the mass of φ(x − d′) lies, so QAGI sees the peak near 0. */
	int rc = gsl_integration_qagi(&f, 1e-13, 1e-11, 256, w, &r, &err);
	(void)rc;
	gsl_integration_workspace_free(w);
	gsl_set_error_handler(old);
	/* A roundoff warning still leaves an estimate within tolerance; only NaN means failure. */
	return isfinite(r) ? fmin(1.0, fmax(0.0, r)) : NAN;
}

struct root_params {
	double pc;
	int m;
};

static double root_fn(double d, void *vp)
{
	const struct root_params *rp = vp;
	return stats_pc_mafc(d, rp->m) - rp->pc;
}

int stats_dprime_mafc(double pc, int m, double *d)
{
	if (m < 2 || !(pc > 0 && pc < 1))
		return -1;
	struct root_params rp = {pc, m};
	gsl_function f = {root_fn, &rp};
	double lo = -2.0, hi = 2.0;
	/* Pc rises monotonically from 0 to 1 with d′: widen the bracket until it holds the answer. */
	for (int i = 0; i < 40 && root_fn(lo, &rp) > 0; i++)
		lo -= 2.0;
	for (int i = 0; i < 40 && root_fn(hi, &rp) < 0; i++)
		hi += 2.0;
	double flo = root_fn(lo, &rp), fhi = root_fn(hi, &rp);
	if (!(flo <= 0 && fhi >= 0))
		return -1;
	if (flo == 0) {
		*d = lo;
		return 0;
	}
	if (fhi == 0) {
		*d = hi;
		return 0;
	}
	gsl_error_handler_t *old = gsl_set_error_handler_off();
	gsl_root_fsolver *s = gsl_root_fsolver_alloc(gsl_root_fsolver_brent);
	int rc = gsl_root_fsolver_set(s, &f, lo, hi), status = GSL_CONTINUE;
	for (int it = 0; rc == GSL_SUCCESS && status == GSL_CONTINUE && it < 200; it++) {
		if (gsl_root_fsolver_iterate(s) != GSL_SUCCESS)
			break;
		status = gsl_root_test_interval(gsl_root_fsolver_x_lower(s),
						gsl_root_fsolver_x_upper(s), 1e-10, 0);
	}
	double root = gsl_root_fsolver_root(s);
	gsl_root_fsolver_free(s);
	gsl_set_error_handler(old);
	if (status != GSL_SUCCESS || !isfinite(root))
		return -1;
	*d = root;
	return 0;
}

double stats_pc_corrected(unsigned long k, unsigned long n, bool *corrected)
{
	double nn = (double)n;
	bool c = false;
	double p = (double)k / nn;
	if (k == 0) {
		p = 1.0 / (2 * nn);
		c = true;
	} else if (k == n) {
		p = 1.0 - 1.0 / (2 * nn);
		c = true;
	}
	if (corrected)
		*corrected = c;
	return p;
}

double stats_quantile_sorted(const double *sorted, size_t n, double p)
{
	if (n == 0)
		return NAN;
	/* GSL's quantile is R's type 7: (n − 1)·p with linear interpolation. */
	return gsl_stats_quantile_from_sorted_data(sorted, 1, n, p);
}

double stats_median(double *v, size_t n)
{
	if (n == 0)
		return NAN;
	gsl_sort(v, 1, n);
	return gsl_stats_median_from_sorted_data(v, 1, n);
}

void stats_rt_summary(double *rt, size_t n, struct stats_rt *out)
{
	memset(out, 0, sizeof *out);
	out->n = n;
	if (n == 0) {
		out->median = out->q25 = out->q75 = out->iqr = out->trimmed = NAN;
		return;
	}
	gsl_sort(rt, 1, n);
	out->median = gsl_stats_median_from_sorted_data(rt, 1, n);
	out->q25 = stats_quantile_sorted(rt, n, 0.25);
	out->q75 = stats_quantile_sorted(rt, n, 0.75);
	out->iqr = out->q75 - out->q25;
	/* GSL cuts ⌊0.1·n⌋ values from each end, as the header promises. */
	out->trimmed = gsl_stats_trmean_from_sorted_data(0.1, rt, 1, n);
}
