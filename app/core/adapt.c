/* adapt — adaptive level rules, interleaving, snapping and replay (see adapt.h).
 *
 * Data layout: a staircase keeps its requested position X on the strength axis (axis value, or
 * its negative when lower levels are easier), so "down" always means harder. Up-down rules keep
 * the current steps, the run of consecutive correct answers, the direction of the last move and
 * the list of reversal levels (levels shown, level units). QUEST keeps the log posterior of the
 * threshold on an evenly spaced grid over [grid_lo, grid_hi] (axis units, mapped to the strength
 * axis), renormalised after every trial so the largest value is 0.
 *
 * A block runtime holds its staircases, the items it may show with their axis values, how often
 * each item has been shown, and an mt19937 generator seeded from (session seed, block) that is
 * only used to break ties between images at the same level; since every draw happens in
 * adapt_block_next and nowhere else, replaying the stored history through the same calls leaves
 * the generator exactly where the interrupted run left it.
 *
 * Called by the plan (adapt_plan_order), the run layer (create, next, update, replay) and report
 * (adapt_history_estimates). */
#include "adapt.h"

#include <assert.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_randist.h>

#include "diag.h"

/* Largest QUEST grid accepted; with the default grid_step of 0.01 this is 200 log units. */
#define QUEST_MAX_GRID 20001

struct adapt_stair {
	struct adapt_params p;
	double x;              /* requested position, strength axis */
	double lo, hi;         /* clamp range on the strength axis (may be infinite) */
	double step_down, step_up;
	int run;               /* consecutive correct answers since the last move */
	int last_move;         /* +1 up (easier), -1 down (harder), 0 none yet */
	int ntrials;
	double *rev;           /* reversal levels, level units */
	int nrev, caprev;
	/* QUEST */
	double *grid;          /* threshold candidates, strength axis */
	double *logpost;
	size_t ngrid;
	bool done;
};

void adapt_params_default(struct adapt_params *p)
{
	memset(p, 0, sizeof *p);
	p->rule = ADAPT_UPDOWN;
	p->axis = ADAPT_AXIS_LOG;
	p->down = 2;
	p->threshold_reversals = 6;
	/* Watson & Pelli (1983) used β = 3.5, δ = 0.01, γ = 0.5 for 2AFC. */
	p->beta = 3.5;
	p->delta = 0.01;
	p->gamma = 0.5;
	p->prior_sd = 0.5;
	p->grid_step = 0.01;
	p->test_at = ADAPT_TEST_AT_MEAN;
	p->percentile = 0.5;
	p->floor = NAN;
	p->ceiling = NAN;
}

const char *adapt_rule_name(enum adapt_rule r)
{
	switch (r) {
	case ADAPT_UPDOWN: return "updown";
	case ADAPT_WEIGHTED: return "weighted";
	case ADAPT_QUEST: return "quest";
	}
	return "?";
}

double adapt_axis_value(enum adapt_axis axis, double level)
{
	if (axis == ADAPT_AXIS_LINEAR)
		return level;
	return level > 0 ? log10(level) : NAN;
}

double adapt_axis_level(enum adapt_axis axis, double value)
{
	return axis == ADAPT_AXIS_LINEAR ? value : pow(10.0, value);
}

static double to_strength(const struct adapt_params *p, double level)
{
	double a = adapt_axis_value(p->axis, level);
	return p->easier_lower ? -a : a;
}

static double from_strength(const struct adapt_params *p, double s)
{
	return adapt_axis_level(p->axis, p->easier_lower ? -s : s);
}

double adapt_quest_p(double beta, double delta, double gamma, double x, double t)
{
	return delta * gamma + (1.0 - delta) * (1.0 - (1.0 - gamma) * exp(-pow(10.0, beta * (x - t))));
}

double adapt_target_pc(const struct adapt_params *p)
{
	switch (p->rule) {
	case ADAPT_UPDOWN:
		return pow(0.5, 1.0 / p->down);
	case ADAPT_WEIGHTED:
		return p->target_pc;
	case ADAPT_QUEST:
		return adapt_quest_p(p->beta, p->delta, p->gamma, 0.0, 0.0);
	}
	return NAN;
}

