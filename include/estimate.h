/* estimate — the one estimator of how long trials, blocks and sessions take. `check`, the
 * console's set-up form, its blocks screen and the live screen all ask it, so every screen gives
 * the same figure for the same plan.
 *
 * Before anything has run the estimate is planned: every epoch at its whole-frame duration (the
 * feedback only in blocks that show it), the response as an assumed reaction time (or the
 * response window when that is shorter), and the flips that measure the refresh before each
 * block. Once trials have run, their measured mean duration replaces the planned one. Pure
 * computation (app/core). */
#ifndef TACHIST_ESTIMATE_H
#define TACHIST_ESTIMATE_H

#include <stdbool.h>
#include <stddef.h>

#include "epoch.h"

/* Reaction time assumed when the response window is unlimited or longer (common practice, no
 * source: typical choice RTs for brief images are 400-800 ms). */
#define ESTIMATE_ASSUMED_RT_MS 600.0
/* Flips the run layer spends measuring the refresh before each block (run_measure_refresh). */
#define ESTIMATE_MEASURE_FLIPS 120

/* Planned seconds of one trial from the epochs' actual durations in ms (EPOCH_RESPONSE: the
 * window, 0 = unlimited). FEEDBACK says whether the block shows feedback. */
double estimate_trial_seconds(const double epoch_actual_ms[EPOCH_COUNT], bool feedback);

/* Seconds per trial to plan with: the measured mean (MEASURED_S over MEASURED_TRIALS) once at
 * least one trial has run, else PLANNED_S. */
double estimate_per_trial(double planned_s, double measured_s, size_t measured_trials);

/* Seconds of a block of NTRIALS trials of PER_TRIAL_S each, with the refresh measurement before
 * it at REFRESH_HZ (<= 0: not counted). */
double estimate_block_seconds(double per_trial_s, size_t ntrials, double refresh_hz);

/* "4 min 51 s", "1 h 02 min", "38 s" into BUF (LEN bytes); "-" for a negative or non-finite
 * value. Returns BUF. */
char *estimate_format(double seconds, char *buf, size_t len);

#endif
