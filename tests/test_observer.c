/* test_observer — the model observer: spec parsing, its psychometric function, and simulated
 * proportion correct per level against that function. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stdbool.h>
#include <stddef.h>
#include <stdio.h>
#include <string.h>
#include <cmocka.h>

#include <gsl/gsl_cdf.h>

#include "observer.h"

static void observer_testParse(void **state)
{
	(void)state;
	struct observer_spec s;
	char err[256];
	assert_int_equal(observer_parse("model:shape=logistic,threshold=0.3,slope=-0.05,lapse=0.01,"
					"rt=450,seed=9", &s, err, sizeof err), 0);
	assert_int_equal(s.shape, PSYFN_LOGISTIC);
	assert_float_equal(s.threshold, 0.3, 0);
	assert_float_equal(s.slope, -0.05, 0);
	assert_float_equal(s.lapse, 0.01, 0);
	assert_float_equal(s.rt_ms, 450, 0);
	assert_int_equal(s.seed, 9);
	char buf[200];
	observer_format(&s, buf, sizeof buf);
	struct observer_spec t;
	assert_int_equal(observer_parse(buf, &t, err, sizeof err), 0);
	assert_int_equal(s.shape, t.shape);
	assert_float_equal(s.threshold, t.threshold, 1e-12);
	assert_float_equal(s.slope, t.slope, 1e-12);
	assert_float_equal(s.lapse, t.lapse, 1e-12);
	assert_float_equal(s.rt_ms, t.rt_ms, 1e-12);
	assert_int_equal(s.seed, t.seed);
	assert_int_equal(observer_parse("model", &s, err, sizeof err), 0);   /* all defaults */
	assert_int_equal(observer_parse("model:shape=cubic", &s, err, sizeof err), -1);
	assert_non_null(strstr(err, "cubic"));
	assert_int_equal(observer_parse("model:lapse=0.7", &s, err, sizeof err), -1);
	assert_non_null(strstr(err, "lapse=0.7"));
	assert_int_equal(observer_parse("model:speed=3", &s, err, sizeof err), -1);
	assert_non_null(strstr(err, "unknown key 'speed'"));
	assert_int_equal(observer_parse("model:threshold", &s, err, sizeof err), -1);
	assert_int_equal(observer_parse("model:shape=weibull,threshold=-1", &s, err, sizeof err), -1);
	assert_int_equal(observer_parse("model:slope=0", &s, err, sizeof err), -1);
	/* pause=N (Escape every Nth trial, for tests) is kept in the spec text, and left out of it
	 * when off, so the specs stored before it are written as they were. */
	assert_int_equal(observer_parse("model:seed=2,pause=4", &s, err, sizeof err), 0);
	assert_int_equal(s.pause_at, 4);
	observer_format(&s, buf, sizeof buf);
	assert_non_null(strstr(buf, ",pause=4"));
	assert_int_equal(observer_parse(buf, &t, err, sizeof err), 0);
	assert_int_equal(t.pause_at, 4);
	assert_int_equal(observer_parse("model", &s, err, sizeof err), 0);
	assert_int_equal(s.pause_at, 0);
	observer_format(&s, buf, sizeof buf);
	assert_null(strstr(buf, "pause"));
	assert_int_equal(observer_parse("model:pause=0", &s, err, sizeof err), -1);
	assert_int_equal(observer_parse("model:pause=2.5", &s, err, sizeof err), -1);
}

/* P at the Weibull threshold is γ + (1 − γ − λ)(1 − e^−1) (the Weibull CDF at x = α); a negative
 * slope mirrors it; a trial without a level gets the upper asymptote 1 − λ. */
static void observer_testFunction(void **state)
{
	(void)state;
	struct observer_spec s = {PSYFN_WEIBULL, 0.2, 3.0, 0.04, 500, 1, 0};
	double g = 0.25;
	assert_float_equal(observer_pc(&s, 4, true, 0.2), g + (1 - g - 0.04) * (1 - exp(-1)), 1e-12);
	assert_float_equal(observer_pc(&s, 4, true, 0.0), g, 1e-12);
	assert_float_equal(observer_pc(&s, 4, false, 0), 1 - 0.04, 1e-12);
	s.slope = -3.0;
	assert_float_equal(observer_pc(&s, 4, true, 0.2), g + (1 - g - 0.04) * exp(-1), 1e-12);
	assert_float_equal(observer_pc(&s, 4, true, 0.0), 1 - 0.04, 1e-12);
}