int adapt_params_check(const struct adapt_params *p, char *why, size_t len)
{
#define BAD(...) do { snprintf(why, len, __VA_ARGS__); return -1; } while (0)
	if (p->max_trials <= 0)
		BAD("the number of trials must be at least 1");
	bool has_lo = !isnan(p->floor), has_hi = !isnan(p->ceiling);
	if (p->axis == ADAPT_AXIS_LOG) {
		if (has_lo && !(p->floor > 0))
			BAD("the floor must be above 0 on a log axis");
		if (has_hi && !(p->ceiling > 0))
			BAD("the ceiling must be above 0 on a log axis");
		if (!(p->start > 0))
			BAD("the start level must be above 0 on a log axis");
	}
	if (has_lo && has_hi && !(p->floor < p->ceiling))
		BAD("the floor (%g) must be below the ceiling (%g)", p->floor, p->ceiling);
	if ((has_lo && p->start < p->floor) || (has_hi && p->start > p->ceiling))
		BAD("the start level %g is outside [%g, %g]", p->start, p->floor, p->ceiling);
	if (p->rule == ADAPT_QUEST) {
		if (p->axis != ADAPT_AXIS_LOG)
			BAD("QUEST works on a log axis");
		if (!(p->beta > 0))
			BAD("beta must be above 0");
		if (!(p->delta >= 0 && p->delta < 1))
			BAD("delta must be in [0, 1)");
		if (!(p->gamma > 0 && p->gamma < 1))
			BAD("gamma must be in (0, 1)");
		if (!(p->prior_sd > 0))
			BAD("the prior SD must be above 0");
		if (!(p->grid_step > 0))
			BAD("the grid spacing must be above 0");
		if (p->test_at == ADAPT_TEST_AT_PERCENTILE &&
		    !(p->percentile > 0 && p->percentile < 1))
			BAD("the percentile must be in (0, 1)");
		if (!(p->grid_hi > p->grid_lo) ||
		    (p->grid_hi - p->grid_lo) / p->grid_step + 1 > QUEST_MAX_GRID)
			BAD("the posterior grid is empty or larger than %d points", QUEST_MAX_GRID);
		if (p->stop_sd < 0)
			BAD("the stopping SD must not be negative");
	} else {
		if (p->down < 1)
			BAD("the number of correct answers for a step down must be at least 1");
		if (!(p->step_down > 0) || !(p->step_up > 0))
			BAD("steps must be above 0");
		if (p->stop_reversals < 0)
			BAD("the number of reversals must not be negative");
		if (p->threshold_reversals < 1)
			BAD("the threshold needs at least 1 reversal");
		if (p->rule == ADAPT_WEIGHTED && !(p->target_pc > 0 && p->target_pc < 1))
			BAD("the target proportion correct must be in (0, 1)");
		for (int i = 0; i < p->nhalve; i++)
			if (p->halve_after[i] < 1)
				BAD("step halving needs reversal counts of at least 1");
	}
	return 0;
#undef BAD
}

struct adapt_stair *adapt_stair_create(const struct adapt_params *p)
{
	struct adapt_stair *s = xcalloc(1, sizeof *s);
	s->p = *p;
	double a = isnan(p->floor) ? -INFINITY : to_strength(p, p->floor);
	double b = isnan(p->ceiling) ? INFINITY : to_strength(p, p->ceiling);
	if (p->easier_lower) {   /* the floor is the easiest end: strength order flips */
		a = isnan(p->floor) ? INFINITY : a;
		b = isnan(p->ceiling) ? -INFINITY : b;
	}
	s->lo = fmin(a, b);
	s->hi = fmax(a, b);
	s->x = to_strength(p, p->start);
	s->step_down = p->step_down;
	s->step_up = p->step_up;
	if (p->rule == ADAPT_QUEST) {
		s->ngrid = (size_t)floor((p->grid_hi - p->grid_lo) / p->grid_step + 1e-9) + 1;
		s->grid = xmalloc(s->ngrid * sizeof *s->grid);
		s->logpost = xmalloc(s->ngrid * sizeof *s->logpost);
		double m = s->x, sd = p->prior_sd;
		for (size_t i = 0; i < s->ngrid; i++) {
			double a_i = p->grid_lo + (double)i * p->grid_step;
			s->grid[i] = p->easier_lower ? -a_i : a_i;
			double z = (s->grid[i] - m) / sd;
			s->logpost[i] = -0.5 * z * z;   /* Gaussian prior (Watson & Pelli 1983) */
		}
	}
	return s;
}

