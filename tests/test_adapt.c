/* test_adapt — adaptive rules against their published convergence points with a simulated
 * observer, QUEST's function and posterior, snapping, interleaving, replay and parameter checks.
 *
 * The simulated observer is psyfn's Weibull P(x) = γ + (1 − γ − λ)(1 − exp(−(x/α)^β)) answering
 * correctly with probability P(level), drawn from GSL's mt19937 with a fixed seed, so every
 * figure below is reproducible. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cmocka.h>

#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>

#include "adapt.h"
#include "psyfn.h"

/* Runs one staircase to its end against observer F; returns its estimate. */
static void run_stair(const struct adapt_params *p, const struct psyfn *f, gsl_rng *r,
		      struct adapt_estimate *e)
{
	struct adapt_stair *s = adapt_stair_create(p);
	while (!adapt_stair_done(s)) {
		double level = adapt_stair_next(s);
		int correct = gsl_rng_uniform(r) < psyfn_eval(f, level);
		adapt_stair_update(s, level, correct);
	}
	adapt_stair_estimate(s, e);
	adapt_stair_destroy(s);
}

struct conv {
	double mean, se, target;
};

/* Mean threshold (log10 units) over RUNS staircases of P against F, with its standard error,
 * and the log10 level where F's proportion correct equals the rule's nominal target. */
static struct conv converge(struct adapt_params *p, const struct psyfn *f, int runs,
			    unsigned long seed)
{
	gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
	gsl_rng_set(r, seed);
	double sum = 0, ss = 0;
	for (int i = 0; i < runs; i++) {
		struct adapt_estimate e;
		run_stair(p, f, r, &e);
		assert_true(e.valid);
		sum += e.axis_mean;
		ss += e.axis_mean * e.axis_mean;
	}
	gsl_rng_free(r);
	struct conv c;
	c.mean = sum / runs;
	c.se = sqrt((ss / runs - c.mean * c.mean) / (runs - 1));
	c.target = log10(psyfn_inverse(f, adapt_target_pc(p)));
	return c;
}

/* The observer of the convergence tests: 2AFC Weibull with α = 0.1, β = 3.5, no lapses (values
 * of our own). On a log10 axis its proportion correct climbs from 55% to 95% over about 0.38 log
 * units. */
static const struct psyfn observer2 = {PSYFN_WEIBULL, 0.1, 3.5, 0.5, 0.0};

/* Parameters for the convergence runs: start 0.1 log units above the target, step 0.05 halved
 * after reversals 2, 4, 6 (and 8) down to a final 0.00625 (or 0.003125), stop after 120
 * reversals, threshold from the last 100 (the first 20 are burn-in). Levitt's convergence point
 * is a small-step result: with a final step of 0.025 log units we measured a bias of about
 * −0.008 log units (the track settles a little below the nominal point, pulled by the asymmetric
 * Weibull), shrinking in proportion to the step. At the final steps used below, 20 seeds × 1,000
 * runs showed a residual bias under 0.001 log units, below the standard error of the 400-run
 * mean that the tolerance is built on. */
static void convergence_params(struct adapt_params *p, enum adapt_rule rule, int down,
			       double target_pc, int halvings)
{
	adapt_params_default(p);
	p->rule = rule;
	p->axis = ADAPT_AXIS_LOG;
	p->down = rule == ADAPT_WEIGHTED ? 1 : down;
	p->target_pc = target_pc;
	p->step_down = 0.05;
	p->step_up = rule == ADAPT_WEIGHTED ? 0.05 * target_pc / (1 - target_pc) : 0.05;
	p->nhalve = halvings;
	for (int i = 0; i < halvings; i++)
		p->halve_after[i] = 2 * (i + 1);
	p->max_trials = 100000;
	p->stop_reversals = 120;
	p->threshold_reversals = 100;
	p->floor = NAN;
	p->ceiling = NAN;
	double t = log10(psyfn_inverse(&observer2, adapt_target_pc(p)));
	p->start = pow(10.0, t + 0.1);
}

/* Tolerance: 400 independent seeded runs give the mean threshold a standard error SE (about
 * 0.001 log units here, the runs' SD over sqrt(400)); |mean − target| <= 3·SE fails by chance in
 * 0.27% of seeds when the rule is unbiased (normal approximation of a mean of 400 runs). */
#define RUNS 400

/* 1-up-2-down converges to P = 0.5^(1/2) = 70.7% correct (Levitt 1971, J. Acoust. Soc. Am. 49,
 * 467–477, table I). */
