/* test_fit — maximum-likelihood psychometric fits and the parametric bootstrap: recovery of known
 * parameters from seeded simulations, grouped and trial input agreeing, honest failures, seeded
 * determinism and bootstrap coverage. Agreement with R glm (psyphy mafc.probit) and with a scipy
 * likelihood maximisation is checked at test time in tests/e2e/fit_ref.sh. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdlib.h>
#include <string.h>
#include <cmocka.h>

#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>

#include "fit.h"

/* Draws N_EACH trials per level from F into PTS. */
static void simulate(const struct psyfn *f, const double *levels, size_t nl, unsigned n_each,
		     unsigned long seed, struct fit_point *pts)
{
	gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
	gsl_rng_set(r, seed);
	for (size_t i = 0; i < nl; i++)
		pts[i] = (struct fit_point){levels[i], n_each,
					    gsl_ran_binomial(r, psyfn_eval(f, levels[i]), n_each)};
	gsl_rng_free(r);
}

/* With many trials the ML estimate lands near the generating parameters (consistency of ML). */
static void fit_testRecoversKnownParameters(void **state)
{
	(void)state;
	static const double lv[] = {0.2, 0.4, 0.6, 0.8, 1.0, 1.2, 1.4, 1.6};
	for (int s = PSYFN_WEIBULL; s <= PSYFN_NORMAL; s++) {
		struct psyfn truth = {(enum psyfn_shape)s, 0.8, s == PSYFN_WEIBULL ? 3.0 : 0.2,
				      0.25, 0.02};
		struct fit_point pts[8];
		simulate(&truth, lv, 8, 4000, 11 + (unsigned long)s, pts);
		struct fit_opts o;
		fit_opts_default(&o, 4);
		o.shape = truth.shape;
		o.nboot = 0;
		struct fit_result r;
		assert_int_equal(fit_run(pts, 8, &o, &r), 0);
		assert_int_equal(r.status, FIT_OK);
		assert_float_equal(r.f.alpha, truth.alpha, 0.03);
		assert_float_equal(r.f.beta, truth.beta, truth.beta * 0.15);
		assert_float_equal(r.f.lambda, truth.lambda, 0.015);
		assert_true(r.threshold_ok);
		assert_float_equal(r.threshold, psyfn_inverse(&truth, o.pc_threshold), 0.03);
		assert_int_equal(r.dof, 8 - 3);
		assert_true(r.deviance >= 0 && r.deviance < 40);
	}
}

/* Falling data (accuracy against a perturbation budget): the logistic and normal fit them with
 * β < 0, found from the data; the Weibull refuses. */
static void fit_testFallingData(void **state)
{
	(void)state;
	static const double lv[] = {0, 4, 8, 12, 16, 20, 24};
	for (int s = PSYFN_LOGISTIC; s <= PSYFN_NORMAL; s++) {
		struct psyfn truth = {(enum psyfn_shape)s, 11.0, -2.5, 0.25, 0.0};
		struct fit_point pts[7];
		simulate(&truth, lv, 7, 3000, 5 + (unsigned long)s, pts);
		struct fit_opts o;
		fit_opts_default(&o, 4);
		o.shape = truth.shape;
		o.lapse_free = false;
		o.nboot = 0;
		struct fit_result r;
		assert_int_equal(fit_run(pts, 7, &o, &r), 0);
		assert_float_equal(r.f.alpha, 11.0, 0.3);
		assert_float_equal(r.f.beta, -2.5, 0.3);
		assert_float_equal(r.threshold, psyfn_inverse(&truth, o.pc_threshold), 0.3);
		o.direction = 1;   /* forced rising: a worse fit, but no crash and no NaN */
		fit_run(pts, 7, &o, &r);
		assert_null(strstr(r.reason, "nan"));
		o.direction = 0;
		o.shape = PSYFN_WEIBULL;
		assert_int_equal(fit_run(pts, 7, &o, &r), -1);
		assert_non_null(strstr(r.reason, "falls as the level rises"));
	}
}

