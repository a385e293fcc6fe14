/* frames — durations as whole refresh frames, and frame-interval quality checks.
 *
 * Rounding rule: a duration becomes the nearest whole number of frames; an exact tie (k + 0.5
 * frames, within 1e-9) rounds to the even count, like IEEE round-half-even, so the rule is
 * symmetric and documented. Durations above 0 never round to 0 frames. */
#ifndef TACHIST_FRAMES_H
#define TACHIST_FRAMES_H

#include <stddef.h>
#include <stdint.h>

/* Whole frames for MS at HZ; *ACTUAL_MS (may be NULL) gets frames·1000/HZ. */
int frames_from_ms(double ms, double hz, double *actual_ms);
/* True when MS is a whole number of frames at HZ (within 0.01 ms). */
int frames_exact(double ms, double hz);

/* Refresh measured from flip times. */
struct frames_measure {
	size_t nintervals;
	double median_ms, mad_ms, min_ms, max_ms, mean_ms, sd_ms;
	double rate_hz;            /* 1000 / median */
	size_t dropped;            /* intervals over 1.5 nominal periods */
};
/* Measures N flip timestamps (ns, monotonic). NOMINAL_HZ defines the drop threshold (1.5 periods,
 * common practice, no source). Returns 0, or -1 when fewer than 2 flips. */
int frames_measure(const int64_t *flips_ns, size_t n, double nominal_hz, struct frames_measure *m);
/* Frames lost in one interval of DT_NS at PERIOD_NS: 0 when dt <= 1.5 periods, else
 * round(dt/period) - 1. */
int frames_lost(int64_t dt_ns, int64_t period_ns);

#endif