static void adapt_testLevitt1up2down(void **state)
{
	(void)state;
	struct adapt_params p;
	convergence_params(&p, ADAPT_UPDOWN, 2, 0, 3);
	assert_float_equal(adapt_target_pc(&p), 0.7071, 1e-4);   /* Levitt 1971 */
	struct conv c = converge(&p, &observer2, RUNS, 11);
	print_message("1-up-2-down: mean %.4f target %.4f se %.4f (P at mean %.4f)\n", c.mean,
		      c.target, c.se, psyfn_eval(&observer2, pow(10, c.mean)));
	assert_true(fabs(c.mean - c.target) <= 3 * c.se);
}

/* 1-up-3-down converges to P = 0.5^(1/3) = 79.4% correct (Levitt 1971, table I). */
static void adapt_testLevitt1up3down(void **state)
{
	(void)state;
	struct adapt_params p;
	convergence_params(&p, ADAPT_UPDOWN, 3, 0, 4);
	assert_float_equal(adapt_target_pc(&p), 0.7937, 1e-4);   /* Levitt 1971 */
	struct conv c = converge(&p, &observer2, RUNS, 12);
	print_message("1-up-3-down: mean %.4f target %.4f se %.4f (P at mean %.4f)\n", c.mean,
		      c.target, c.se, psyfn_eval(&observer2, pow(10, c.mean)));
	assert_true(fabs(c.mean - c.target) <= 3 * c.se);
}

/* The step-size bias named above is real and shrinks with the step: with a final step of 0.025
 * the same 1-up-2-down sits further from the nominal point than with 0.00625. This is why the
 * convergence tests use small steps; it also guards against a rule that ignores halving. */
static void adapt_testBiasShrinksWithStep(void **state)
{
	(void)state;
	struct adapt_params coarse, fine;
	convergence_params(&coarse, ADAPT_UPDOWN, 2, 0, 1);
	convergence_params(&fine, ADAPT_UPDOWN, 2, 0, 3);
	struct conv a = converge(&coarse, &observer2, RUNS, 13);
	struct conv b = converge(&fine, &observer2, RUNS, 13);
	print_message("bias at step 0.025: %.4f, at 0.00625: %.4f\n", a.mean - a.target,
		      b.mean - b.target);
	assert_true(fabs(b.mean - b.target) < fabs(a.mean - a.target));
}

/* Weighted up-down with Δup/Δdown = p/(1 − p) converges to p (Kaernbach 1991, Percept.
 * Psychophys. 49, 227–229, eq. 1). Tested at p = 0.75 and 0.85; the up step is p/(1 − p) times
 * the down step, so the final down step is halved once more (0.003125) to keep the larger up
 * step small against the function's spread. */
static void adapt_testWeightedConverges(void **state)
{
	(void)state;
	const double targets[] = {0.75, 0.85};
	for (int i = 0; i < 2; i++) {
		struct adapt_params p;
		convergence_params(&p, ADAPT_WEIGHTED, 1, targets[i], 4);
		/* Kaernbach 1991: Δup/Δdown = p/(1 − p). */
		assert_float_equal(p.step_up / p.step_down, targets[i] / (1 - targets[i]), 1e-12);
		struct conv c = converge(&p, &observer2, RUNS, 20 + (unsigned long)i);
		print_message("weighted %.2f: mean %.4f target %.4f se %.4f (P at mean %.4f)\n",
			      targets[i], c.mean, c.target, c.se,
			      psyfn_eval(&observer2, pow(10, c.mean)));
		assert_true(fabs(c.mean - c.target) <= 3 * c.se);
	}
}

/* QUEST's function at threshold with β = 3.5, δ = 0.01, γ = 0.5 (Watson & Pelli 1983, Percept.
 * Psychophys. 33, 113–120, eq. for W(x) with x = T):
 *   P(T) = δγ + (1 − δ)(1 − (1 − γ)·e^(−10^0)) = 0.005 + 0.99·(1 − 0.5·e^(−1))
 *        = 0.005 + 0.99·(1 − 0.5·0.367879) = 0.005 + 0.99·0.816060 = 0.005 + 0.807900 = 0.8129.
 * It also equals psyfn's Weibull at x = α with γ = 0.5 and λ = δ(1 − γ) (algebra: both are
 * 1 − δ(1 − γ) − (1 − γ)(1 − δ)e^(−u)). */
