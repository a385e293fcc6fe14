/* test_forecast — simulated studies: the model's true threshold and span, interval width against
 * trials, bias, bracketing, bootstrap coverage, seeded determinism whatever the thread count, and
 * an adaptive block through its own rule. Run counts are small and seeded; every tolerance is
 * derived from the Monte Carlo error the forecast itself reports. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdlib.h>
#include <string.h>
#include <cmocka.h>

#include "forecast.h"

/* 2AFC Weibull, α = 1, β = 3.5, λ = 0.02: threshold at pc 0.75 ≈ 0.916, 25–75% of the span at
 * ≈ 0.700 and ≈ 1.098 (Weibull formula, see below). */
static const double levels5[] = {0.5, 0.75, 1.0, 1.25, 1.5};

static void opts_for(struct forecast_opts *o, int runs, int nboot, uint64_t seed)
{
	memset(o, 0, sizeof *o);
	o->truth = (struct observer_spec){PSYFN_WEIBULL, 1.0, 3.5, 0.02, 600, 1, 0};
	o->m = 2;
	fit_opts_default(&o->fit, 2);
	o->fit.shape = PSYFN_WEIBULL;
	o->fit.lapse_free = false;   /* the model's lapse, known: keeps the runs quick and stable */
	o->fit.lapse = 0.02;
	o->fit.nboot = nboot;
	o->runs = runs;
	o->seed = seed;
	o->threads = 2;
}

static struct forecast_design constant(const double *lv, size_t n, int per_level, int observers)
{
	return (struct forecast_design){.levels = lv, .nlevels = n, .trials_per_level = per_level,
					.observers = observers};
}

/* The Weibull's inverse in closed form, F(x) = 1 − exp(−(x/α)^β) ⇒ x = α(−ln(1 − F))^(1/β)
 * (Wichmann & Hill 2001, eq. for the Weibull), and the logistic mirrored for a falling curve,
 * F(x) = 1/(1 + e^(−(x − α)/β)) ⇒ x = α + β·ln(F/(1 − F)), applied to 1 − F. */
static void forecast_testTruthLevel(void **state)
{
	(void)state;
	struct observer_spec w = {PSYFN_WEIBULL, 1.0, 3.5, 0.02, 600, 1, 0};
	double F = (0.75 - 0.5) / (1 - 0.5 - 0.02);
	assert_float_equal(forecast_truth_level(&w, 2, 0.75), pow(-log(1 - F), 1 / 3.5), 1e-9);
	struct observer_spec l = {PSYFN_LOGISTIC, 16, -4, 0.0, 600, 1, 0};   /* falling, m = 4 */
	double g = 0.25, pc = g + 0.3 * (1 - g);
	double Fm = 1 - 0.3;
	assert_float_equal(forecast_truth_level(&l, 4, pc), 16 + 4 * log(Fm / (1 - Fm)), 1e-9);
	/* What the model observer answers at that level is PC again. */
	assert_float_equal(observer_pc(&l, 4, true, forecast_truth_level(&l, 4, pc)), pc, 1e-9);
	assert_true(isnan(forecast_truth_level(&w, 2, 0.99)));   /* above 1 − λ: never reached */
}

/* Bracketing is a comparison of ranges (definition in forecast.h). */
static void forecast_testBracketing(void **state)
{
	(void)state;
	assert_int_equal(forecast_bracketing(levels5, 5, 0.70, 1.10), FORECAST_BRACKETS);
	assert_int_equal(forecast_bracketing(levels5, 5, 1.10, 0.70), FORECAST_BRACKETS);
	assert_int_equal(forecast_bracketing(levels5, 5, 0.30, 0.80), FORECAST_PARTLY);
	assert_int_equal(forecast_bracketing(levels5, 5, 1.60, 2.00), FORECAST_OUTSIDE);
	assert_int_equal(forecast_bracketing(levels5, 5, NAN, 1.0), FORECAST_OUTSIDE);
	assert_string_equal(forecast_bracket_name(FORECAST_PARTLY), "partly");
}

/* Large-sample theory of maximum likelihood: the standard error scales as 1/√n, so 4× the trials
 * halves the interval width. Checked within 10% (the tolerance); the Monte Carlo error of
 * the ratio (from the order-statistic errors of both medians) is printed and must be well under
 * that tolerance for the check to mean anything. */