/* Steep falling data from a demo session (6AFC, levels 0/8/16/32: 36/36, 36/36, 24/36, 9/36):
 * the ML slope runs to a step, but level 16 is caught mid-fall (Wilson interval above chance and
 * below 1), so the fit is reported with β on the steepness bound — the 10–90% fall spans the
 * smallest level spacing, 8: |β| = 8/(2·ln 9) for the logistic (algebra, see fit.c). A jump with
 * no level caught in between is still refused. */
static void fit_testSteepSlopeBounded(void **state)
{
	(void)state;
	struct fit_point pts[] = {{0, 36, 36}, {8, 36, 36}, {16, 36, 24}, {32, 36, 9}};
	struct fit_opts o;
	fit_opts_default(&o, 6);
	o.shape = PSYFN_LOGISTIC;
	o.nboot = 200;
	struct fit_result r;
	assert_int_equal(fit_run(pts, 4, &o, &r), 0);
	assert_true(r.slope_bounded);
	assert_float_equal(r.f.beta, -8 / (2 * log(9.0)), 1e-9);
	assert_true(r.threshold_ok && r.threshold > 8 && r.threshold < 32);
	assert_true(r.has_ci);
	assert_true(r.threshold_ci[0] < r.threshold && r.threshold < r.threshold_ci[1]);
	/* Data that constrain the slope do not touch the bound (see fit_testFallingData). */
	struct fit_point step[] = {{1, 40, 20}, {2, 40, 21}, {3, 40, 40}, {4, 40, 40}};
	o.m = 2;
	assert_int_equal(fit_run(step, 4, &o, &r), -1);
	assert_non_null(strstr(r.reason, "slope cannot be estimated"));
	/* Weibull: the bound is on the exponent, in ln level spacing (ln 2 here):
	 * β ≤ (ln(−ln 0.1) − ln(−ln 0.9))/ln 2. */
	struct fit_point rise[] = {{1, 40, 7}, {2, 40, 7}, {4, 40, 26}, {8, 40, 40}};
	o.m = 6;
	o.shape = PSYFN_WEIBULL;
	o.nboot = 0;
	assert_int_equal(fit_run(rise, 4, &o, &r), 0);
	assert_true(r.f.beta <= (log(-log(0.1)) - log(-log(0.9))) / log(2.0) + 1e-9);
}

/* Trial rows grouped by fit_group give the same fit as the counts. */
static void fit_testGroupedEqualsTrials(void **state)
{
	(void)state;
	double lv[60];
	int cor[60];
	for (int i = 0; i < 60; i++) {
		lv[i] = 1 + i % 4;
		cor[i] = (i * 7 % 10) < 5 + (i % 4);   /* 50%, 60%, 70%, 80% by level */
	}
	size_t np;
	struct fit_point *pts = fit_group(lv, cor, 60, &np);
	assert_int_equal(np, 4);
	unsigned long tot = 0;
	for (size_t i = 0; i < np; i++) {
		assert_float_equal(pts[i].level, (double)(i + 1), 0);
		tot += pts[i].n;
	}
	assert_int_equal(tot, 60);
	struct fit_opts o;
	fit_opts_default(&o, 2);
	o.shape = PSYFN_LOGISTIC;
	o.nboot = 0;
	struct fit_result a, b;
	assert_int_equal(fit_run(pts, np, &o, &a), 0);
	/* The same points split in two rows each: merged by the fit. */
	struct fit_point split[8];
	for (size_t i = 0; i < np; i++) {
		split[2 * i] = (struct fit_point){pts[i].level, pts[i].n / 2, 0};
		split[2 * i + 1] = (struct fit_point){pts[i].level, pts[i].n - pts[i].n / 2, pts[i].k};
	}
	assert_int_equal(fit_run(split, 8, &o, &b), 0);
	assert_float_equal(a.f.alpha, b.f.alpha, 1e-6);
	assert_float_equal(a.f.beta, b.f.beta, 1e-6);
	assert_float_equal(a.deviance, b.deviance, 1e-6);
	free(pts);
}