static void adapt_testQuestAtThreshold(void **state)
{
	(void)state;
	assert_float_equal(adapt_quest_p(3.5, 0.01, 0.5, -1.3, -1.3), 0.8129, 5e-5);
	struct adapt_params p;
	adapt_params_default(&p);
	p.rule = ADAPT_QUEST;
	assert_float_equal(adapt_target_pc(&p), 0.8129, 5e-5);
	struct psyfn f = {PSYFN_WEIBULL, 0.05, 3.5, 0.5, 0.01 * 0.5};
	for (double x = -2.0; x < 0.0; x += 0.1)
		assert_float_equal(adapt_quest_p(3.5, 0.01, 0.5, x, log10(0.05)),
				   psyfn_eval(&f, pow(10, x)), 1e-12);
}

/* After 40 trials QUEST's posterior mean is within its posterior SD of the true threshold in
 * about the nominal share of runs. The true threshold of each run is drawn from QUEST's own prior
 * and the observer is QUEST's own function; then the posterior is calibrated (Bayes' rule), so the
 * expected share of runs with the truth inside mean ± SD equals the average posterior mass of
 * that interval (about 68%, the Gaussian share, when the posterior is near Gaussian). Tolerance:
 * 3 binomial standard errors of 600 runs (sqrt(0.68·0.32/600) ≈ 0.019). */
static void adapt_testQuestCoverage(void **state)
{
	(void)state;
	const int runs = 600;
	gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
	gsl_rng_set(r, 31);
	int inside = 0;
	double mass = 0, sd_mean = 0;
	for (int i = 0; i < runs; i++) {
		struct adapt_params p;
		adapt_params_default(&p);
		p.rule = ADAPT_QUEST;
		p.start = 0.05;           /* prior mean: log10 0.05 = −1.301 */
		p.prior_sd = 0.3;
		p.max_trials = 40;
		p.grid_lo = log10(0.05) - 1.5;
		p.grid_hi = log10(0.05) + 1.5;
		double t = log10(0.05) + 0.3 * gsl_ran_gaussian_ziggurat(r, 1.0);
		struct psyfn f = {PSYFN_WEIBULL, pow(10, t), p.beta, p.gamma,
				  p.delta * (1 - p.gamma)};
		struct adapt_stair *s = adapt_stair_create(&p);
		while (!adapt_stair_done(s)) {
			double level = adapt_stair_next(s);
			adapt_stair_update(s, level, gsl_rng_uniform(r) < psyfn_eval(&f, level));
		}
		struct adapt_estimate e;
		adapt_stair_estimate(s, &e);
		assert_int_equal(e.ntrials, 40);
		if (fabs(e.axis_mean - t) <= e.axis_sd)
			inside++;
		mass += adapt_stair_posterior_mass(s, e.axis_mean - e.axis_sd,
						   e.axis_mean + e.axis_sd);
		sd_mean += e.axis_sd;
		adapt_stair_destroy(s);
	}
	gsl_rng_free(r);
	double share = (double)inside / runs, nominal = mass / runs;
	double se = sqrt(nominal * (1 - nominal) / runs);
	print_message("QUEST: %d/%d inside mean ± SD (%.3f), nominal %.3f, mean SD %.3f\n", inside,
		      runs, share, nominal, sd_mean / runs);
	assert_true(nominal > 0.6 && nominal < 0.75);
	assert_true(share >= nominal - 3 * se);
	assert_true(share <= nominal + 3 * se);
	assert_true(sd_mean / runs < 0.3);   /* 40 trials narrowed the prior */
}

/* A fixed true threshold (not drawn from the prior) and a prior off by one SD: the estimate still
 * lands within its SD in at least the nominal 68.3% share minus 3 standard errors (Gaussian
 * posterior approximation; 68.27% is the normal share within ±1 SD). */
static void adapt_testQuestFixedThreshold(void **state)
{
	(void)state;
	const int runs = 500;
	gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
	gsl_rng_set(r, 32);
	double t = log10(0.08);
	struct psyfn f = {PSYFN_WEIBULL, 0.08, 3.5, 0.25, 0.01 * 0.75};
	int inside = 0;
	for (int i = 0; i < runs; i++) {
		struct adapt_params p;
		adapt_params_default(&p);
		p.rule = ADAPT_QUEST;
		p.gamma = 0.25;
		p.start = pow(10, t - 0.4);
		p.prior_sd = 0.4;
		p.max_trials = 40;
		p.grid_lo = log10(p.start) - 2;
		p.grid_hi = log10(p.start) + 2;
		p.test_at = i % 2 ? ADAPT_TEST_AT_PEAK : ADAPT_TEST_AT_MEAN;
		struct adapt_stair *s = adapt_stair_create(&p);
		while (!adapt_stair_done(s)) {
			double level = adapt_stair_next(s);
			adapt_stair_update(s, level, gsl_rng_uniform(r) < psyfn_eval(&f, level));
		}
		struct adapt_estimate e;
		adapt_stair_estimate(s, &e);
		if (fabs(e.axis_mean - t) <= e.axis_sd)
			inside++;
		adapt_stair_destroy(s);
	}
	gsl_rng_free(r);
	double share = (double)inside / runs;
	print_message("QUEST fixed threshold: %d/%d inside mean ± SD\n", inside, runs);
	assert_true(share >= 0.6827 - 3 * sqrt(0.6827 * 0.3173 / runs));
}

