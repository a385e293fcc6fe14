/* test_stats — binomial intervals, m-AFC d′ and reaction-time summaries against published and
 * closed-form values. Reference-library checks (statsmodels, R psyphy) run at test time in
 * tests/e2e/stats_ref.sh. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <cmocka.h>

#include <gsl/gsl_cdf.h>

#include "stats.h"

/* Newcombe RG (1998), "Two-sided confidence intervals for the single proportion: comparison of
 * seven methods", Stat Med 17:857–872, Table I, method 3 (Wilson score, no continuity
 * correction), to the 4 decimals printed there. The table values are recalled from memory; the
 * same cases are checked against statsmodels at test time in tests/e2e/stats_ref.sh. */
static void stats_testWilsonNewcombe(void **state)
{
	(void)state;
	static const struct { unsigned long k, n; double lo, hi; } ex[] = {
		{81, 263, 0.2553, 0.3662},
		{15, 148, 0.0624, 0.1605},
		{0, 20, 0.0000, 0.1611},
		{1, 29, 0.0061, 0.1718},
	};
	for (size_t i = 0; i < sizeof ex / sizeof ex[0]; i++) {
		double lo, hi;
		assert_int_equal(stats_ci(STATS_CI_WILSON, ex[i].k, ex[i].n, 0.95, &lo, &hi), 0);
		assert_float_equal(lo, ex[i].lo, 0.00005 + 1e-12);
		assert_float_equal(hi, ex[i].hi, 0.00005 + 1e-12);
	}
}

/* Clopper–Pearson at the edges has a closed form: for K = 0 the upper limit is
 * 1 − (α/2)^(1/N), for K = N the lower limit is (α/2)^(1/N) (Clopper & Pearson 1934; the beta
 * quantile Beta(1 − α/2; 1, N) solves 1 − (1 − p)^N = 1 − α/2). */
static void stats_testExactEdges(void **state)
{
	(void)state;
	double lo, hi;
	assert_int_equal(stats_ci(STATS_CI_EXACT, 0, 20, 0.95, &lo, &hi), 0);
	assert_float_equal(lo, 0.0, 0.0);
	assert_float_equal(hi, 1 - pow(0.025, 1.0 / 20), 1e-10);
	assert_int_equal(stats_ci(STATS_CI_EXACT, 29, 29, 0.95, &lo, &hi), 0);
	assert_float_equal(lo, pow(0.025, 1.0 / 29), 1e-10);
	assert_float_equal(hi, 1.0, 0.0);
	/* The exact interval contains the Wilson one at these counts (it is the conservative one;
	 * Newcombe 1998, Table I shows it wider in every example). */
	double wl, wh;
	stats_ci(STATS_CI_WILSON, 81, 263, 0.95, &wl, &wh);
	stats_ci(STATS_CI_EXACT, 81, 263, 0.95, &lo, &hi);
	assert_true(lo < wl && hi > wh);
}

/* Counts where GSL's beta inverse reports "failed to converge" (its default handler used to abort
 * the program): the interval still comes back, equal to statsmodels 0.13
 * proportion_confint(method="beta") as printed by /usr/bin/python3 at 17 digits. */
static void stats_testExactWhereGslGivesUp(void **state)
{
	(void)state;
	static const struct { unsigned long k, n; double conf, lo, hi; } ex[] = {
		{2, 260, 0.95, 0.0009329355060647013, 0.027509464774955895},
		{21, 749, 0.90, 0.01886285729166097, 0.040124764320327355},
	};
	for (size_t i = 0; i < sizeof ex / sizeof ex[0]; i++) {
		double lo = NAN, hi = NAN;
		assert_int_equal(stats_ci(STATS_CI_EXACT, ex[i].k, ex[i].n, ex[i].conf, &lo, &hi), 0);
		assert_float_equal(lo, ex[i].lo, 1e-12);
		assert_float_equal(hi, ex[i].hi, 1e-12);
	}
}

static void stats_testCiRejectsBadInput(void **state)
{
	(void)state;
	double lo = 7, hi = 7;
	assert_int_equal(stats_ci(STATS_CI_WILSON, 0, 0, 0.95, &lo, &hi), -1);
	assert_int_equal(stats_ci(STATS_CI_EXACT, 5, 4, 0.95, &lo, &hi), -1);
	assert_int_equal(stats_ci(STATS_CI_WILSON, 1, 4, 1.0, &lo, &hi), -1);
	assert_float_equal(lo, 7, 0);
	enum stats_ci_method m;
	assert_int_equal(stats_ci_method_parse("exact", &m), 0);
	assert_int_equal(m, STATS_CI_EXACT);
	assert_int_equal(stats_ci_method_parse("beta", &m), -1);
}

