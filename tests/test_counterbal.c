/* test_counterbal — balanced block orders and rotated key mappings (counterbal.h) against the
 * defining properties of Williams' design (E. J. Williams 1949, "Experimental designs balanced for
 * the estimation of residual effects of treatments", Aust. J. Sci. Res. A 2, 149-168): every item
 * once in every position of each row set, and every ordered pair of neighbours exactly once (even
 * n, n rows) or exactly twice (odd n, the square and its mirror, 2n rows). */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cmocka.h>

#include "counterbal.h"

#define MAXN 9

/* Checks the balance of the design over N items; PAIRS is how often each ordered pair of
 * different items must be neighbours (first, then second) over all rows. */
static void check_balanced(size_t n, size_t want_rows, int pairs)
{
	size_t rows = counterbal_rows(n);
	assert_int_equal(rows, want_rows);
	int pos[MAXN][MAXN] = {{0}}, follow[MAXN][MAXN] = {{0}};
	for (size_t r = 1; r <= rows; r++) {
		size_t out[MAXN];
		counterbal_williams(n, r, out);
		int seen[MAXN] = {0};
		for (size_t k = 0; k < n; k++) {
			assert_true(out[k] < n);
			seen[out[k]]++;
			pos[out[k]][k]++;
			if (k)
				follow[out[k - 1]][out[k]]++;
		}
		for (size_t i = 0; i < n; i++)
			assert_int_equal(seen[i], 1);   /* each row is a permutation */
	}
	for (size_t a = 0; a < n; a++)
		for (size_t b = 0; b < n; b++) {
			assert_int_equal(pos[a][b], (int)(rows / n));   /* each item in each position */
			if (a != b && follow[a][b] != pairs) {
				printf("# n=%zu: %zu follows %zu %d times, want %d\n", n, b, a, follow[a][b],
				       pairs);
				fail();
			}
		}
}

/* Four blocks (the case): 4 rows, each block once per position, every block followed by
 * every other exactly once. Also 2, 6 and 8. */
static void counterbal_testWilliamsEven(void **state)
{
	(void)state;
	for (size_t n = 2; n <= 8; n += 2)
		check_balanced(n, n, 1);
	/* The first row of the 4-block square, as the construction 0, 1, n-1, 2, ... gives it. */
	size_t out[4], want[4] = {0, 1, 3, 2};
	counterbal_williams(4, 1, out);
	assert_memory_equal(out, want, sizeof out);
	/* Position 5 wraps to the first row again. */
	size_t again[4];
	counterbal_williams(4, 5, again);
	assert_memory_equal(again, want, sizeof out);
}

/* Odd numbers need the mirror square: 2n rows, every ordered pair twice. */
static void counterbal_testWilliamsOdd(void **state)
{
	(void)state;
	check_balanced(3, 6, 2);
	check_balanced(5, 10, 2);
	check_balanced(7, 14, 2);
}

/* Over n subjects in a row the rotation puts every category on every key exactly once, and each
 * subject's mapping is a permutation of the keys (common practice, no source: a cyclic Latin
 * square). */
static void counterbal_testRotationCycle(void **state)
{
	(void)state;
	for (size_t n = 2; n <= MAXN; n++) {
		int on[MAXN][MAXN] = {{0}};
		for (size_t s = 1; s <= n; s++) {
			size_t out[MAXN];
			int used[MAXN] = {0};
			counterbal_rotation(n, s, out);
			for (size_t i = 0; i < n; i++) {
				on[i][out[i]]++;
				used[out[i]]++;
			}
			for (size_t k = 0; k < n; k++)
				assert_int_equal(used[k], 1);
		}
		for (size_t i = 0; i < n; i++)
			for (size_t k = 0; k < n; k++)
				assert_int_equal(on[i][k], 1);
	}
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(counterbal_testWilliamsEven),
		cmocka_unit_test(counterbal_testWilliamsOdd),
		cmocka_unit_test(counterbal_testRotationCycle),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
