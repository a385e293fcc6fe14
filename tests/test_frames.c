/* test_frames — ms to whole frames (and the tie rule), refresh measurement, lost frames. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <cmocka.h>

#include "frames.h"

/* 200 ms at 60 Hz is 12 frames exactly (200·60/1000, arithmetic). */
static void frames_testSixtyHz(void **state)
{
	(void)state;
	double a;
	assert_int_equal(frames_from_ms(200, 60, &a), 12);
	assert_float_equal(a, 200.0, 1e-9);
	assert_true(frames_exact(200, 60));
}

/* 100 ms at 144 Hz: 14.4 frames -> 14 frames = 97.2 ms (the worked value). */
static void frames_testOneFortyFour(void **state)
{
	(void)state;
	double a;
	assert_int_equal(frames_from_ms(100, 144, &a), 14);
	assert_float_equal(a, 97.2, 0.05);
	assert_false(frames_exact(100, 144));
}

/* 100 ms at 85 Hz is exactly 8.5 frames: the documented rule (round half to even, docs/timing.md)
 * gives 8 frames = 94.1 ms; 9.5 frames goes to 10. */
static void frames_testTieHalfEven(void **state)
{
	(void)state;
	double a;
	assert_int_equal(frames_from_ms(100, 85, &a), 8);
	assert_float_equal(a, 8000.0 / 85.0, 1e-9);
	assert_int_equal(frames_from_ms(9.5 * 1000.0 / 85.0, 85, NULL), 10);
	assert_int_equal(frames_from_ms(0, 60, &a), 0);
	assert_int_equal(frames_from_ms(1, 60, &a), 1);   /* positive never rounds to 0 */
}

/* Intervals of 10 ms with one doubled: median 10, rate 100 Hz, one drop; lost frames 1. */
static void frames_testMeasure(void **state)
{
	(void)state;
	int64_t t[12];
	int64_t now = 1000;
	for (int i = 0; i < 12; i++) {
		t[i] = now;
		now += (i == 5) ? 20000000 : 10000000;
	}
	struct frames_measure m;
	assert_int_equal(frames_measure(t, 12, 100.0, &m), 0);
	assert_int_equal(m.nintervals, 11);
	assert_float_equal(m.median_ms, 10.0, 1e-9);
	assert_float_equal(m.rate_hz, 100.0, 1e-9);
	assert_float_equal(m.max_ms, 20.0, 1e-9);
	assert_float_equal(m.mad_ms, 0.0, 1e-9);
	assert_int_equal(m.dropped, 1);
	assert_int_equal(frames_measure(t, 1, 100.0, &m), -1);
	assert_int_equal(frames_lost(20000000, 10000000), 1);
	assert_int_equal(frames_lost(15000000, 10000000), 0);
	assert_int_equal(frames_lost(31000000, 10000000), 2);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(frames_testSixtyHz),
		cmocka_unit_test(frames_testOneFortyFour),
		cmocka_unit_test(frames_testTieHalfEven),
		cmocka_unit_test(frames_testMeasure),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
