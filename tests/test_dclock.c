/* test_dclock — the virtual display clock: exact periods, seeded drop injection and its log,
 * bounded jitter. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <time.h>
#include <cmocka.h>

#include "dclock.h"

/* Without injection every interval is exactly one period (1e9/60 rounded to whole ns). */
static void dclock_testExactPeriods(void **state)
{
	(void)state;
	struct dclock_virtual_opts o = {.hz = 60, .seed = 1, .origin_ns = 1000};
	struct dclock *c = dclock_virtual_new(NULL, &o);
	assert_non_null(c);
	assert_int_equal(c->period_ns, 16666667);
	int64_t prev = 1000;
	for (int i = 0; i < 1000; i++) {
		int64_t t = dclock_flip(c);
		assert_int_equal(t - prev, 16666667);
		assert_int_equal(dclock_now(c), t);
		prev = t;
	}
	size_t n;
	dclock_injected(c, &n);
	assert_int_equal(n, 0);
	dclock_destroy(c);
}

/* Injected drops: each logged flip comes two periods after the previous one, every other flip one
 * period; the count is near the rate; the same seed gives the same flips. */
static void dclock_testInjectedDropsLogged(void **state)
{
	(void)state;
	struct dclock_virtual_opts o = {.hz = 100, .drop_rate = 0.05, .seed = 42, .origin_ns = 1};
	struct dclock *a = dclock_virtual_new(NULL, &o), *b = dclock_virtual_new(NULL, &o);
	int64_t prev = 1;
	size_t late = 0;
	int64_t *times = test_malloc(4000 * sizeof *times);
	for (int i = 0; i < 4000; i++) {
		int64_t t = dclock_flip(a);
		assert_int_equal(dclock_flip(b), t);
		times[i] = t - prev;
		late += t - prev == 20000000;
		prev = t;
	}
	size_t n;
	const uint64_t *inj = dclock_injected(a, &n);
	assert_int_equal(n, late);
	for (size_t k = 0; k < n; k++)
		assert_int_equal(times[inj[k] - 1], 20000000);
	/* 4000 flips at 5%: mean 200, SD 13.8; 150..250 is beyond 3.6 SD (binomial arithmetic). */
	assert_in_range(n, 150, 250);
	test_free(times);
	dclock_destroy(a);
	dclock_destroy(b);
}

/* Jitter moves stamps but never reorders them and stays within 0.4 period of the grid. */
static void dclock_testJitterBounded(void **state)
{
	(void)state;
	struct dclock_virtual_opts o = {.hz = 60, .jitter_ms = 3, .seed = 7, .origin_ns = 5};
	struct dclock *c = dclock_virtual_new(NULL, &o);
	int64_t prev = 5;
	bool moved = false;
	for (int i = 1; i <= 2000; i++) {
		int64_t t = dclock_flip(c);
		int64_t grid = 5 + (int64_t)i * c->period_ns;
		assert_true(t > prev);
		assert_true(t - grid <= (int64_t)(0.4 * (double)c->period_ns) + 1);
		assert_true(grid - t <= (int64_t)(0.4 * (double)c->period_ns) + 1);
		moved |= t != grid;
		prev = t;
	}
	assert_true(moved);
	dclock_destroy(c);
	struct dclock_virtual_opts bad = {.hz = 0};
	assert_null(dclock_virtual_new(NULL, &bad));
	dclock_destroy(NULL);
}

/* Pacing keeps virtual time at or ahead of real time elapsed. */
static void dclock_testPacing(void **state)
{
	(void)state;
	struct dclock_virtual_opts o = {.hz = 200, .pace = true, .seed = 1};
	struct dclock *c = dclock_virtual_new(NULL, &o);
	int64_t r0 = dclock_monotonic_ns();
	for (int i = 0; i < 20; i++)
		dclock_flip(c);
	int64_t real = dclock_monotonic_ns() - r0;
	assert_true(real >= 20 * c->period_ns - 1000000);
	dclock_destroy(c);
}

/* A paced clock after an idle gap: the flips that follow are paced again, so ten flips at
 * 100 Hz take at least 80 ms of real time (sleeping only adds time, so this lower bound cannot be
 * met by an unpaced burst; the slack of two periods covers the re-based first flip). */
static void dclock_testPacingAfterGap(void **state)
{
	(void)state;
	struct dclock_virtual_opts o = {.hz = 100, .seed = 1, .pace = true};
	struct dclock *c = dclock_virtual_new(NULL, &o);
	for (int i = 0; i < 3; i++)
		dclock_flip(c);
	struct timespec gap = {0, 200000000};   /* 200 ms without flips, as between blocks */
	nanosleep(&gap, NULL);
	int64_t t0 = dclock_monotonic_ns();
	int64_t s0 = dclock_flip(c);
	for (int i = 0; i < 9; i++)
		dclock_flip(c);
	int64_t elapsed = dclock_monotonic_ns() - t0;
	assert_true(elapsed >= 80000000);
	/* The stamps stay on the exact grid: pacing never changes them. */
	assert_int_equal(dclock_now(c) >= s0 + 9 * c->period_ns, 1);
	dclock_destroy(c);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(dclock_testExactPeriods),
		cmocka_unit_test(dclock_testInjectedDropsLogged),
		cmocka_unit_test(dclock_testJitterBounded),
		cmocka_unit_test(dclock_testPacing),
		cmocka_unit_test(dclock_testPacingAfterGap),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