/* For m = 2 the integral has the closed form Pc = Φ(d′/√2) (Green & Swets 1966; Macmillan &
 * Creelman 2005, ch. 7). */
static void stats_testTwoAfcClosedForm(void **state)
{
	(void)state;
	for (double d = -1.0; d <= 4.0; d += 0.25) {
		double pc = gsl_cdf_ugaussian_P(d / sqrt(2.0));
		assert_float_equal(stats_pc_mafc(d, 2), pc, 1e-9);
		double back;
		assert_int_equal(stats_dprime_mafc(pc, 2, &back), 0);
		assert_float_equal(back, d, 1e-7);
	}
}

/* At d′ = 0 every alternative is equally likely: Pc = 1/m (symmetry of the integral,
 * ∫ φ Φ^(m−1) = [Φ^m / m] from −∞ to ∞). */
static void stats_testChanceAtZero(void **state)
{
	(void)state;
	for (int m = 2; m <= 12; m++) {
		assert_float_equal(stats_pc_mafc(0.0, m), 1.0 / m, 1e-10);
		double d;
		assert_int_equal(stats_dprime_mafc(1.0 / m, m, &d), 0);
		assert_float_equal(d, 0.0, 1e-7);
	}
	/* More alternatives need more sensitivity for the same Pc. */
	double d4, d9;
	assert_int_equal(stats_dprime_mafc(0.7, 4, &d4), 0);
	assert_int_equal(stats_dprime_mafc(0.7, 9, &d9), 0);
	assert_true(d9 > d4);
}

static void stats_testDprimeRejects(void **state)
{
	(void)state;
	double d = 42;
	assert_int_equal(stats_dprime_mafc(0.0, 4, &d), -1);
	assert_int_equal(stats_dprime_mafc(1.0, 4, &d), -1);
	assert_int_equal(stats_dprime_mafc(0.5, 1, &d), -1);
	assert_int_equal(stats_dprime_mafc(NAN, 2, &d), -1);
	assert_float_equal(d, 42, 0);
}

/* The 1/(2N) rule (Macmillan & Kaplan 1985): 0 of 20 -> 0.025, 20 of 20 -> 0.975. */
static void stats_testCorrection(void **state)
{
	(void)state;
	bool c;
	assert_float_equal(stats_pc_corrected(0, 20, &c), 0.025, 1e-15);
	assert_true(c);
	assert_float_equal(stats_pc_corrected(20, 20, &c), 0.975, 1e-15);
	assert_true(c);
	assert_float_equal(stats_pc_corrected(7, 20, &c), 0.35, 1e-15);
	assert_false(c);
}

/* Quartiles by R's default (type 7, Hyndman & Fan 1996 definition 7): for 1..10, the 25% point
 * is 1 + 0.25·9 = 3.25 and the 75% point 7.75; trimmed mean of 1..10 with 10% cut from each end
 * is mean(2..9) = 5.5; with 1000 added it is mean(2..10) = 6 (⌊0.1·11⌋ = 1 cut per end).
 * Computed by hand from the definitions. */
static void stats_testRtSummary(void **state)
{
	(void)state;
	double v[] = {7, 3, 10, 1, 5, 9, 2, 8, 6, 4};
	struct stats_rt s;
	stats_rt_summary(v, 10, &s);
	assert_int_equal(s.n, 10);
	assert_float_equal(s.median, 5.5, 1e-12);
	assert_float_equal(s.q25, 3.25, 1e-12);
	assert_float_equal(s.q75, 7.75, 1e-12);
	assert_float_equal(s.iqr, 4.5, 1e-12);
	assert_float_equal(s.trimmed, 5.5, 1e-12);
	double w[] = {1, 2, 3, 4, 5, 6, 7, 8, 9, 10, 1000};
	stats_rt_summary(w, 11, &s);
	assert_float_equal(s.median, 6, 1e-12);
	assert_float_equal(s.trimmed, 6.0, 1e-12);
	stats_rt_summary(NULL, 0, &s);
	assert_int_equal(s.n, 0);
	assert_true(isnan(s.median) && isnan(s.trimmed));
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(stats_testWilsonNewcombe),
		cmocka_unit_test(stats_testExactEdges),
		cmocka_unit_test(stats_testExactWhereGslGivesUp),
		cmocka_unit_test(stats_testCiRejectsBadInput),
		cmocka_unit_test(stats_testTwoAfcClosedForm),
		cmocka_unit_test(stats_testChanceAtZero),
		cmocka_unit_test(stats_testDprimeRejects),
		cmocka_unit_test(stats_testCorrection),
		cmocka_unit_test(stats_testRtSummary),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
