/* frames — durations in whole refresh frames, and the quality of measured frame intervals.
 *
 * frames_from_ms rounds ms·hz/1000 to the nearest integer; an exact tie (k + 0.5 within 1e-9 of a
 * frame) goes to the even count (round-half-even), and any positive duration is at least one frame.
 * frames_measure summarises flip timestamps (median, MAD, spread) with GSL's statistics. Called by
 * the plan, `check`, `calc frames` and the presenter's refresh measurement. */
#include "frames.h"

#include <math.h>
#include <stdlib.h>

#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>

#include "diag.h"

int frames_from_ms(double ms, double hz, double *actual_ms)
{
	int n = 0;
	if (ms > 0 && hz > 0 && isfinite(ms) && isfinite(hz)) {
		double f = ms * hz / 1000.0;
		double lo = floor(f);
		double frac = f - lo;
		if (fabs(frac - 0.5) < 1e-9)
			n = fmod(lo, 2.0) == 0.0 ? (int)lo : (int)lo + 1;
		else
			n = (int)lround(f);
		if (n < 1)
			n = 1;
	}
	if (actual_ms)
		*actual_ms = hz > 0 ? n * 1000.0 / hz : 0.0;
	return n;
}

int frames_exact(double ms, double hz)
{
	double actual;
	frames_from_ms(ms, hz, &actual);
	return fabs(actual - ms) < 0.01;
}

int frames_measure(const int64_t *flips_ns, size_t n, double nominal_hz, struct frames_measure *m)
{
	if (n < 2)
		return -1;
	size_t k = n - 1;
	double *dt = xmalloc(k * sizeof *dt);
	double *dev = xmalloc(k * sizeof *dev);
	double period_ms = nominal_hz > 0 ? 1000.0 / nominal_hz : 0;
	m->nintervals = k;
	m->dropped = 0;
	for (size_t i = 0; i < k; i++) {
		dt[i] = (double)(flips_ns[i + 1] - flips_ns[i]) / 1e6;
		if (period_ms > 0 && dt[i] > 1.5 * period_ms)
			m->dropped++;
	}
	m->mean_ms = gsl_stats_mean(dt, 1, k);
	m->sd_ms = k > 1 ? gsl_stats_sd_m(dt, 1, k, m->mean_ms) : 0.0;
	gsl_sort(dt, 1, k);
	m->min_ms = dt[0];
	m->max_ms = dt[k - 1];
	m->median_ms = gsl_stats_median_from_sorted_data(dt, 1, k);
	for (size_t i = 0; i < k; i++)
		dev[i] = fabs(dt[i] - m->median_ms);
	gsl_sort(dev, 1, k);
	m->mad_ms = gsl_stats_median_from_sorted_data(dev, 1, k);
	m->rate_hz = m->median_ms > 0 ? 1000.0 / m->median_ms : 0.0;
	free(dt);
	free(dev);
	return 0;
}

int frames_lost(int64_t dt_ns, int64_t period_ns)
{
	if (period_ns <= 0 || 2 * dt_ns <= 3 * period_ns)
		return 0;
	return (int)llround((double)dt_ns / (double)period_ns) - 1;
}