static void forecast_testWidthScalesAsRootN(void **state)
{
	(void)state;
	struct forecast_opts o;
	opts_for(&o, 200, 100, 7);
	struct forecast_design d1 = constant(levels5, 5, 40, 1), d4 = constant(levels5, 5, 160, 1);
	struct forecast_result r1, r4;
	char err[256];
	assert_int_equal(forecast_run(&o, &d1, &r1, NULL, NULL, err, sizeof err), 0);
	assert_int_equal(forecast_run(&o, &d4, &r4, NULL, NULL, err, sizeof err), 0);
	double ratio = r1.width_median / r4.width_median;
	double se = ratio * hypot(r1.width_median_se / r1.width_median,
				  r4.width_median_se / r4.width_median);
	print_message("# width 40/level %.4f (se %.4f), 160/level %.4f (se %.4f), ratio %.3f "
		      "(se %.3f; 2 expected)\n", r1.width_median, r1.width_median_se,
		      r4.width_median, r4.width_median_se, ratio, se);
	assert_true(se < 0.1);   /* 10% of the ratio (0.2) is at least two Monte Carlo errors */
	assert_true(fabs(ratio / 2 - 1) < 0.10);
	assert_true(r1.failed <= 10 && r4.failed <= 10);
	assert_int_equal(r4.trials_per_observer, 5 * 160);
	forecast_result_clear(&r1);
	forecast_result_clear(&r4);
}

/* Consistency of ML: on a well-bracketed design with many trials per run the mean estimate
 * differs from the truth by no more than its Monte Carlo error allows (|bias| < 3 SE; the O(1/n)
 * bias of ML is far smaller here). No bootstrap needed. */
static void forecast_testBiasWithinMonteCarloError(void **state)
{
	(void)state;
	struct forecast_opts o;
	opts_for(&o, 200, 0, 11);
	struct forecast_design d = constant(levels5, 5, 100, 4);
	struct forecast_result r;
	char err[256];
	assert_int_equal(forecast_run(&o, &d, &r, NULL, NULL, err, sizeof err), 0);
	print_message("# truth %.4f mean %.4f bias %.5f se %.5f\n", r.true_threshold, r.est_mean,
		      r.bias, r.bias_se);
	assert_int_equal(r.failed, 0);
	assert_true(r.bias_se > 0 && r.bias_se < 0.01);
	assert_true(fabs(r.bias) < 3 * r.bias_se);
	assert_int_equal(r.bracket, FORECAST_BRACKETS);
	forecast_result_clear(&r);
}

/* Every level far below the threshold: the design is flagged (and its fits mostly fail or run
 * off, which the failure share shows). */
static void forecast_testFlagsLevelsBelow(void **state)
{
	(void)state;
	static const double low[] = {0.1, 0.15, 0.2, 0.25};
	struct forecast_opts o;
	opts_for(&o, 20, 0, 3);
	struct forecast_design d = constant(low, 4, 40, 1);
	struct forecast_result r;
	char err[256];
	assert_int_equal(forecast_run(&o, &d, &r, NULL, NULL, err, sizeof err), 0);
	assert_int_equal(r.bracket, FORECAST_OUTSIDE);
	assert_true(r.x25 > 0.25);
	forecast_result_clear(&r);
}

/* The percentile bootstrap's known behaviour (Wichmann & Hill 2001b): near-nominal coverage on a
 * well-bracketed design. 95% nominal must land in 0.90–0.99; with 200 runs the binomial SE of the
 * share is about 0.015, so the band is about ±3 SE around 0.95. */
static void forecast_testCoverage(void **state)
{
	(void)state;
	struct forecast_opts o;
	opts_for(&o, 200, 200, 5);
	struct forecast_design d = constant(levels5, 5, 60, 1);
	struct forecast_result r;
	char err[256];
	assert_int_equal(forecast_run(&o, &d, &r, NULL, NULL, err, sizeof err), 0);
	print_message("# coverage %d of %d = %.3f (se %.3f), failed %d\n", r.covered, r.with_ci,
		      r.coverage, r.coverage_se, r.failed);
	assert_true(r.with_ci >= 190);
	assert_true(r.coverage >= 0.90 && r.coverage <= 0.99);
	forecast_result_clear(&r);
}

