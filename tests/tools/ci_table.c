/* ci_table — exact (Clopper–Pearson) intervals from stats_ci in bulk, for comparisons with a
 * reference library in one process each.
 * usage: ci_table            reads lines "K N LEVEL" on stdin, prints "K N LEVEL LOWER UPPER"
 *        ci_table --all NMAX  every (K, N) with 1 <= N <= NMAX, 0 <= K <= N, at 90, 95 and 99%;
 *                             prints the number of pairs and of failures (exit 1 on any failure).
 * A failure is stats_ci returning an error or an interval that is not 0 <= lower <= k/n <= upper
 * <= 1. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "stats.h"

static int valid(unsigned long k, unsigned long n, double lo, double hi)
{
	double p = (double)k / (double)n;
	return isfinite(lo) && isfinite(hi) && lo >= 0 && lo <= p && p <= hi && hi <= 1;
}

int main(int argc, char **argv)
{
	if (argc == 3 && !strcmp(argv[1], "--all")) {
		unsigned long nmax = strtoul(argv[2], NULL, 10), pairs = 0, bad = 0;
		static const double levels[3] = {0.90, 0.95, 0.99};
		for (int l = 0; l < 3; l++)
			for (unsigned long n = 1; n <= nmax; n++)
				for (unsigned long k = 0; k <= n; k++) {
					double lo = NAN, hi = NAN;
					pairs++;
					if (stats_ci(STATS_CI_EXACT, k, n, levels[l], &lo, &hi) < 0 ||
					    !valid(k, n, lo, hi)) {
						if (bad < 20)
							printf("failed: k %lu n %lu level %g\n", k, n, levels[l]);
						bad++;
					}
				}
		printf("%lu intervals, %lu failed\n", pairs, bad);
		return bad ? 1 : 0;
	}
	if (argc != 1) {
		fprintf(stderr, "usage: ci_table [--all NMAX]\n");
		return 2;
	}
	unsigned long k, n;
	double level;
	while (scanf("%lu %lu %lf", &k, &n, &level) == 3) {
		double lo = NAN, hi = NAN;
		if (stats_ci(STATS_CI_EXACT, k, n, level, &lo, &hi) < 0)
			printf("%lu %lu %.17g error\n", k, n, level);
		else
			printf("%lu %lu %.17g %.17g %.17g\n", k, n, level, lo, hi);
	}
	return 0;
}
