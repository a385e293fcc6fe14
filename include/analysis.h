/* analysis — the tables behind `tachist report`: accuracy with intervals per condition, d′,
 * reaction times, psychometric fits, confusion matrices, item analysis and timing quality.
 *
 * Works on an in-memory array of trial rows the caller builds (from the store or anything else),
 * so it does not depend on the database. The result borrows every string from the rows and
 * sessions it was given: keep them alive until analysis_destroy. Pure computation; nothing prints.
 * Callers: app/cmd/cmd_report.c, the console's results screen. */
#ifndef TACHIST_ANALYSIS_H
#define TACHIST_ANALYSIS_H

#include <stdbool.h>
#include <stddef.h>

#include "fit.h"
#include "stats.h"

/* One trial. */
struct analysis_row {
	const char *session;    /* session ID */
	const char *subject;
	int block;              /* block index */
	const char *block_name; /* may be NULL */
	bool practice;          /* practice trials are counted but left out of every table */
	const char *group;      /* the chosen label columns as one text ("" when none) */
	const char *image;
	const char *category;   /* true category */
	const char *response;   /* chosen category, NULL when no response */
	bool has_level;
	double level;
	int correct;            /* 1, 0, or -1 when no response */
	bool timed_out;
	bool anticipation;      /* a key came before the response could count */
	bool has_rt;
	double rt_ms;
	int frames_planned, frames_actual, dropped_frames;
	bool timing_ok;
};

/* One session, for the timing summary. FRAME_MS (may be NULL) holds intervals between
 * consecutive flips in ms, for the frame-interval histogram. */
struct analysis_session {
	const char *id;
	const char *subject;
	const char *timing_mode;   /* "vsync" | "simulated" */
	double refresh_hz;         /* measured; 0 = not measured */
	const double *frame_ms;
	size_t nframe_ms;
};

struct analysis_opts {
	int m;                        /* number of choices (for chance, d′ and γ) */
	enum stats_ci_method ci;
	double conf;                  /* 0.95 */
	bool fit;                     /* fit psychometric functions over levels */
	struct fit_opts fit_opts;     /* m must match */
	bool shape_auto;              /* Weibull where proportion correct rises with the level,
					 logistic where it falls (fit_opts.shape is then ignored) */
	double ceiling, floor_margin; /* item flags: pc ≥ ceiling; pc ≤ 1/m + floor_margin, each
				       only when the item's Wilson 95% interval lies wholly
				       above (ceiling) or below (floor) halfway from chance to 1 */
};

/* Defaults for M choices: Wilson 95%, fits on with fit_opts_default, ceiling 0.95, floor at
 * chance (margin 0). */
void analysis_opts_default(struct analysis_opts *o, int m);

/* Accuracy counts only trials with a response (correct ≥ 0); timeouts and anticipations are
 * counted separately. Reaction times are of correct trials at or above STATS_ANTICIPATION_MS. */
struct analysis_cell {
	const char *subject;    /* NULL for the pooled rows */
	int block;
	const char *block_name;
	const char *group;
	bool has_level;
	double level;
	unsigned long trials;   /* every trial of the condition */
	unsigned long n, k;     /* trials with a response, correct among them */
	unsigned long timeouts, anticipations;
	bool has_pc;            /* n > 0 */
	double pc, lower, upper;
	bool has_dprime;
	double dprime;
	bool dprime_corrected;  /* the 1/(2N) rule was applied */
	struct stats_rt rt;
};

/* One psychometric fit over the levels of a (subject, block, group). */
struct analysis_series {
	const char *subject;    /* NULL for pooled */
	int block;
	const char *block_name;
	const char *group;
	struct fit_point *pts;  /* owned */
	size_t npts;
	struct fit_result fit;
};

struct analysis_pair {
	size_t truth, chosen;   /* indices into the category list */
	unsigned long count;
	double share;           /* of the true category's responses */
};

/* Confusion matrix at one level (pooled over subjects, blocks and groups). */
struct analysis_confusion {
	bool has_level;
	double level;
	unsigned long *counts;  /* ncat × ncat, row = true category, column = chosen; owned */
	unsigned long *row_n;   /* responses per true category; owned */
	struct analysis_pair top[5];
	size_t ntop;
};

struct analysis_item {
	const char *image;
	const char *category;
	unsigned long n, k;
	double pc;
	double median_rt;       /* correct trials; NaN when none */
	bool ceiling, floor;
};

struct analysis_category {
	const char *category;
	unsigned long n, k;
	double pc, lower, upper;
};

struct analysis_timing {
	const char *session;
	const char *subject;
	const char *timing_mode;
	double refresh_hz;
	unsigned long trials;
	unsigned long exact;            /* frames_actual == frames_planned */
	unsigned long timing_faults;    /* timing_ok false */
	unsigned long dropped_frames;   /* summed over trials */
	unsigned long trials_with_drops;
	unsigned long anticipations, timeouts;
	const double *frame_ms;         /* borrowed from the session */
	size_t nframe_ms;
};

struct analysis {
	struct analysis_opts opts;
	size_t nrows, npractice;
	size_t nsubjects;
	bool has_levels;
	struct analysis_cell *cells;        /* per subject, then pooled when nsubjects > 1 */
	size_t ncells;
	struct analysis_series *series;
	size_t nseries;
	const char **cats;                  /* sorted category names (true and chosen) */
	size_t ncat;
	struct analysis_confusion *conf;
	size_t nconf;
	struct analysis_item *items;        /* sorted by category, then image */
	size_t nitems;
	struct analysis_category *catacc;   /* per true category, all levels */
	size_t ncatacc;
	struct analysis_timing *timing;     /* one per session that has rows */
	size_t ntiming;
	unsigned long correct_rt_n;         /* pooled RT summary of correct trials */
	struct stats_rt rt;
	double *rt_ms;                      /* correct-trial RTs, sorted (for the RT histogram) */
	size_t nrt;
};

/* Computes every table. Returns NULL only when O->m < 2. Rows may come in any order. */
struct analysis *analysis_run(const struct analysis_row *rows, size_t nrows,
			      const struct analysis_session *sessions, size_t nsessions,
			      const struct analysis_opts *o);
void analysis_destroy(struct analysis *a);

#endif
