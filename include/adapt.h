/* adapt — adaptive choice of the stimulus level: transformed up-down staircases (Levitt 1971),
 * weighted up-down (Kaernbach 1991) and QUEST (Watson & Pelli 1983), several staircases
 * interleaved in one block, snapping to the levels a stimulus list has, and replay of stored
 * trials so that a resumed session continues every staircase exactly where it was.
 *
 * Levels are in the stimulus list's units (for example a perturbation budget). Every rule works on
 * an axis: linear (axis value = level) or log (axis value = log10 level; levels <= 0 are not
 * usable). Steps, prior SDs and grid spacing are in axis units. Internally each rule works on a
 * "strength" coordinate that grows as the task gets easier: the axis value itself, or its negative
 * when the protocol says lower levels are easier (a noise budget, say).
 *
 * Layers: a staircase (adapt_stair) is one rule's state, pure and self-contained. A spec
 * (adapt_spec) is what a protocol's adaptive section says; it expands to one or more staircases.
 * A block runtime (adapt_block) holds the staircases of one block, the levels available for each
 * category, and picks and snaps the stimulus of each trial. The trial order of an adaptive block
 * (which staircase, which category) is fixed by the plan from the session seed
 * (adapt_plan_order); all state after that is a function of the stored (staircase, level,
 * correct) history. */
#ifndef TACHIST_ADAPT_H
#define TACHIST_ADAPT_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include <gsl/gsl_rng.h>

#define ADAPT_MAX_HALVINGS 16

enum adapt_rule { ADAPT_UPDOWN, ADAPT_WEIGHTED, ADAPT_QUEST };
enum adapt_axis { ADAPT_AXIS_LINEAR, ADAPT_AXIS_LOG };
enum adapt_test_at { ADAPT_TEST_AT_MEAN, ADAPT_TEST_AT_PEAK, ADAPT_TEST_AT_PERCENTILE };

/* Parameters of one staircase. Levels (start, floor, ceiling) in level units; steps, prior_sd and
 * grid_step in axis units. */
struct adapt_params {
	enum adapt_rule rule;
	enum adapt_axis axis;
	bool easier_lower;        /* lower levels make the task easier (noise, blur, budget) */
	double start;             /* up-down: first level; QUEST: prior mean */
	double floor, ceiling;    /* requested levels are kept inside [floor, ceiling] */
	int max_trials;           /* stop after this many trials (> 0) */
	int stop_reversals;       /* up-down: also stop after this many reversals; 0 = off */
	/* up-down and weighted up-down */
	int down;                 /* consecutive correct answers for one step down (N); weighted: 1 */
	double step_down;         /* axis units, towards harder */
	double step_up;           /* axis units, towards easier; up-down: = step_down */
	int halve_after[ADAPT_MAX_HALVINGS];   /* both steps halve after these reversal counts */
	int nhalve;
	int threshold_reversals;  /* k: threshold = mean of the last k reversal levels */
	double target_pc;         /* weighted: the proportion correct it tracks */
	/* QUEST */
	double beta, delta, gamma;   /* Weibull slope, lapse share, guess rate (1/m) */
	double prior_sd;          /* SD of the Gaussian prior on the threshold, axis units */
	double grid_step;         /* grid spacing of the posterior, axis units */
	double grid_lo, grid_hi;  /* grid range in axis units (adapt_spec_expand fills it) */
	enum adapt_test_at test_at;   /* where the next trial goes: posterior mean, peak, percentile */
	double percentile;        /* test_at = percentile: the posterior's cumulative share there */
	double stop_sd;           /* also stop when the posterior SD falls below this; 0 = off */
};

/* Defaults: up-down, log axis, higher easier, N = 2, no halving, k = 6, β = 3.5, δ = 0.01,
 * γ = 0.5, prior SD 0.5, grid_step 0.01, test_at = mean, percentile 0.5.
 * start/floor/ceiling/steps/max_trials are left 0 for the caller. */
void adapt_params_default(struct adapt_params *p);
/* "updown", "weighted", "quest" (the protocol's words). */
const char *adapt_rule_name(enum adapt_rule r);

/* Axis value of LEVEL (log10 on a log axis; NaN when level <= 0 there). */
double adapt_axis_value(enum adapt_axis axis, double level);
/* Level of an axis value. */
double adapt_axis_level(enum adapt_axis axis, double value);

/* Proportion correct the rule converges to: 0.5^(1/N) for 1-up-N-down (Levitt 1971), the target
 * for weighted up-down, and the Weibull's value at threshold for QUEST. */