/* A scripted 1-up-2-down track on a linear axis, worked by hand: start 10, step 2 halved after
 * the 2nd reversal, floor 4, ceiling 14, stop after 4 reversals.
 *   levels 10 10 8 8 6 8 8 6 7 8 8, answers c c c c w c c w w c c
 *   reversals at 6 (valley), 8 (peak, then step 1), 6 (valley), 8 (peak)
 *   threshold over the last 3: (8 + 6 + 8)/3 = 7.333, SD = sqrt(((2/3)²·2 + (4/3)²)/2) = 1.1547 */
static void adapt_testUpDownScript(void **state)
{
	(void)state;
	struct adapt_params p;
	adapt_params_default(&p);
	p.axis = ADAPT_AXIS_LINEAR;
	p.down = 2;
	p.step_down = p.step_up = 2;
	p.nhalve = 1;
	p.halve_after[0] = 2;
	p.start = 10;
	p.floor = 4;
	p.ceiling = 14;
	p.max_trials = 50;
	p.stop_reversals = 4;
	p.threshold_reversals = 3;
	char why[128];
	assert_int_equal(adapt_params_check(&p, why, sizeof why), 0);
	struct adapt_stair *s = adapt_stair_create(&p);
	const double levels[] = {10, 10, 8, 8, 6, 8, 8, 6, 7, 8, 8};
	const int answers[] = {1, 1, 1, 1, 0, 1, 1, 0, 0, 1, 1};
	for (int i = 0; i < 11; i++) {
		assert_false(adapt_stair_done(s));
		assert_float_equal(adapt_stair_next(s), levels[i], 1e-12);
		adapt_stair_update(s, adapt_stair_next(s), answers[i]);
	}
	assert_true(adapt_stair_done(s));
	assert_int_equal(adapt_stair_nreversals(s), 4);
	const double rev[] = {6, 8, 6, 8};
	for (int i = 0; i < 4; i++)
		assert_float_equal(adapt_stair_reversal(s, i), rev[i], 1e-12);
	struct adapt_estimate e;
	adapt_stair_estimate(s, &e);
	assert_true(e.valid);
	assert_int_equal(e.nused, 3);
	assert_float_equal(e.threshold, 22.0 / 3, 1e-12);
	assert_float_equal(e.axis_sd, 1.1547005, 1e-6);
	adapt_stair_destroy(s);
}

/* Floor and ceiling hold the requested level; the trial limit stops the track. */
static void adapt_testFloorCeilingAndTrialStop(void **state)
{
	(void)state;
	struct adapt_params p;
	adapt_params_default(&p);
	p.axis = ADAPT_AXIS_LOG;
	p.down = 1;
	p.step_down = p.step_up = 0.5;
	p.start = 1;
	p.floor = 0.1;
	p.ceiling = 3;
	p.max_trials = 8;
	struct adapt_stair *s = adapt_stair_create(&p);
	for (int i = 0; i < 4; i++)          /* 1 → 10^0.5 > 3: held at the ceiling */
		adapt_stair_update(s, adapt_stair_next(s), 0);
	assert_float_equal(adapt_stair_next(s), 3, 1e-12);
	for (int i = 0; i < 3; i++)          /* down 1.5 log units from log10 3: held at 0.1 */
		adapt_stair_update(s, adapt_stair_next(s), 1);
	assert_float_equal(adapt_stair_next(s), 0.1, 1e-12);
	assert_false(adapt_stair_done(s));
	adapt_stair_update(s, 0.1, -1);      /* no response counts as incorrect: one step up */
	assert_true(adapt_stair_done(s));
	assert_float_equal(adapt_stair_next(s), pow(10, -0.5), 1e-12);
	assert_int_equal(adapt_stair_ntrials(s), 8);
	adapt_stair_destroy(s);
}

/* When lower levels are easier (a noise budget), the track is the mirror image on the axis: the
 * same answers give levels 1/L of the higher-is-easier track started at 1/start. */
