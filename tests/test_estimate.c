/* test_estimate — the one estimator of trial, block and session length, and the plan's use of it:
 * worked examples by hand from the definitions in include/estimate.h. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <string.h>
#include <cmocka.h>

#include "estimate.h"

/* Worked by hand: 500 + 0 + 100 + 50 + 500 (ITI) = 1150 ms of epochs; feedback 500 ms counts only
 * when the block shows it; an unlimited response adds the assumed 600 ms RT, a 300 ms window its
 * own 300 ms. */
static void estimate_testTrial(void **state)
{
	(void)state;
	double ms[EPOCH_COUNT] = {0};
	ms[EPOCH_FIXATION] = 500;
	ms[EPOCH_STIMULUS] = 100;
	ms[EPOCH_MASK] = 50;
	ms[EPOCH_FEEDBACK] = 500;
	ms[EPOCH_ITI] = 500;
	assert_float_equal(estimate_trial_seconds(ms, false), 1.750, 1e-12);
	assert_float_equal(estimate_trial_seconds(ms, true), 2.250, 1e-12);
	ms[EPOCH_RESPONSE] = 300;
	assert_float_equal(estimate_trial_seconds(ms, false), 1.450, 1e-12);
	ms[EPOCH_RESPONSE] = 2000;   /* a long window ends at the answer: the assumed RT */
	assert_float_equal(estimate_trial_seconds(ms, false), 1.750, 1e-12);
}

/* Measured durations replace the planned one as soon as one trial has run. */
static void estimate_testMeasured(void **state)
{
	(void)state;
	assert_float_equal(estimate_per_trial(1.75, 0, 0), 1.75, 0);
	assert_float_equal(estimate_per_trial(1.75, 30.0, 20), 1.5, 1e-12);
	assert_float_equal(estimate_per_trial(1.75, NAN, 20), 1.75, 0);
	/* 144 trials of 1.5 s plus 120 flips at 60 Hz (2 s) */
	assert_float_equal(estimate_block_seconds(1.5, 144, 60), 218.0, 1e-9);
	assert_float_equal(estimate_block_seconds(1.5, 144, 0), 216.0, 1e-9);
}

static void estimate_testFormat(void **state)
{
	(void)state;
	char b[32];
	assert_string_equal(estimate_format(291.4, b, sizeof b), "4 min 51 s");
	assert_string_equal(estimate_format(38, b, sizeof b), "38 s");
	assert_string_equal(estimate_format(3720, b, sizeof b), "1 h 02 min");
	assert_string_equal(estimate_format(-1, b, sizeof b), "-");
	assert_string_equal(estimate_format(INFINITY, b, sizeof b), "-");
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(estimate_testTrial),
		cmocka_unit_test(estimate_testMeasured),
		cmocka_unit_test(estimate_testFormat),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
