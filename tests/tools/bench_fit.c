/* bench_fit — times fit_run in-process: the cumulative normal with λ = 0 (the model R's glm fits
 * with psyphy's mafc.probit link) on a grouped CSV, REPS times, and prints the mean seconds per
 * fit; then one fit with 1,000 bootstrap samples.
 * usage: bench_fit FILE.csv M REPS */
#include <stdio.h>
#include <stdlib.h>
#include <time.h>

#include "diag.h"
#include "fit.h"
#include "fitcsv.h"

static double now(void)
{
	struct timespec t;
	clock_gettime(CLOCK_MONOTONIC, &t);
	return (double)t.tv_sec + (double)t.tv_nsec / 1e9;
}

int main(int argc, char **argv)
{
	if (argc != 4) {
		fprintf(stderr, "usage: bench_fit FILE.csv M REPS\n");
		return 2;
	}
	int m = atoi(argv[2]), reps = atoi(argv[3]);
	struct diag_list d;
	diag_init(&d);
	struct fit_point *pts;
	size_t n;
	enum fitcsv_kind kind;
	if (fitcsv_read(argv[1], &pts, &n, &kind, &d) < 0) {
		fprintf(stderr, "bench_fit: cannot read %s\n", argv[1]);
		return 1;
	}
	diag_clear(&d);
	struct fit_opts o;
	fit_opts_default(&o, m);
	o.shape = PSYFN_NORMAL;
	o.lapse_free = false;
	o.lapse = 0;
	o.nboot = 0;
	struct fit_result r;
	double t0 = now();
	for (int i = 0; i < reps; i++)
		fit_run(pts, n, &o, &r);
	double per = (now() - t0) / reps;
	printf("%.9f %.10f %.10f\n", per, r.f.alpha, r.f.beta);
	o.nboot = 1000;
	o.threads = 2;
	t0 = now();
	fit_run(pts, n, &o, &r);
	printf("%.6f\n", now() - t0);
	free(pts);
	return 0;
}