static void adapt_testEasierLowerMirrors(void **state)
{
	(void)state;
	struct adapt_params up, lo;
	adapt_params_default(&up);
	up.down = 3;
	up.step_down = up.step_up = 0.1;
	up.start = 0.5;
	up.max_trials = 60;
	lo = up;
	lo.easier_lower = true;
	lo.start = 2.0;
	struct adapt_stair *a = adapt_stair_create(&up), *b = adapt_stair_create(&lo);
	gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
	gsl_rng_set(r, 5);
	while (!adapt_stair_done(a)) {
		double la = adapt_stair_next(a), lb = adapt_stair_next(b);
		assert_float_equal(la * lb, 1.0, 1e-9);
		int c = gsl_rng_uniform(r) < psyfn_eval(&observer2, la * 0.2);
		adapt_stair_update(a, la, c);
		adapt_stair_update(b, lb, c);
	}
	struct adapt_estimate ea, eb;
	adapt_stair_estimate(a, &ea);
	adapt_stair_estimate(b, &eb);
	assert_float_equal(ea.axis_mean, -eb.axis_mean, 1e-9);
	/* QUEST too: the posterior mean mirrors. */
	up.rule = lo.rule = ADAPT_QUEST;
	up.grid_lo = -2.3, up.grid_hi = 1.7;
	lo.grid_lo = -1.7, lo.grid_hi = 2.3;
	struct adapt_stair *qa = adapt_stair_create(&up), *qb = adapt_stair_create(&lo);
	for (int i = 0; i < 30; i++) {
		double la = adapt_stair_next(qa), lb = adapt_stair_next(qb);
		assert_float_equal(la * lb, 1.0, 1e-6);
		int c = gsl_rng_uniform(r) < psyfn_eval(&observer2, la * 0.2);
		adapt_stair_update(qa, la, c);
		adapt_stair_update(qb, lb, c);
	}
	adapt_stair_estimate(qa, &ea);
	adapt_stair_estimate(qb, &eb);
	assert_float_equal(ea.axis_mean, -eb.axis_mean, 1e-6);
	assert_float_equal(ea.axis_sd, eb.axis_sd, 1e-6);
	gsl_rng_free(r);
	adapt_stair_destroy(a);
	adapt_stair_destroy(b);
	adapt_stair_destroy(qa);
	adapt_stair_destroy(qb);
}

static void spec_init(struct adapt_spec *s, enum adapt_rule rule, enum adapt_axis axis,
		      const double *starts, size_t nstarts, bool per_category, int max_trials)
{
	memset(s, 0, sizeof *s);
	adapt_params_default(&s->base);
	s->base.rule = rule;
	s->base.axis = axis;
	s->base.step_down = 0.1;
	s->base.max_trials = max_trials;
	s->base.target_pc = 0.8;
	s->starts = malloc(nstarts * sizeof *s->starts);
	memcpy(s->starts, starts, nstarts * sizeof *starts);
	s->nstarts = nstarts;
	s->per_category = per_category;
}

/* Snapping goes to the nearest level on the protocol's axis: 0.029 lies nearer 0.02 on a linear
 * axis (0.009 vs 0.011) but nearer 0.04 on a log axis (log10 ratios 0.161 vs 0.140); an exact tie
 * goes to the lower level. */
static void adapt_testSnapOnAxis(void **state)
{
	(void)state;
	const struct adapt_item items[] = {
		{0, 0, 0.01}, {1, 0, 0.02}, {2, 0, 0.04}, {3, 0, 0.08}, {4, 0, 0.0},
	};
	const double start[] = {0.029};
	char why[160];
	int stim;
	double req;
	struct adapt_spec sp;
	spec_init(&sp, ADAPT_UPDOWN, ADAPT_AXIS_LOG, start, 1, false, 10);
	struct adapt_block *b = adapt_block_create(&sp, 1, items, 5, 1, 0, why, sizeof why);
	assert_non_null(b);
	assert_int_equal(adapt_block_next(b, 0, 0, &stim, &req), 0);
	assert_int_equal(stim, 2);
	assert_float_equal(req, 0.029, 1e-12);
	adapt_block_destroy(b);
	sp.base.axis = ADAPT_AXIS_LINEAR;
	b = adapt_block_create(&sp, 1, items, 5, 1, 0, why, sizeof why);
	assert_non_null(b);
	assert_int_equal(adapt_block_next(b, 0, 0, &stim, &req), 0);
	assert_int_equal(stim, 1);
	adapt_block_destroy(b);
	sp.starts[0] = 0.03;                 /* linear tie between 0.02 and 0.04 */
	b = adapt_block_create(&sp, 1, items, 5, 1, 0, why, sizeof why);
	assert_int_equal(adapt_block_next(b, 0, 0, &stim, &req), 0);
	assert_int_equal(stim, 1);
	/* A category without items has nothing to show. */
	assert_int_equal(adapt_block_next(b, 0, 1, &stim, &req), -1);
	adapt_block_destroy(b);
	adapt_spec_clear(&sp);
}