double adapt_target_pc(const struct adapt_params *p);

/* QUEST's psychometric function (Watson & Pelli 1983) on the strength axis:
 * P = δγ + (1 − δ)(1 − (1 − γ)·exp(−10^(β(x − t)))), x and t in log10 units. */
double adapt_quest_p(double beta, double delta, double gamma, double x, double t);

/* ---- one staircase ------------------------------------------------------------------------- */

struct adapt_stair;

/* A staircase at its start. P must be valid (see adapt_params_check); it is copied. QUEST
 * allocates its posterior grid here. */
struct adapt_stair *adapt_stair_create(const struct adapt_params *p);
void adapt_stair_destroy(struct adapt_stair *s);
const struct adapt_params *adapt_stair_params(const struct adapt_stair *s);
/* True once the stopping rule is met: no more trials for this staircase. */
bool adapt_stair_done(const struct adapt_stair *s);
/* The level the rule asks for next (level units, inside [floor, ceiling], before snapping). */
double adapt_stair_next(const struct adapt_stair *s);
/* Records one trial shown at LEVEL (what was shown, after snapping) with CORRECT = 1 or 0; a trial
 * without a response (-1) counts as incorrect. */
void adapt_stair_update(struct adapt_stair *s, double level, int correct);
int adapt_stair_ntrials(const struct adapt_stair *s);
int adapt_stair_nreversals(const struct adapt_stair *s);
/* Level of reversal I (0-based, level units). */
double adapt_stair_reversal(const struct adapt_stair *s, int i);

struct adapt_estimate {
	bool valid;          /* false: not enough data (no reversal yet) */
	double threshold;    /* level units */
	double axis_mean;    /* threshold on the axis */
	double axis_sd;      /* up-down: SD of the reversal levels used; QUEST: posterior SD */
	double lower, upper; /* level units of axis_mean ∓ axis_sd (ordered lower <= upper) */
	double pc;           /* proportion correct the threshold stands for (adapt_target_pc) */
	int nused;           /* up-down: reversals averaged; QUEST: trials */
	int ntrials, nreversals;
};
/* The threshold so far: up-down and weighted, the mean of the last k reversal levels on the axis
 * (fewer when fewer exist); QUEST, the posterior mean and SD. */
void adapt_stair_estimate(const struct adapt_stair *s, struct adapt_estimate *e);
/* QUEST only: posterior probability that the threshold lies within mean ± SD (axis units) —
 * the share of runs in which the truth should fall inside that interval when it is drawn from
 * the prior. -1 for other rules. */
double adapt_stair_posterior_mass(const struct adapt_stair *s, double lo, double hi);

/* Checks the internal consistency of P; on a problem writes a sentence to WHY and returns -1. */
int adapt_params_check(const struct adapt_params *p, char *why, size_t len);

/* ---- what a protocol's adaptive section says ----------------------------------------------- */

/* Lines of the keys in the protocol file, for FILE:LINE messages of checks made later. */
struct adapt_spec_lines {
	int section, rule, axis, start, floor, ceiling, trials, reversals, average_last;
};

struct adapt_spec {
	char *name;
	struct adapt_params base;    /* start is taken from STARTS */
	double *starts;              /* up-down: first levels; QUEST: prior means; one staircase each */
	size_t nstarts;
	bool per_category;           /* one staircase per category per start */
	bool has_floor, has_ceiling; /* else taken from the block's available levels */
	struct adapt_spec_lines lines;
};

void adapt_spec_clear(struct adapt_spec *s);
/* The spec named NAME among the N specs of the array SPECS (protocol.adaptive), or NULL. */
const struct adapt_spec *adapt_spec_find(const void *specs, size_t n, const char *name);

/* A stimulus an adaptive block may show. */
struct adapt_item {
	int stim;        /* index into the stimulus list */
	int choice;      /* its category */
	double level;
};

/* Number of staircases SPEC makes in a protocol with NCHOICES choices: nstarts, times nchoices
 * when per_category. Staircase s has start starts[s % nstarts] and, when per_category, category
 * s / nstarts. */
size_t adapt_spec_nstairs(const struct adapt_spec *s, size_t nchoices);
/* Fills P with the parameters of staircase I and *CHOICE with its category (-1: any). Levels
 * usable for the axis among ITEMS give floor and ceiling when the spec has none; γ = 1/NCHOICES.
 * Returns 0, or with a sentence in WHY: ADAPT_BAD_START when the start or prior mean lies outside
 * the level range, ADAPT_BAD_LEVELS when no item of the staircase's category has a level usable
 * on the axis, ADAPT_BAD_PARAMS for any other inconsistency (adapt_params_check). */