void adapt_stair_destroy(struct adapt_stair *s)
{
	if (!s)
		return;
	free(s->rev);
	free(s->grid);
	free(s->logpost);
	free(s);
}

const struct adapt_params *adapt_stair_params(const struct adapt_stair *s)
{
	return &s->p;
}

bool adapt_stair_done(const struct adapt_stair *s)
{
	return s->done;
}

int adapt_stair_ntrials(const struct adapt_stair *s)
{
	return s->ntrials;
}

int adapt_stair_nreversals(const struct adapt_stair *s)
{
	return s->nrev;
}

double adapt_stair_reversal(const struct adapt_stair *s, int i)
{
	assert(i >= 0 && i < s->nrev);
	return s->rev[i];
}

/* Posterior weights (normalised to sum 1) into W; returns mean and SD via pointers. */
static void quest_moments(const struct adapt_stair *s, double *w, double *mean, double *sd)
{
	double tot = 0, m = 0, v = 0;
	for (size_t i = 0; i < s->ngrid; i++) {
		w[i] = exp(s->logpost[i]);
		tot += w[i];
	}
	for (size_t i = 0; i < s->ngrid; i++) {
		w[i] /= tot;
		m += w[i] * s->grid[i];
	}
	for (size_t i = 0; i < s->ngrid; i++)
		v += w[i] * (s->grid[i] - m) * (s->grid[i] - m);
	*mean = m;
	*sd = sqrt(v);
}

/* The strength value where QUEST places its next trial. */
static double quest_test_level(const struct adapt_stair *s)
{
	double *w = xmalloc(s->ngrid * sizeof *w), mean, sd, x = 0;
	quest_moments(s, w, &mean, &sd);
	switch (s->p.test_at) {
	case ADAPT_TEST_AT_MEAN:
		x = mean;
		break;
	case ADAPT_TEST_AT_PEAK: {
		size_t best = 0;
		for (size_t i = 1; i < s->ngrid; i++)
			if (s->logpost[i] > s->logpost[best])
				best = i;
		x = s->grid[best];
		break;
	}
	case ADAPT_TEST_AT_PERCENTILE: {
		/* The percentile along increasing strength; the grid runs the other way when lower
		 * levels are easier. */
		double c = 0;
		x = s->grid[0];
		for (size_t k = 0; k < s->ngrid; k++) {
			size_t i = s->p.easier_lower ? s->ngrid - 1 - k : k;
			c += w[i];
			x = s->grid[i];
			if (c >= s->p.percentile)
				break;
		}
		break;
	}
	}
	free(w);
	return x;
}

double adapt_stair_next(const struct adapt_stair *s)
{
	double x = s->p.rule == ADAPT_QUEST ? quest_test_level(s) : s->x;
	x = fmin(fmax(x, s->lo), s->hi);
	return from_strength(&s->p, x);
}

static void add_reversal(struct adapt_stair *s, double level)
{
	if (s->nrev == s->caprev) {
		s->caprev = s->caprev ? 2 * s->caprev : 16;
		s->rev = xrealloc(s->rev, (size_t)s->caprev * sizeof *s->rev);
	}
	s->rev[s->nrev++] = level;
	for (int i = 0; i < s->p.nhalve; i++)
		if (s->p.halve_after[i] == s->nrev) {
			s->step_down /= 2;
			s->step_up /= 2;
		}
}

static void updown_update(struct adapt_stair *s, double level, bool correct)
{
	int move = 0;
	if (correct) {
		if (++s->run >= s->p.down) {
			s->x -= s->step_down;
			s->run = 0;
			move = -1;
		}
	} else {
		s->run = 0;
		s->x += s->step_up;
		move = +1;
	}
	if (move) {
		/* A reversal is a change of direction; its level is the level shown on the trial
		 * that caused it (the peak or valley of the track, Levitt 1971). */
		if (s->last_move && move != s->last_move)
			add_reversal(s, level);
		s->last_move = move;
	}
	s->x = fmin(fmax(s->x, s->lo), s->hi);
	if (s->p.stop_reversals > 0 && s->nrev >= s->p.stop_reversals)
		s->done = true;
}