/* Two levels and two free parameters would reproduce the data exactly (deviance 0 on 0 degrees of
 * freedom): no more points than free parameters is no fit, and the reason says so. With the lapse
 * free, three levels are not enough either. */
static void fit_testNoMorePointsThanParameters(void **state)
{
	(void)state;
	struct fit_point pts[] = {{1.0, 50, 30}, {2.0, 50, 45}, {3.0, 50, 48}};
	struct fit_opts o;
	fit_opts_default(&o, 2);
	o.shape = PSYFN_NORMAL;
	o.lapse_free = false;
	o.lapse = 0;
	o.nboot = 0;
	struct fit_result r;
	assert_int_equal(fit_run(pts, 2, &o, &r), -1);
	assert_int_equal(r.status, FIT_UNSUPPORTED);
	assert_non_null(strstr(r.reason, "2 levels cannot support a fit of 2 free parameters"));
	assert_true(isnan(r.deviance));
	assert_int_equal(fit_run(pts, 3, &o, &r), 0);
	assert_int_equal(r.dof, 1);
	o.lapse_free = true;
	assert_int_equal(fit_run(pts, 3, &o, &r), -1);
	assert_non_null(strstr(r.reason, "3 levels cannot support a fit of 3 free parameters"));
}

static void expect_unsupported(const struct fit_point *p, size_t n, enum psyfn_shape s, int m,
			       const char *word)
{
	struct fit_opts o;
	fit_opts_default(&o, m);
	o.shape = s;
	o.nboot = 50;
	struct fit_result r;
	assert_int_equal(fit_run(p, n, &o, &r), -1);
	assert_int_not_equal(r.status, FIT_OK);
	if (!strstr(r.reason, word))
		print_message("# reason: %s\n", r.reason);
	assert_non_null(strstr(r.reason, word));
	assert_null(strstr(r.reason, "nan"));
	assert_int_equal(r.nboot, 0);
}

/* Data that cannot support a fit say why instead of giving numbers. */
static void fit_testUnsupportedData(void **state)
{
	(void)state;
	struct fit_point one[] = {{0.5, 20, 14}, {0.5, 20, 12}};
	expect_unsupported(one, 2, PSYFN_LOGISTIC, 2, "one level");
	struct fit_point step[] = {{1, 40, 20}, {2, 40, 21}, {3, 40, 40}, {4, 40, 40}};
	expect_unsupported(step, 4, PSYFN_LOGISTIC, 2, "slope cannot be estimated");
	struct fit_point flat[] = {{1, 40, 10}, {2, 40, 10}, {3, 40, 10}, {4, 40, 10}};
	expect_unsupported(flat, 4, PSYFN_NORMAL, 4, "does not change");
	struct fit_point neg[] = {{-1, 40, 20}, {1, 40, 30}, {2, 40, 38}};
	expect_unsupported(neg, 3, PSYFN_WEIBULL, 2, "levels of 0 or more");
	expect_unsupported(NULL, 0, PSYFN_LOGISTIC, 2, "no trials");
	struct fit_point ok[] = {{1, 40, 20}, {2, 40, 30}, {3, 40, 38}};
	expect_unsupported(ok, 3, PSYFN_LOGISTIC, 1, "m must be");
	/* One trial per level: the ML search may run off (a step or a far position); whichever way,
	 * no numbers come back unless the fit is usable. */
	struct fit_point single[] = {{1, 1, 0}, {2, 1, 1}, {3, 1, 1}};
	struct fit_opts o;
	fit_opts_default(&o, 2);
	o.shape = PSYFN_LOGISTIC;
	o.nboot = 0;
	struct fit_result r;
	if (fit_run(single, 3, &o, &r) < 0)
		assert_true(strlen(r.reason) > 10);
	else
		assert_true(isfinite(r.f.alpha) && isfinite(r.f.beta));
}