enum { ADAPT_BAD_START = -1, ADAPT_BAD_LEVELS = -2, ADAPT_BAD_PARAMS = -3 };
int adapt_spec_expand(const struct adapt_spec *s, size_t nchoices, const struct adapt_item *items,
		      size_t nitems, size_t i, struct adapt_params *p, int *choice, char *why,
		      size_t len);

/* The trial order of an adaptive block: rounds in which every staircase comes once, in an order
 * shuffled with RNG; each trial's category is the staircase's own, or for staircases open to any
 * category the next of a shuffled deck of the categories that have usable levels. Fills malloc'd
 * arrays *STAIR and *CHOICE with *N = max_trials × nstairs entries and returns 0; or returns an
 * ADAPT_BAD_* code of adapt_spec_expand with a sentence in WHY (nothing allocated). */
int adapt_plan_order(const struct adapt_spec *s, size_t nchoices, const struct adapt_item *items,
		     size_t nitems, gsl_rng *rng, int **stair, int **choice, size_t *n, char *why,
		     size_t len);

/* ---- one block at run time ----------------------------------------------------------------- */

struct adapt_block;

/* The staircases of SPEC over ITEMS (copied). SEED and BLOCK seed the choice among several images
 * at the same level. NULL when the spec cannot run on ITEMS (WHY says why). ITEMS may be empty
 * (NITEMS = 0) for a block used only to replay history (no adapt_block_next calls then), with
 * floor and ceiling taken from the spec alone. */
struct adapt_block *adapt_block_create(const struct adapt_spec *s, size_t nchoices,
				       const struct adapt_item *items, size_t nitems,
				       uint64_t seed, int block, char *why, size_t len);
void adapt_block_destroy(struct adapt_block *b);
size_t adapt_block_nstairs(const struct adapt_block *b);
const struct adapt_stair *adapt_block_stair(const struct adapt_block *b, size_t i);
/* Picks the stimulus of a trial of staircase STAIR with category CHOICE: asks the rule for its
 * level, snaps to the nearest level this category has (on the axis; a tie goes to the lower
 * level), and among several images at that level takes one shown least often so far in this
 * block (ties drawn with the block's seeded RNG). Returns 0 with *STIM and *REQUESTED (the level
 * before snapping) set; 1 when the staircase has finished (skip the trial); -1 when the category
 * has no usable level. */
int adapt_block_next(struct adapt_block *b, int stair, int choice, int *stim, double *requested);
/* Records the outcome of a trial of STAIR that showed stimulus STIM at LEVEL; CORRECT is 1, 0 or
 * -1 (no response, counted as incorrect). Returns 0, or -1 when STAIR is out of range. */
int adapt_block_update(struct adapt_block *b, int stair, int stim, double level, int correct);
/* True when every staircase has finished. */
bool adapt_block_done(const struct adapt_block *b);

/* A stored trial of an adaptive block, in the order shown. */
struct adapt_outcome {
	int stair;
	int stim;
	double level;     /* shown */
	int correct;      /* 1, 0, -1 */
};

/* Rebuilds the state of B (fresh from adapt_block_create with the same arguments) from the
 * stored trials DONE of its block, walking the planned order (PLAN_STAIR, PLAN_CHOICE of length
 * NPLAN) exactly as the run did: planned trials of finished staircases are skipped, every other
 * planned trial must be the next stored one. *RESUME_AT gets the index of the first planned trial
 * not yet run (NPLAN when the block is complete). Returns 0, or -1 with WHY when the history does
 * not fit the plan (another protocol, list or seed). */
int adapt_block_replay(struct adapt_block *b, const int *plan_stair, const int *plan_choice,
		       size_t nplan, const struct adapt_outcome *done, size_t ndone,
		       size_t *resume_at, char *why, size_t len);

/* Thresholds from stored trials alone (for report): replays H (N outcomes of one block in the
 * order shown) through fresh staircases of SPEC and fills OUT[0 .. nstairs-1]. Floor and ceiling
 * only bound the requested levels, so estimates do not need the stimulus list. Returns the number
 * of staircases, or -1 when a stored staircase index is out of range. */
int adapt_history_estimates(const struct adapt_spec *s, size_t nchoices,
			    const struct adapt_outcome *h, size_t n, struct adapt_estimate *out,
			    size_t nout);

#endif