/* Several images at one level are shown in turn: the least shown first. */
static void adapt_testExemplarsRotate(void **state)
{
	(void)state;
	const struct adapt_item items[] = {
		{10, 0, 0.5}, {11, 0, 0.5}, {12, 0, 0.5}, {13, 1, 0.5}, {14, 0, 0.125},
	};
	const double start[] = {0.5};
	char why[160];
	struct adapt_spec sp;
	spec_init(&sp, ADAPT_UPDOWN, ADAPT_AXIS_LOG, start, 1, false, 9);
	sp.base.step_down = 0.01;
	struct adapt_block *b = adapt_block_create(&sp, 2, items, 5, 9, 2, why, sizeof why);
	assert_non_null(b);
	int seen[3] = {0, 0, 0};
	for (int i = 0; i < 9; i++) {
		int stim;
		double req;
		assert_int_equal(adapt_block_next(b, 0, 0, &stim, &req), 0);
		assert_true(stim >= 10 && stim <= 12);
		seen[stim - 10]++;
		/* after every third trial each image has been shown equally often */
		adapt_block_update(b, 0, stim, 0.5, i % 2);
		if (i % 3 == 2)
			assert_true(seen[0] == seen[1] && seen[1] == seen[2]);
	}
	assert_true(adapt_block_done(b));
	adapt_block_destroy(b);
	adapt_spec_clear(&sp);
}

/* Interleaving: every staircase once per round in a seeded random order; per-category staircases
 * keep their category; open staircases deal categories from a shuffled deck. */
static void adapt_testInterleaveOrder(void **state)
{
	(void)state;
	const struct adapt_item items[] = {
		{0, 0, 0.1}, {1, 0, 0.2}, {2, 1, 0.1}, {3, 1, 0.2}, {4, 2, 0.1}, {5, 2, 0.2},
	};
	const double starts[] = {0.2, 0.1};
	struct adapt_spec sp;
	spec_init(&sp, ADAPT_UPDOWN, ADAPT_AXIS_LOG, starts, 2, true, 5);
	assert_int_equal(adapt_spec_nstairs(&sp, 3), 6);
	gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
	gsl_rng_set(r, 77);
	int *st, *ch, *st2, *ch2;
	size_t n;
	char why[160];
	assert_int_equal(adapt_plan_order(&sp, 3, items, 6, r, &st, &ch, &n, why, sizeof why), 0);
	assert_int_equal(n, 30);
	for (size_t round = 0; round < 5; round++) {
		int count[6] = {0};
		for (size_t j = 0; j < 6; j++) {
			int s = st[round * 6 + j];
			count[s]++;
			assert_int_equal(ch[round * 6 + j], s / 2);   /* category = s / nstarts */
		}
		for (int s = 0; s < 6; s++)
			assert_int_equal(count[s], 1);
	}
	gsl_rng_set(r, 77);
	size_t n2;
	assert_int_equal(adapt_plan_order(&sp, 3, items, 6, r, &st2, &ch2, &n2, why, sizeof why), 0);
	assert_int_equal(n2, 30);
	assert_memory_equal(st, st2, 30 * sizeof *st);
	free(st2);
	free(ch2);
	gsl_rng_set(r, 78);
	adapt_plan_order(&sp, 3, items, 6, r, &st2, &ch2, &n2, why, sizeof why);
	assert_memory_not_equal(st, st2, 30 * sizeof *st);
	free(st2);
	free(ch2);
	free(st);
	free(ch);
	/* Open to any category: each staircase's 3 consecutive trials cover the 3 categories. */
	sp.per_category = false;
	sp.base.max_trials = 6;
	assert_int_equal(adapt_plan_order(&sp, 3, items, 6, r, &st, &ch, &n, why, sizeof why), 0);
	assert_int_equal(n, 12);
	for (int s = 0; s < 2; s++) {
		int k = 0, mask = 0;
		for (size_t i = 0; i < n; i++) {
			if (st[i] != s)
				continue;
			mask |= 1 << ch[i];
			if (++k % 3 == 0) {
				assert_int_equal(mask, 7);
				mask = 0;
			}
		}
	}
	free(st);
	free(ch);
	gsl_rng_free(r);
	adapt_spec_clear(&sp);
}

struct shown {
	int stair, stim, correct;
	double requested, level;
};

/* Runs the planned trials [from, to) of block B against a seeded observer that answers from the
 * level; appends what was shown to OUT. Returns the count appended. */