static void quest_update(struct adapt_stair *s, double level, bool correct)
{
	double x = to_strength(&s->p, level), mx = -INFINITY;
	for (size_t i = 0; i < s->ngrid; i++) {
		double pc = adapt_quest_p(s->p.beta, s->p.delta, s->p.gamma, x, s->grid[i]);
		double l = correct ? pc : 1.0 - pc;
		s->logpost[i] += log(fmax(l, 1e-300));
		if (s->logpost[i] > mx)
			mx = s->logpost[i];
	}
	for (size_t i = 0; i < s->ngrid; i++)
		s->logpost[i] -= mx;
	if (s->p.stop_sd > 0) {
		double *w = xmalloc(s->ngrid * sizeof *w), mean, sd;
		quest_moments(s, w, &mean, &sd);
		free(w);
		if (sd < s->p.stop_sd)
			s->done = true;
	}
}

void adapt_stair_update(struct adapt_stair *s, double level, int correct)
{
	s->ntrials++;
	if (s->p.rule == ADAPT_QUEST)
		quest_update(s, level, correct == 1);
	else
		updown_update(s, level, correct == 1);
	if (s->ntrials >= s->p.max_trials)
		s->done = true;
}

void adapt_stair_estimate(const struct adapt_stair *s, struct adapt_estimate *e)
{
	memset(e, 0, sizeof *e);
	e->ntrials = s->ntrials;
	e->nreversals = s->nrev;
	e->pc = adapt_target_pc(&s->p);
	double m, sd;
	if (s->p.rule == ADAPT_QUEST) {
		double *w = xmalloc(s->ngrid * sizeof *w);
		quest_moments(s, w, &m, &sd);
		free(w);
		m = s->p.easier_lower ? -m : m;   /* back to the axis */
		e->nused = s->ntrials;
	} else {
		int k = s->nrev < s->p.threshold_reversals ? s->nrev : s->p.threshold_reversals;
		if (k == 0) {
			e->threshold = e->axis_mean = e->axis_sd = e->lower = e->upper = NAN;
			return;
		}
		double sum = 0, ss = 0;
		for (int i = s->nrev - k; i < s->nrev; i++)
			sum += adapt_axis_value(s->p.axis, s->rev[i]);
		m = sum / k;
		for (int i = s->nrev - k; i < s->nrev; i++) {
			double d = adapt_axis_value(s->p.axis, s->rev[i]) - m;
			ss += d * d;
		}
		sd = k > 1 ? sqrt(ss / (k - 1)) : NAN;
		e->nused = k;
	}
	e->valid = true;
	e->axis_mean = m;
	e->axis_sd = sd;
	e->threshold = adapt_axis_level(s->p.axis, m);
	e->lower = isnan(sd) ? NAN : adapt_axis_level(s->p.axis, m - sd);
	e->upper = isnan(sd) ? NAN : adapt_axis_level(s->p.axis, m + sd);
}

double adapt_stair_posterior_mass(const struct adapt_stair *s, double lo, double hi)
{
	if (s->p.rule != ADAPT_QUEST)
		return -1;
	double *w = xmalloc(s->ngrid * sizeof *w), m, sd, mass = 0;
	quest_moments(s, w, &m, &sd);
	for (size_t i = 0; i < s->ngrid; i++) {
		double a = s->p.easier_lower ? -s->grid[i] : s->grid[i];
		if (a >= lo && a <= hi)
			mass += w[i];
	}
	free(w);
	return mass;
}

/* ---- specs --------------------------------------------------------------------------------- */

void adapt_spec_clear(struct adapt_spec *s)
{
	if (!s)
		return;
	free(s->name);
	free(s->starts);
	memset(s, 0, sizeof *s);
}

const struct adapt_spec *adapt_spec_find(const void *specs, size_t n, const char *name)
{
	const struct adapt_spec *v = specs;
	for (size_t i = 0; i < n; i++)
		if (v[i].name && name && !strcmp(v[i].name, name))
			return &v[i];
	return NULL;
}

size_t adapt_spec_nstairs(const struct adapt_spec *s, size_t nchoices)
{
	return s->nstarts * (s->per_category ? nchoices : 1);
}

static bool item_usable(const struct adapt_spec *s, const struct adapt_item *it)
{
	return !isnan(adapt_axis_value(s->base.axis, it->level));
}

