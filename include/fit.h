/* fit — maximum-likelihood psychometric function fits with parametric-bootstrap intervals.
 *
 * Model (Wichmann & Hill 2001): P(x) = γ + (1 − γ − λ)·F(x; α, β), γ = 1/m fixed, λ free in
 * [0, LAPSE_MAX] or fixed, F one of psyfn's shapes. Data are grouped points (level, n, k); trial
 * rows are grouped first with fit_group. For the logistic and normal shapes β < 0 describes a
 * function that falls as the level rises (psyfn's formulas hold for either sign). Pure computation (GSL minimisers and random numbers); the
 * caller words the results for people. Callers: app/core/analysis.c, app/cmd/cmd_fit.c. */
#ifndef TACHIST_FIT_H
#define TACHIST_FIT_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "psyfn.h"

struct fit_point {
	double level;
	unsigned long n, k;   /* trials and correct trials at LEVEL */
};

struct fit_opts {
	int m;                 /* choices; γ = 1/m */
	enum psyfn_shape shape;
	bool lapse_free;       /* true: λ estimated in [0, lapse_max]; false: λ = lapse */
	double lapse;
	double lapse_max;      /* 0.06 by default */
	double pc_threshold;   /* proportion correct that defines the threshold */
	int nboot;             /* bootstrap samples; 0 = none */
	uint64_t seed;         /* bootstrap RNG seed (mt19937) */
	double conf;           /* interval level, 0.95 */
	int threads;           /* bootstrap worker threads, >= 1 */
	int direction;         /* +1 rising, −1 falling, 0 = from the data (falling data, such as
				  accuracy against a perturbation budget, give β < 0 for the
				  logistic and normal; the Weibull only rises) */
};

/* Defaults for M choices: Weibull, λ free in [0, 0.06], threshold halfway between chance and
 * perfect (γ + (1 − γ)/2: 0.75 for 2AFC), 1,000 bootstrap samples, seed 1, 95%, one thread. */
void fit_opts_default(struct fit_opts *o, int m);
/* "free" | "0" | a number in [0, 1) -> lapse settings in O; returns 0 or -1. */
int fit_lapse_parse(const char *s, struct fit_opts *o);

enum fit_status {
	FIT_OK,
	FIT_UNSUPPORTED,     /* the data cannot support a fit (reason says why) */
	FIT_NO_CONVERGENCE,  /* the minimiser did not converge */
};

struct fit_result {
	enum fit_status status;
	char reason[320];      /* sentence for people when status != FIT_OK */
	struct psyfn f;        /* fitted function (shape, α, β, γ, λ) */
	bool slope_bounded;    /* β sits on the steepness bound: the 10–90% rise of F spans the
				  smallest spacing between tested levels (ln levels for the
				  Weibull); steeper data are fitted there, see fit.c */
	double loglik;         /* binomial log-likelihood without the constant */
	double deviance;       /* against the saturated model of the grouped points */
	int dof;               /* points minus free parameters */
	size_t npoints;
	unsigned long ntrials;
	double pc_threshold;
	bool threshold_ok;     /* false when P never reaches pc_threshold (pc ≥ 1 − λ) */
	double threshold;
	/* Bootstrap (percentile intervals over the samples that converged). */
	int nboot, nboot_failed;
	bool has_ci;           /* intervals present (at least half the samples converged) */
	double alpha_ci[2], beta_ci[2], lambda_ci[2], threshold_ci[2];
	int threshold_ci_n;    /* samples with a reachable threshold */
};

/* Groups N trial rows (LEVELS[i], CORRECT[i] in {0, 1}) into points sorted by level. Returns a
 * malloc'd array (caller frees) and its length in *NPTS; NULL when N = 0. */
struct fit_point *fit_group(const double *levels, const int *correct, size_t n, size_t *npts);

/* +1 when proportion correct rises with the level over the points, −1 when it falls (the sign of
 * the trial-weighted covariance of level and proportion correct; +1 when undecided). */
int fit_direction(const struct fit_point *pts, size_t npts);

/* Fits the model to NPTS points (any order, levels may repeat) and, when O->nboot > 0 and the fit
 * succeeded, runs the parametric bootstrap. Always fills R; returns 0 when R->status is FIT_OK,
 * else -1 with R->reason set. */
int fit_run(const struct fit_point *pts, size_t npts, const struct fit_opts *o,
	    struct fit_result *r);

#endif