static void same(const struct forecast_result *a, const struct forecast_result *b)
{
	assert_int_equal(a->runs, b->runs);
	assert_int_equal(a->failed, b->failed);
	assert_int_equal(a->covered, b->covered);
	assert_memory_equal(a->widths, b->widths, (size_t)a->runs * sizeof *a->widths);
	assert_memory_equal(a->estimates, b->estimates, (size_t)a->runs * sizeof *a->estimates);
	assert_memory_equal(&a->width_median, &b->width_median, sizeof a->width_median);
	assert_memory_equal(&a->bias, &b->bias, sizeof a->bias);
}

/* The same seed gives the same forecast; 1, 2 and 3 threads give identical numbers; another seed
 * gives other runs. */
static void forecast_testSeededAnyThreads(void **state)
{
	(void)state;
	struct forecast_opts o;
	opts_for(&o, 12, 20, 99);
	struct forecast_design d = constant(levels5, 5, 30, 2);
	struct forecast_result r1, r2, r3, rs;
	char err[256];
	o.threads = 1;
	assert_int_equal(forecast_run(&o, &d, &r1, NULL, NULL, err, sizeof err), 0);
	o.threads = 2;
	assert_int_equal(forecast_run(&o, &d, &r2, NULL, NULL, err, sizeof err), 0);
	o.threads = 3;
	assert_int_equal(forecast_run(&o, &d, &r3, NULL, NULL, err, sizeof err), 0);
	same(&r1, &r2);
	same(&r1, &r3);
	o.seed = 100;
	assert_int_equal(forecast_run(&o, &d, &rs, NULL, NULL, err, sizeof err), 0);
	assert_true(memcmp(r1.estimates, rs.estimates, 12 * sizeof *rs.estimates) != 0);
	forecast_result_clear(&r1);
	forecast_result_clear(&r2);
	forecast_result_clear(&r3);
	forecast_result_clear(&rs);
}

static int progress_calls, progress_last;
static void count_progress(int done, int total, void *ctx)
{
	(void)ctx;
	assert_true(done >= 1 && done <= total);
	progress_calls++;
	progress_last = done;
}

/* An adaptive block runs with its own rule (1-up-2-down, Levitt 1971, on a log axis) at the
 * trial count asked for, and its estimate lands near the truth; progress counts every run. */
static void forecast_testAdaptive(void **state)
{
	(void)state;
	struct adapt_item items[2 * 13];
	for (int i = 0; i < 13; i++)
		for (int c = 0; c < 2; c++)
			items[2 * i + c] = (struct adapt_item){2 * i + c, c, 0.4 * pow(10, 0.05 * i)};
	double start = 1.5;
	struct adapt_spec sp;
	memset(&sp, 0, sizeof sp);
	sp.name = "stair";
	adapt_params_default(&sp.base);
	sp.base.step_down = sp.base.step_up = 0.05;
	sp.base.max_trials = 10;
	sp.starts = &start;
	sp.nstarts = 1;
	struct forecast_opts o;
	opts_for(&o, 40, 0, 21);
	struct forecast_design d = {.adaptive = &sp, .items = items, .nitems = 26,
				    .adaptive_trials = 120, .observers = 3};
	struct forecast_result r;
	char err[256];
	progress_calls = 0;
	assert_int_equal(forecast_run(&o, &d, &r, count_progress, NULL, err, sizeof err), 0);
	assert_int_equal(progress_calls, 40);
	assert_int_equal(progress_last, 40);
	assert_int_equal(r.trials_per_observer, 120);
	print_message("# adaptive: truth %.3f mean %.3f sd %.3f failed %d\n", r.true_threshold,
		      r.est_mean, r.est_sd, r.failed);
	assert_true(r.failed <= 4);
	assert_true(fabs(r.bias) < 4 * r.bias_se + 0.05);
	forecast_result_clear(&r);
	/* A design that cannot run says so. */
	struct forecast_design none = constant(levels5, 0, 10, 1);
	assert_int_equal(forecast_run(&o, &none, &r, NULL, NULL, err, sizeof err), -1);
	assert_non_null(strstr(err, "level"));
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(forecast_testTruthLevel),
		cmocka_unit_test(forecast_testBracketing),
		cmocka_unit_test(forecast_testWidthScalesAsRootN),
		cmocka_unit_test(forecast_testBiasWithinMonteCarloError),
		cmocka_unit_test(forecast_testFlagsLevelsBelow),
		cmocka_unit_test(forecast_testCoverage),
		cmocka_unit_test(forecast_testSeededAnyThreads),
		cmocka_unit_test(forecast_testAdaptive),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