int adapt_spec_expand(const struct adapt_spec *s, size_t nchoices, const struct adapt_item *items,
		      size_t nitems, size_t i, struct adapt_params *p, int *choice, char *why,
		      size_t len)
{
	size_t n = adapt_spec_nstairs(s, nchoices);
	if (i >= n || s->nstarts == 0) {
		snprintf(why, len, "staircase %zu does not exist", i);
		return ADAPT_BAD_PARAMS;
	}
	*p = s->base;
	p->start = s->starts[i % s->nstarts];
	*choice = s->per_category ? (int)(i / s->nstarts) : -1;
	if (nchoices > 0)
		p->gamma = 1.0 / (double)nchoices;
	/* The range of usable levels: of the staircase's category, or of the whole block. */
	double lo = INFINITY, hi = -INFINITY;
	size_t nuse = 0;
	for (size_t k = 0; k < nitems; k++) {
		if (!item_usable(s, &items[k]) || (*choice >= 0 && items[k].choice != *choice))
			continue;
		lo = fmin(lo, items[k].level);
		hi = fmax(hi, items[k].level);
		nuse++;
	}
	if (nitems > 0 && nuse == 0) {
		snprintf(why, len, "no stimulus %s has a level usable on a %s axis",
			 *choice >= 0 ? "of this staircase's category" : "of the block",
			 s->base.axis == ADAPT_AXIS_LOG ? "log (above 0)" : "linear");
		return ADAPT_BAD_LEVELS;
	}
	if (!s->has_floor)
		p->floor = nuse ? lo : NAN;
	if (!s->has_ceiling)
		p->ceiling = nuse ? hi : NAN;
	if (p->rule == ADAPT_WEIGHTED) {
		/* Kaernbach (1991): at equilibrium p·Δdown = (1 − p)·Δup. */
		p->down = 1;
		p->step_up = p->step_down * p->target_pc / (1.0 - p->target_pc);
	} else if (p->rule == ADAPT_UPDOWN) {
		p->step_up = p->step_down;
	} else {
		/* Grid: the prior mean ± 5 SD, widened to any explicit floor and ceiling, so that the
		 * posterior depends on the protocol alone (report can rebuild it). */
		double m = adapt_axis_value(p->axis, p->start);
		double glo = m - 5 * p->prior_sd, ghi = m + 5 * p->prior_sd;
		if (s->has_floor && p->floor > 0)
			glo = fmin(glo, log10(p->floor));
		if (s->has_ceiling && p->ceiling > 0)
			ghi = fmax(ghi, log10(p->ceiling));
		p->grid_lo = glo;
		p->grid_hi = ghi;
	}
	if (nuse && (p->start < p->floor || p->start > p->ceiling)) {
		snprintf(why, len, "the %s %g is outside the level range [%g, %g]",
			 p->rule == ADAPT_QUEST ? "prior mean" : "start level", p->start, p->floor,
			 p->ceiling);
		return ADAPT_BAD_START;
	}
	return adapt_params_check(p, why, len) ? ADAPT_BAD_PARAMS : 0;
}

/* Categories with at least one usable item, in choice order; returns their count. */
static size_t usable_categories(const struct adapt_spec *s, size_t nchoices,
				const struct adapt_item *items, size_t nitems, int *out)
{
	size_t n = 0;
	for (size_t c = 0; c < nchoices; c++)
		for (size_t k = 0; k < nitems; k++)
			if (items[k].choice == (int)c && item_usable(s, &items[k])) {
				out[n++] = (int)c;
				break;
			}
	return n;
}