/* The exact binomial interval of Clopper & Pearson (1934): the p at which P(X >= k) = a/2 (lower)
 * and P(X <= k) = a/2 (upper), found by bisection on GSL's binomial CDF. */
static double cp_bound(int k, int n, double a, bool upper)
{
	double lo = 0, hi = 1;
	for (int i = 0; i < 200; i++) {
		double p = (lo + hi) / 2;
		double tail = upper ? gsl_cdf_binomial_P((unsigned)k, p, (unsigned)n)
				    : (k == 0 ? 1.0 : gsl_cdf_binomial_Q((unsigned)(k - 1), p, (unsigned)n));
		/* lower bound: tail rises with p; upper bound: tail falls with p */
		if ((tail < a / 2) == !upper)
			lo = p;
		else
			hi = p;
	}
	return (lo + hi) / 2;
}

/* Simulated proportion correct at each level lies inside the 99% Clopper–Pearson interval
 * (Clopper & Pearson 1934, exact binomial interval, cp_bound above)
 * around the observed count; wrong answers spread evenly over the other categories; RTs have the
 * spec's mean. Seeded, so the outcome is fixed; 5 levels × 4000 trials. */
static void observer_testProportionCorrect(void **state)
{
	(void)state;
	struct observer_spec s;
	char err[200];
	assert_int_equal(observer_parse("model:shape=normal,threshold=0.5,slope=0.2,lapse=0.03,rt=600,"
					"seed=2024", &s, err, sizeof err), 0);
	struct observer *o = observer_new(&s);
	const double levels[] = {0.1, 0.35, 0.5, 0.65, 1.0};
	const int n = 4000, m = 6;
	double rtsum = 0;
	for (size_t li = 0; li < 5; li++) {
		int k = 0, wrong[6] = {0};
		for (int i = 0; i < n; i++) {
			struct observer_answer a;
			int truth = i % m;
			observer_answer(o, m, truth, true, levels[li], &a);
			assert_int_equal(a.correct, a.choice == truth);
			assert_true(a.rt_ms >= 100);
			rtsum += a.rt_ms;
			if (a.correct)
				k++;
			else if (truth == 0)
				wrong[a.choice]++;
		}
		double p = observer_pc(&s, m, true, levels[li]);
		double lo = k == 0 ? 0 : cp_bound(k, n, 0.01, false);
		double hi = k == n ? 1 : cp_bound(k, n, 0.01, true);
		printf("# level %.2f: pc %.4f, observed %d/%d, 99%% CI [%.4f, %.4f]\n", levels[li], p, k,
		       n, lo, hi);
		assert_true(p >= lo && p <= hi);
		assert_int_equal(wrong[0], 0);
	}
	/* Mean of the ex-Gaussian is μ + τ = 600 ms; the floor at 100 ms is 5 SD below μ = 450, so it
	 * barely moves the mean. 20000 draws, SD ≈ 164 ms: the mean is within ±5 ms (> 4 SE). */
	assert_float_equal(rtsum / (5.0 * n), 600.0, 5.0);
	observer_destroy(o);
	observer_destroy(NULL);
}

/* The same seed gives the same answers. */
static void observer_testSeeded(void **state)
{
	(void)state;
	struct observer_spec s = {PSYFN_LOGISTIC, 0.5, 0.1, 0.02, 700, 77, 0};
	struct observer *a = observer_new(&s), *b = observer_new(&s);
	for (int i = 0; i < 200; i++) {
		struct observer_answer x, y;
		observer_answer(a, 3, i % 3, true, 0.4, &x);
		observer_answer(b, 3, i % 3, true, 0.4, &y);
		assert_int_equal(x.choice, y.choice);
		assert_float_equal(x.rt_ms, y.rt_ms, 0);
	}
	observer_destroy(a);
	observer_destroy(b);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(observer_testParse),
		cmocka_unit_test(observer_testFunction),
		cmocka_unit_test(observer_testProportionCorrect),
		cmocka_unit_test(observer_testSeeded),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
