/* forecast — a study simulated many times before anyone runs it: for one design (levels, trials
 * per level, observers; or an adaptive block at a given trial count) the model observer answers
 * every trial, the real fitter (fit_run, with its parametric bootstrap) fits the pooled trials,
 * and the runs are summarised: how wide the threshold's interval is, how biased the estimate,
 * how often the fit fails or sits on its slope bound, how often the interval covers the true
 * threshold, and whether the levels bracket the psychometric function at all.
 *
 * Runs are spread over a fixed pool of POSIX threads; run i draws only from generators seeded
 * from (seed, i), so the result does not depend on the number of threads. Every design of a grid
 * uses the same run seeds (common random numbers), which makes designs easier to compare.
 * Observers are identical copies of the model (no spread between people), so the study's
 * estimate is the fit to the observers' trials pooled, as `report` pools subjects.
 * Pure computation (GSL, pthreads); nothing prints. Callers: app/cmd/cmd_forecast.c and the
 * console's forecast view. */
#ifndef TACHIST_FORECAST_H
#define TACHIST_FORECAST_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "adapt.h"
#include "fit.h"
#include "observer.h"

struct forecast_design {
	/* Constant stimuli: every level gets TRIALS_PER_LEVEL trials per observer. */
	const double *levels;
	size_t nlevels;
	int trials_per_level;
	int observers;             /* >= 1 */
	/* Adaptive (ADAPTIVE non-NULL): the block's own rule over ITEMS (stim = index into ITEMS),
	 * each staircase stopped after max(1, ADAPTIVE_TRIALS / staircases) trials per observer. */
	const struct adapt_spec *adaptive;
	const struct adapt_item *items;
	size_t nitems;
	int adaptive_trials;
};

struct forecast_opts {
	struct observer_spec truth;   /* the simulated observer (its seed is not used) */
	int m;                        /* choices */
	struct fit_opts fit;          /* how every run is fitted (threads is ignored: 1 per run) */
	int runs;                     /* simulated studies, >= 1 */
	uint64_t seed;
	int threads;                  /* worker threads, >= 1 */
};

/* Called after each finished run (from a worker, one call at a time) with the number of runs
 * done so far and the total; returns nothing. */
typedef void (*forecast_progress_fn)(int done, int total, void *ctx);

enum forecast_bracket {
	FORECAST_BRACKETS,     /* the 25–75% range of the curve's span lies within the levels */
	FORECAST_PARTLY,       /* part of it lies outside */
	FORECAST_OUTSIDE,      /* all of it lies outside */
};

struct forecast_result {
	int runs;
	int failed;                /* no fit, no reachable threshold, or (bootstrap asked) no interval */
	int slope_bounded;         /* fitted, with β on the steepness bound */
	int with_ci;               /* runs with a threshold interval */
	int covered;               /* intervals that contain the true threshold */
	double true_threshold;     /* the model's level at fit.pc_threshold */
	double width_median, width_lo, width_hi;         /* interval width, level units: median, 5%, 95% */
	double logw_median, logw_lo, logw_hi;            /* log10(upper / lower); NaN when levels <= 0 */
	double est_mean, est_sd;   /* threshold estimates of the fitted runs */
	double bias, bias_se;      /* est_mean − true_threshold and its Monte Carlo error */
	double coverage, coverage_se;
	double width_median_se;    /* Monte Carlo error of width_median (order-statistic interval) */
	enum forecast_bracket bracket;
	double x25, x75;           /* the model's levels at 25% and 75% of its span */
	int trials_per_observer;   /* trials each simulated observer answered (mean for adaptive) */
	double *widths;            /* per run, NaN when the run has no interval; owned */
	double *estimates;         /* per run, NaN when the run has no threshold; owned */
};

/* The model's level at proportion correct PC (a rising or, for a negative slope, falling curve);
 * NaN when PC is outside its range. */
double forecast_truth_level(const struct observer_spec *s, int m, double pc);
/* Whether the levels LEVELS[0..N-1] bracket the 25–75% range [X25, X75] (in either order). */
enum forecast_bracket forecast_bracketing(const double *levels, size_t n, double x25, double x75);
/* "brackets" | "partly" | "outside". */
const char *forecast_bracket_name(enum forecast_bracket b);

/* The observer a pilot implies: N answered trials (LEVELS[i], CORRECT[i] in {0, 1}) of an
 * M-choice task pooled and fitted as `report` fits them (Weibull where accuracy rises with the
 * level, logistic where it falls, lapse free, no bootstrap) into OUT (rt 600 ms, seed 1). Returns
 * 0, or -1 with the fitter's reason in WHY. */
int forecast_truth_from_trials(const double *levels, const int *correct, size_t n, int m,
			       struct observer_spec *out, char *why, size_t len);

/* Simulates O->runs studies of design D and summarises them into R (release with
 * forecast_result_clear). PROGRESS may be NULL. Returns 0, or -1 with a sentence in ERR when the
 * design cannot run (no levels, an adaptive spec that does not fit its items). */
int forecast_run(const struct forecast_opts *o, const struct forecast_design *d,
		 struct forecast_result *r, forecast_progress_fn progress, void *ctx, char *err,
		 size_t errlen);
void forecast_result_clear(struct forecast_result *r);

/* The seed of run I of a forecast seeded with SEED (splitmix64 of both). */
uint64_t forecast_run_seed(uint64_t seed, uint64_t i);

#endif