int adapt_plan_order(const struct adapt_spec *s, size_t nchoices, const struct adapt_item *items,
		     size_t nitems, gsl_rng *rng, int **stair, int **choice, size_t *nout, char *why,
		     size_t len)
{
	*stair = *choice = NULL;
	*nout = 0;
	size_t ns = adapt_spec_nstairs(s, nchoices);
	if (ns == 0 || s->base.max_trials <= 0) {
		snprintf(why, len, "the adaptive rule has no staircase or no trials");
		return ADAPT_BAD_PARAMS;
	}
	int *fixed = xmalloc(ns * sizeof *fixed);
	for (size_t i = 0; i < ns; i++) {
		struct adapt_params p;
		int rc = adapt_spec_expand(s, nchoices, items, nitems, i, &p, &fixed[i], why, len);
		if (rc) {
			free(fixed);
			return rc;
		}
	}
	int *cats = xmalloc((nchoices ? nchoices : 1) * sizeof *cats);
	size_t ncats = usable_categories(s, nchoices, items, nitems, cats);
	/* One deck of categories per staircase open to any category. */
	int *deck = xmalloc(ns * (ncats ? ncats : 1) * sizeof *deck);
	size_t *left = xcalloc(ns, sizeof *left);
	size_t n = ns * (size_t)s->base.max_trials;
	int *st = xmalloc(n * sizeof *st), *ch = xmalloc(n * sizeof *ch);
	int *round = xmalloc(ns * sizeof *round);
	size_t t = 0;
	for (int r = 0; r < s->base.max_trials; r++) {
		for (size_t i = 0; i < ns; i++)
			round[i] = (int)i;
		gsl_ran_shuffle(rng, round, ns, sizeof *round);
		for (size_t j = 0; j < ns; j++) {
			int i = round[j];
			int c = fixed[i];
			if (c < 0 && ncats > 0) {
				int *d = deck + (size_t)i * ncats;
				if (left[i] == 0) {
					memcpy(d, cats, ncats * sizeof *d);
					gsl_ran_shuffle(rng, d, ncats, sizeof *d);
					left[i] = ncats;
				}
				c = d[ncats - left[i]--];
			}
			st[t] = i;
			ch[t] = c;
			t++;
		}
	}
	free(round);
	free(left);
	free(deck);
	free(cats);
	free(fixed);
	*stair = st;
	*choice = ch;
	*nout = n;
	return 0;
}

/* ---- block runtime ------------------------------------------------------------------------- */

struct adapt_block {
	struct adapt_stair **st;
	int *stair_choice;
	size_t nst;
	struct adapt_item *items;
	double *strength;   /* each item's strength value (NaN when unusable) */
	int *shown;         /* times each item was shown in this block */
	size_t nitems;
	gsl_rng *rng;
};

struct adapt_block *adapt_block_create(const struct adapt_spec *s, size_t nchoices,
				       const struct adapt_item *items, size_t nitems,
				       uint64_t seed, int block, char *why, size_t len)
{
	size_t ns = adapt_spec_nstairs(s, nchoices);
	if (ns == 0) {
		snprintf(why, len, "the adaptive rule has no staircase");
		return NULL;
	}
	struct adapt_block *b = xcalloc(1, sizeof *b);
	b->nst = ns;
	b->st = xcalloc(ns, sizeof *b->st);
	b->stair_choice = xmalloc(ns * sizeof *b->stair_choice);
	for (size_t i = 0; i < ns; i++) {
		struct adapt_params p;
		if (adapt_spec_expand(s, nchoices, items, nitems, i, &p, &b->stair_choice[i], why,
				      len)) {
			adapt_block_destroy(b);
			return NULL;
		}
		b->st[i] = adapt_stair_create(&p);
	}
	b->nitems = nitems;
	b->items = xmalloc((nitems ? nitems : 1) * sizeof *b->items);
	if (nitems)
		memcpy(b->items, items, nitems * sizeof *items);
	b->strength = xmalloc((nitems ? nitems : 1) * sizeof *b->strength);
	b->shown = xcalloc(nitems ? nitems : 1, sizeof *b->shown);
	for (size_t k = 0; k < nitems; k++)
		b->strength[k] = item_usable(s, &items[k]) ? to_strength(&s->base, items[k].level)
							   : NAN;
	b->rng = gsl_rng_alloc(gsl_rng_mt19937);
	/* A seed of its own per block, derived from the session seed (golden-ratio mixing so
	 * neighbouring blocks do not share streams); mt19937 takes 32 bits. */
	uint64_t z = seed ^ ((uint64_t)(block + 1) * 0x9E3779B97F4A7C15ULL);
	gsl_rng_set(b->rng, (unsigned long)((z ^ (z >> 32)) & 0xffffffffUL));
	return b;
}

void adapt_block_destroy(struct adapt_block *b)
{
	if (!b)
		return;
	for (size_t i = 0; i < b->nst; i++)
		adapt_stair_destroy(b->st[i]);
	free(b->st);
	free(b->stair_choice);
	free(b->items);
	free(b->strength);
	free(b->shown);
	gsl_rng_free(b->rng);
	free(b);
}

size_t adapt_block_nstairs(const struct adapt_block *b)
{
	return b->nst;
}

const struct adapt_stair *adapt_block_stair(const struct adapt_block *b, size_t i)
{
	assert(i < b->nst);
	return b->st[i];
}