static size_t run_block(struct adapt_block *b, const int *st, const int *ch, size_t from,
			size_t to, const struct adapt_item *items, gsl_rng *obs, struct shown *out)
{
	size_t n = 0;
	for (size_t i = from; i < to; i++) {
		int stim;
		double req;
		int rc = adapt_block_next(b, st[i], ch[i], &stim, &req);
		assert_true(rc >= 0);
		if (rc == 1)
			continue;
		double level = items[stim].level;
		int c = gsl_rng_uniform(obs) < psyfn_eval(&observer2, level);
		adapt_block_update(b, st[i], stim, level, c);
		out[n++] = (struct shown){st[i], stim, c, req, level};
	}
	return n;
}

/* Kill and resume: after any number of stored trials, replaying them into a fresh block and
 * going on gives exactly the trials of the uninterrupted run (same seed, same observer draws) —
 * for up-down with reversal stops (so some planned trials are skipped) and for QUEST. */
static void adapt_testReplayResumesExactly(void **state)
{
	(void)state;
	struct adapt_item items[40];
	for (int i = 0; i < 40; i++)   /* 2 categories × 5 levels × 4 exemplars */
		items[i] = (struct adapt_item){i, i / 20, 0.02 * pow(2, (i / 4) % 5)};
	const double starts[] = {0.3, 0.04};
	for (int rule = 0; rule < 3; rule++) {
		struct adapt_spec sp;
		spec_init(&sp, (enum adapt_rule)rule, ADAPT_AXIS_LOG, starts, 2, false, 30);
		sp.base.stop_reversals = 5;
		sp.base.prior_sd = 0.4;
		gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
		gsl_rng_set(r, 404);
		int *st, *ch;
		size_t np;
		char why[160];
		assert_int_equal(adapt_plan_order(&sp, 2, items, 40, r, &st, &ch, &np, why, sizeof why),
				 0);
		assert_int_equal(np, 60);
		struct shown full[60], part[60];
		gsl_rng_set(r, 9);
		struct adapt_block *b = adapt_block_create(&sp, 2, items, 40, 123, 1, why,
							   sizeof why);
		assert_non_null(b);
		size_t nfull = run_block(b, st, ch, 0, np, items, r, full);
		adapt_block_destroy(b);
		if (rule != ADAPT_QUEST)
			assert_true(nfull < np);   /* reversal stops skipped planned trials */
		for (size_t cut = 0; cut <= nfull; cut += 7) {
			gsl_rng_set(r, 9);
			b = adapt_block_create(&sp, 2, items, 40, 123, 1, why, sizeof why);
			/* the first run stops after CUT shown trials ("killed") */
			size_t n = 0, i = 0;
			for (; i < np && n < cut; i++)
				n += run_block(b, st, ch, i, i + 1, items, r, part + n);
			adapt_block_destroy(b);
			struct adapt_outcome done[60];
			for (size_t k = 0; k < n; k++)
				done[k] = (struct adapt_outcome){part[k].stair, part[k].stim,
								 part[k].level, part[k].correct};
			b = adapt_block_create(&sp, 2, items, 40, 123, 1, why, sizeof why);
			size_t at;
			assert_int_equal(adapt_block_replay(b, st, ch, np, done, n, &at, why,
							    sizeof why), 0);
			n += run_block(b, st, ch, at, np, items, r, part + n);
			adapt_block_destroy(b);
			assert_int_equal(n, nfull);
			for (size_t k = 0; k < n; k++) {
				assert_int_equal(part[k].stair, full[k].stair);
				assert_int_equal(part[k].stim, full[k].stim);
				assert_int_equal(part[k].correct, full[k].correct);
				assert_float_equal(part[k].requested, full[k].requested, 0);
			}
		}
		/* A history that does not fit the plan is refused. */
		struct adapt_outcome bad = {full[0].stair == 0 ? 1 : 0, full[0].stim, 0.02, 1};
		b = adapt_block_create(&sp, 2, items, 40, 123, 1, why, sizeof why);
		size_t at;
		assert_int_equal(adapt_block_replay(b, st, ch, np, &bad, 1, &at, why, sizeof why),
				 -1);
		adapt_block_destroy(b);
		/* Thresholds from the stored trials alone equal the live ones. */
		struct adapt_outcome h[60];
		for (size_t k = 0; k < nfull; k++)
			h[k] = (struct adapt_outcome){full[k].stair, full[k].stim, full[k].level,
						      full[k].correct};
		struct adapt_estimate est[2], live;
		assert_int_equal(adapt_history_estimates(&sp, 2, h, nfull, est, 2), 2);
		b = adapt_block_create(&sp, 2, items, 40, 123, 1, why, sizeof why);
		for (size_t k = 0; k < nfull; k++)
			adapt_block_update(b, h[k].stair, h[k].stim, h[k].level, h[k].correct);
		for (int s = 0; s < 2; s++) {
			adapt_stair_estimate(adapt_block_stair(b, (size_t)s), &live);
			assert_int_equal(est[s].valid, live.valid);
			if (live.valid)
				assert_float_equal(est[s].threshold, live.threshold, 1e-12);
			assert_int_equal(est[s].ntrials, live.ntrials);
		}
		adapt_block_destroy(b);
		free(st);
		free(ch);
		gsl_rng_free(r);
		adapt_spec_clear(&sp);
	}
}