/* The bootstrap is reproducible from its seed and independent of the number of threads. */
static void fit_testBootstrapSeeded(void **state)
{
	(void)state;
	struct fit_point pts[] = {{0.5, 40, 22}, {1, 40, 25}, {1.5, 40, 30},
				  {2, 40, 35}, {2.5, 40, 38}, {3, 40, 39}};
	struct fit_opts o;
	fit_opts_default(&o, 2);
	o.nboot = 200;
	o.seed = 99;
	struct fit_result a, b, c;
	assert_int_equal(fit_run(pts, 6, &o, &a), 0);
	o.threads = 2;
	assert_int_equal(fit_run(pts, 6, &o, &b), 0);
	assert_true(a.has_ci && b.has_ci);
	assert_float_equal(a.threshold_ci[0], b.threshold_ci[0], 0);
	assert_float_equal(a.threshold_ci[1], b.threshold_ci[1], 0);
	assert_true(a.threshold_ci[0] < a.threshold && a.threshold < a.threshold_ci[1]);
	o.seed = 100;
	assert_int_equal(fit_run(pts, 6, &o, &c), 0);
	assert_true(c.threshold_ci[0] != a.threshold_ci[0]);
}

/* On data simulated from known parameters, 95% bootstrap intervals for the threshold cover the
 * truth at about the nominal rate. 400 seeded data sets: the share should be near 0.95 (binomial
 * SD about 0.011); we accept 0.91–0.985, which a badly under- or over-covering method fails. */
static void fit_testBootstrapCoverage(void **state)
{
	(void)state;
	static const double lv[] = {0.4, 0.6, 0.8, 1.0, 1.2, 1.4};
	struct psyfn truth = {PSYFN_LOGISTIC, 0.9, 0.15, 0.5, 0.0};
	struct fit_opts o;
	fit_opts_default(&o, 2);
	o.shape = PSYFN_LOGISTIC;
	o.lapse_free = false;
	o.lapse = 0;
	o.nboot = 200;
	o.threads = 2;
	double thr = psyfn_inverse(&truth, o.pc_threshold);
	int covered = 0, fitted = 0;
	for (int rep = 0; rep < 400; rep++) {
		struct fit_point pts[6];
		simulate(&truth, lv, 6, 50, 1000 + (unsigned long)rep, pts);
		o.seed = (uint64_t)rep;
		struct fit_result r;
		if (fit_run(pts, 6, &o, &r) < 0 || !r.has_ci)
			continue;
		fitted++;
		covered += r.threshold_ci[0] <= thr && thr <= r.threshold_ci[1];
	}
	print_message("# coverage %d of %d\n", covered, fitted);
	assert_true(fitted >= 390);
	double share = (double)covered / fitted;
	assert_true(share >= 0.91 && share <= 0.985);
}

static void fit_testLapseParse(void **state)
{
	(void)state;
	struct fit_opts o;
	fit_opts_default(&o, 2);
	assert_int_equal(fit_lapse_parse("0", &o), 0);
	assert_false(o.lapse_free);
	assert_float_equal(o.lapse, 0, 0);
	assert_int_equal(fit_lapse_parse("0.02", &o), 0);
	assert_float_equal(o.lapse, 0.02, 0);
	assert_int_equal(fit_lapse_parse("free", &o), 0);
	assert_true(o.lapse_free);
	assert_int_equal(fit_lapse_parse("-0.1", &o), -1);
	assert_int_equal(fit_lapse_parse("abc", &o), -1);
	assert_float_equal(o.pc_threshold, 0.75, 1e-15);   /* halfway from 1/2 to 1 */
	fit_opts_default(&o, 4);
	assert_float_equal(o.pc_threshold, 0.625, 1e-15);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(fit_testRecoversKnownParameters),
		cmocka_unit_test(fit_testFallingData),
		cmocka_unit_test(fit_testSteepSlopeBounded),
		cmocka_unit_test(fit_testGroupedEqualsTrials),
		cmocka_unit_test(fit_testNoMorePointsThanParameters),
		cmocka_unit_test(fit_testUnsupportedData),
		cmocka_unit_test(fit_testBootstrapSeeded),
		cmocka_unit_test(fit_testBootstrapCoverage),
		cmocka_unit_test(fit_testLapseParse),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
