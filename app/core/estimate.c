/* estimate — planned and measured durations of trials, blocks and sessions (see estimate.h).
 * Callers: plan.c (each block's and the session's planned length), the run layer (the live
 * screen's remaining time), `check` and the console's set-up and blocks screens. */
#include "estimate.h"

#include <math.h>
#include <stdio.h>

double estimate_trial_seconds(const double epoch_actual_ms[EPOCH_COUNT], bool feedback)
{
	double ms = 0;
	for (int e = 0; e < EPOCH_COUNT; e++) {
		if (e == EPOCH_RESPONSE || (e == EPOCH_FEEDBACK && !feedback))
			continue;
		ms += epoch_actual_ms[e];
	}
	double resp = epoch_actual_ms[EPOCH_RESPONSE];
	ms += resp > 0 && resp < ESTIMATE_ASSUMED_RT_MS ? resp : ESTIMATE_ASSUMED_RT_MS;
	return ms / 1000.0;
}

double estimate_per_trial(double planned_s, double measured_s, size_t measured_trials)
{
	if (measured_trials > 0 && measured_s > 0 && isfinite(measured_s))
		return measured_s / (double)measured_trials;
	return planned_s;
}

double estimate_block_seconds(double per_trial_s, size_t ntrials, double refresh_hz)
{
	double s = per_trial_s * (double)ntrials;
	if (refresh_hz > 0)
		s += ESTIMATE_MEASURE_FLIPS / refresh_hz;
	return s;
}

char *estimate_format(double seconds, char *buf, size_t len)
{
	if (!(seconds >= 0) || !isfinite(seconds)) {
		snprintf(buf, len, "-");
		return buf;
	}
	long t = lround(seconds);
	if (t >= 3600)
		snprintf(buf, len, "%ld h %02ld min", t / 3600, t / 60 % 60);
	else if (t >= 60)
		snprintf(buf, len, "%ld min %02ld s", t / 60, t % 60);
	else
		snprintf(buf, len, "%ld s", t);
	return buf;
}