/* Bad parameters are refused with a sentence: N = 0, a negative step, floor above ceiling, a
 * start or prior mean outside the level range, QUEST on a linear axis. */
static void adapt_testParamChecks(void **state)
{
	(void)state;
	struct adapt_params p;
	char why[160];
	adapt_params_default(&p);
	p.step_down = p.step_up = 0.1;
	p.start = 0.5;
	p.max_trials = 10;
	assert_int_equal(adapt_params_check(&p, why, sizeof why), 0);
	struct adapt_params q = p;
	q.down = 0;
	assert_int_equal(adapt_params_check(&q, why, sizeof why), -1);
	q = p;
	q.step_down = -0.1;
	assert_int_equal(adapt_params_check(&q, why, sizeof why), -1);
	q = p;
	q.floor = 2;
	q.ceiling = 1;
	assert_int_equal(adapt_params_check(&q, why, sizeof why), -1);
	assert_non_null(strstr(why, "floor"));
	q = p;
	q.floor = 0.6;
	assert_int_equal(adapt_params_check(&q, why, sizeof why), -1);
	q = p;
	q.rule = ADAPT_QUEST;
	q.axis = ADAPT_AXIS_LINEAR;
	q.grid_lo = -1;
	q.grid_hi = 1;
	assert_int_equal(adapt_params_check(&q, why, sizeof why), -1);
	q.axis = ADAPT_AXIS_LOG;
	assert_int_equal(adapt_params_check(&q, why, sizeof why), 0);
	/* A prior mean outside the levels the block has. */
	const struct adapt_item items[] = {{0, 0, 0.01}, {1, 0, 0.1}};
	const double prior[] = {0.5};
	struct adapt_spec sp;
	spec_init(&sp, ADAPT_QUEST, ADAPT_AXIS_LOG, prior, 1, false, 20);
	int choice;
	assert_int_equal(adapt_spec_expand(&sp, 2, items, 2, 0, &q, &choice, why, sizeof why),
			 ADAPT_BAD_START);
	assert_non_null(strstr(why, "prior mean"));
	sp.starts[0] = 0.05;
	assert_int_equal(adapt_spec_expand(&sp, 2, items, 2, 0, &q, &choice, why, sizeof why), 0);
	assert_float_equal(q.gamma, 0.5, 0);      /* γ = 1/m */
	assert_float_equal(q.floor, 0.01, 0);     /* from the block's levels */
	assert_float_equal(q.ceiling, 0.1, 0);
	/* Per-category staircase whose category has no usable level (0 on a log axis). */
	const struct adapt_item zero[] = {{0, 0, 0.1}, {1, 1, 0.0}};
	sp.per_category = true;
	assert_int_equal(adapt_spec_expand(&sp, 2, zero, 2, 1, &q, &choice, why, sizeof why),
			 ADAPT_BAD_LEVELS);
	assert_int_equal(choice, 1);
	adapt_spec_clear(&sp);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(adapt_testLevitt1up2down),
		cmocka_unit_test(adapt_testLevitt1up3down),
		cmocka_unit_test(adapt_testBiasShrinksWithStep),
		cmocka_unit_test(adapt_testWeightedConverges),
		cmocka_unit_test(adapt_testQuestAtThreshold),
		cmocka_unit_test(adapt_testQuestCoverage),
		cmocka_unit_test(adapt_testQuestFixedThreshold),
		cmocka_unit_test(adapt_testUpDownScript),
		cmocka_unit_test(adapt_testFloorCeilingAndTrialStop),
		cmocka_unit_test(adapt_testEasierLowerMirrors),
		cmocka_unit_test(adapt_testSnapOnAxis),
		cmocka_unit_test(adapt_testExemplarsRotate),
		cmocka_unit_test(adapt_testInterleaveOrder),
		cmocka_unit_test(adapt_testReplayResumesExactly),
		cmocka_unit_test(adapt_testParamChecks),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