int adapt_block_next(struct adapt_block *b, int stair, int choice, int *stim, double *requested)
{
	if (stair < 0 || (size_t)stair >= b->nst)
		return -1;
	struct adapt_stair *s = b->st[stair];
	if (s->done)
		return 1;
	double req = adapt_stair_next(s);
	double x = to_strength(&s->p, req);
	/* Nearest usable level of the category on the axis; equal distances go to the lower
	 * level. */
	int best = -1;
	double bestd = INFINITY;
	for (size_t k = 0; k < b->nitems; k++) {
		if (b->items[k].choice != choice || isnan(b->strength[k]))
			continue;
		double d = fabs(b->strength[k] - x);
		if (best < 0 || d < bestd - 1e-12 ||
		    (fabs(d - bestd) <= 1e-12 && b->items[k].level < b->items[best].level)) {
			best = (int)k;
			bestd = d;
		}
	}
	if (best < 0)
		return -1;
	double level = b->items[best].level;
	/* Among the images at that level, the ones shown least often so far. */
	int least = -1;
	size_t nties = 0;
	for (size_t k = 0; k < b->nitems; k++) {
		if (b->items[k].choice != choice || b->items[k].level != level)
			continue;
		if (least < 0 || b->shown[k] < least) {
			least = b->shown[k];
			nties = 1;
		} else if (b->shown[k] == least) {
			nties++;
		}
	}
	size_t pick = nties > 1 ? (size_t)gsl_rng_uniform_int(b->rng, nties) : 0;
	for (size_t k = 0; k < b->nitems; k++) {
		if (b->items[k].choice != choice || b->items[k].level != level ||
		    b->shown[k] != least)
			continue;
		if (pick-- == 0) {
			*stim = b->items[k].stim;
			break;
		}
	}
	*requested = req;
	return 0;
}

int adapt_block_update(struct adapt_block *b, int stair, int stim, double level, int correct)
{
	if (stair < 0 || (size_t)stair >= b->nst)
		return -1;
	for (size_t k = 0; k < b->nitems; k++)
		if (b->items[k].stim == stim) {
			b->shown[k]++;
			break;
		}
	adapt_stair_update(b->st[stair], level, correct);
	return 0;
}

bool adapt_block_done(const struct adapt_block *b)
{
	for (size_t i = 0; i < b->nst; i++)
		if (!b->st[i]->done)
			return false;
	return true;
}

int adapt_block_replay(struct adapt_block *b, const int *plan_stair, const int *plan_choice,
		       size_t nplan, const struct adapt_outcome *done, size_t ndone,
		       size_t *resume_at, char *why, size_t len)
{
	size_t k = 0, i = 0;
	for (; i < nplan && k < ndone; i++) {
		int stim;
		double req;
		int rc = adapt_block_next(b, plan_stair[i], plan_choice[i], &stim, &req);
		if (rc == 1)
			continue;
		if (rc < 0) {
			snprintf(why, len, "planned trial %zu has no stimulus to show", i);
			return -1;
		}
		if (done[k].stair != plan_stair[i] || done[k].stim != stim) {
			snprintf(why, len,
				 "stored trial %zu (staircase %d) does not follow the plan "
				 "(staircase %d)", k, done[k].stair, plan_stair[i]);
			return -1;
		}
		adapt_block_update(b, done[k].stair, done[k].stim, done[k].level, done[k].correct);
		k++;
	}
	if (k < ndone) {
		snprintf(why, len, "%zu stored trials go beyond the plan of the block", ndone - k);
		return -1;
	}
	*resume_at = i;
	return 0;
}

int adapt_history_estimates(const struct adapt_spec *s, size_t nchoices,
			    const struct adapt_outcome *h, size_t n, struct adapt_estimate *out,
			    size_t nout)
{
	char why[160];
	struct adapt_block *b = adapt_block_create(s, nchoices, NULL, 0, 0, 0, why, sizeof why);
	if (!b)
		return -1;
	int rc = (int)b->nst;
	for (size_t k = 0; k < n; k++)
		if (adapt_block_update(b, h[k].stair, h[k].stim, h[k].level, h[k].correct) < 0) {
			rc = -1;
			goto out;
		}
	for (size_t i = 0; i < b->nst && i < nout; i++)
		adapt_stair_estimate(b->st[i], &out[i]);
out:
	adapt_block_destroy(b);
	return rc;
}
