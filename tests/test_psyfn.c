/* test_psyfn — psychometric function shapes, guess/lapse form and inverse. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <cmocka.h>

#include "psyfn.h"

/* Weibull at x = α: F = 1 − e^−1 (definition of the Weibull CDF). */
static void psyfn_testWeibullAtAlpha(void **state)
{
	(void)state;
	double f = psyfn_core(PSYFN_WEIBULL, 2.0, 2.0, 3.5);
	assert_float_equal(f, 1.0 - exp(-1.0), 1e-12);
	assert_float_equal(psyfn_core(PSYFN_WEIBULL, 0.0, 2.0, 3.5), 0.0, 0.0);
}

/* Logistic and normal are 0.5 at α (symmetry of both CDFs). Φ(1) = 0.841344746 (standard normal
 * table, Abramowitz & Stegun 26.2). */
static void psyfn_testSymmetricShapes(void **state)
{
	(void)state;
	assert_float_equal(psyfn_core(PSYFN_LOGISTIC, 1.5, 1.5, 0.2), 0.5, 1e-12);
	assert_float_equal(psyfn_core(PSYFN_NORMAL, 1.5, 1.5, 0.2), 0.5, 1e-12);
	assert_float_equal(psyfn_core(PSYFN_NORMAL, 1.7, 1.5, 0.2), 0.841344746, 1e-8);
}

/* The inverse undoes eval for every shape, inside (γ, 1 − λ); outside it is NaN. */
static void psyfn_testInverseRoundTrip(void **state)
{
	(void)state;
	for (int s = PSYFN_WEIBULL; s <= PSYFN_NORMAL; s++) {
		struct psyfn f = {(enum psyfn_shape)s, 0.8, 2.5, 0.25, 0.03};
		for (double pc = 0.3; pc < 0.96; pc += 0.05) {
			double x = psyfn_inverse(&f, pc);
			assert_true(isfinite(x));
			assert_float_equal(psyfn_eval(&f, x), pc, 1e-9);
		}
		assert_true(isnan(psyfn_inverse(&f, 0.2)));
		assert_true(isnan(psyfn_inverse(&f, 0.98)));
	}
}

static void psyfn_testShapeNames(void **state)
{
	(void)state;
	enum psyfn_shape s;
	assert_int_equal(psyfn_shape_parse("logistic", &s), 0);
	assert_int_equal(s, PSYFN_LOGISTIC);
	assert_string_equal(psyfn_shape_name(PSYFN_NORMAL), "normal");
	assert_int_equal(psyfn_shape_parse("gumbel", &s), -1);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(psyfn_testWeibullAtAlpha),
		cmocka_unit_test(psyfn_testSymmetricShapes),
		cmocka_unit_test(psyfn_testInverseRoundTrip),
		cmocka_unit_test(psyfn_testShapeNames),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
