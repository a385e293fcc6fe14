/* forecast — simulated studies of one design (see forecast.h).
 *
 * Run i: observer j of the run answers through its own model observer seeded from
 * (run seed, j); its trials are pooled over observers into grouped points and fitted by fit_run
 * on the calling worker (one bootstrap thread), the bootstrap seeded from the run seed. Each run
 * writes only its own slot of the per-run arrays, and the summary is computed afterwards from
 * those arrays in run order, so the numbers do not depend on which thread ran what. */
#include "forecast.h"

#include <math.h>
#include <pthread.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_rng.h>
#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>

#include "diag.h"
#include "psyfn.h"

uint64_t forecast_run_seed(uint64_t seed, uint64_t i)
{
	uint64_t z = seed ^ (i * 0x9e3779b97f4a7c15ULL + 0x632be59bd9b4e019ULL);
	z += 0x9e3779b97f4a7c15ULL;
	z = (z ^ (z >> 30)) * 0xbf58476d1ce4e5b9ULL;
	z = (z ^ (z >> 27)) * 0x94d049bb133111ebULL;
	return z ^ (z >> 31);
}

double forecast_truth_level(const struct observer_spec *s, int m, double pc)
{
	struct psyfn f = {s->shape, s->threshold, fabs(s->slope), 1.0 / m, s->lapse};
	if (s->slope >= 0)
		return psyfn_inverse(&f, pc);
	/* Mirrored: P(x) = γ + (1 − γ − λ)(1 − F(x)), so F(x) = 1 − share at PC. */
	double span = 1 - f.gamma - f.lambda;
	if (!(span > 0))
		return NAN;
	double share = (pc - f.gamma) / span;
	return psyfn_inverse(&f, f.gamma + span * (1 - share));
}

enum forecast_bracket forecast_bracketing(const double *levels, size_t n, double x25, double x75)
{
	if (n == 0 || !isfinite(x25) || !isfinite(x75))
		return FORECAST_OUTSIDE;
	double lo = levels[0], hi = levels[0];
	for (size_t i = 1; i < n; i++) {
		lo = fmin(lo, levels[i]);
		hi = fmax(hi, levels[i]);
	}
	double a = fmin(x25, x75), b = fmax(x25, x75);
	if (a >= lo && b <= hi)
		return FORECAST_BRACKETS;
	if (b < lo || a > hi)
		return FORECAST_OUTSIDE;
	return FORECAST_PARTLY;
}

const char *forecast_bracket_name(enum forecast_bracket b)
{
	return b == FORECAST_BRACKETS ? "brackets" : b == FORECAST_PARTLY ? "partly" : "outside";
}

int forecast_truth_from_trials(const double *levels, const int *correct, size_t n, int m,
			       struct observer_spec *out, char *why, size_t len)
{
	size_t npts;
	struct fit_point *pts = fit_group(levels, correct, n, &npts);
	struct fit_opts fo;
	fit_opts_default(&fo, m);
	fo.nboot = 0;
	fo.shape = pts && fit_direction(pts, npts) < 0 ? PSYFN_LOGISTIC : PSYFN_WEIBULL;
	struct fit_result fr;
	int rc = fit_run(pts, npts, &fo, &fr);
	free(pts);
	if (rc < 0) {
		snprintf(why, len, "%s", fr.reason);
		return -1;
	}
	*out = (struct observer_spec){fr.f.shape, fr.f.alpha, fr.f.beta, fr.f.lambda, 600, 1, 0};
	return 0;
}

/* ---- one simulated study -------------------------------------------------------------------- */

struct job {
	const struct forecast_opts *o;
	const struct forecast_design *d;
	double *est, *lo, *hi;
	unsigned char *state;    /* 0 failed, 1 fitted without interval, 2 fitted with interval */
	unsigned char *bounded;
	int *trials;             /* trials per observer, summed over observers */
	pthread_mutex_t mu;
	int next, done;
	forecast_progress_fn progress;
	void *ctx;
};

/* Adds K correct of N at LEVEL to the points P (*NP of them, capacity CAP). */
static void add_point(struct fit_point **p, size_t *np, size_t *cap, double level,
		      unsigned long n, unsigned long k)
{
	for (size_t i = 0; i < *np; i++)
		if ((*p)[i].level == level) {
			(*p)[i].n += n;
			(*p)[i].k += k;
			return;
		}
	if (*np == *cap) {
		*cap = *cap ? 2 * *cap : 16;
		*p = xrealloc(*p, *cap * sizeof **p);
	}
	(*p)[(*np)++] = (struct fit_point){level, n, k};
}

/* One observer through an adaptive block: the plan's trial order (adapt_plan_order), then the
 * block's rule picks every level (adapt_block_next) and learns the answer. Returns the trials
 * run, or -1. */
static int adaptive_observer(const struct job *j, const struct adapt_spec *spec, uint64_t seed,
			     struct observer *obs, struct fit_point **p, size_t *np, size_t *cap)
{
	const struct forecast_design *d = j->d;
	int m = j->o->m;
	char why[256];
	struct adapt_block *b = adapt_block_create(spec, (size_t)m, d->items, d->nitems, seed, 0,
						   why, sizeof why);
	if (!b)
		return -1;
	gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
	gsl_rng_set(rng, (unsigned long)(seed & 0xffffffffUL));
	int *stair = NULL, *choice = NULL;
	size_t n = 0;
	int ran = -1;
	if (adapt_plan_order(spec, (size_t)m, d->items, d->nitems, rng, &stair, &choice, &n, why,
			     sizeof why) == 0) {
		ran = 0;
		for (size_t t = 0; t < n; t++) {
			int stim;
			double req;
			int rc = adapt_block_next(b, stair[t], choice[t], &stim, &req);
			if (rc == 1)
				continue;
			if (rc < 0 || stim < 0 || (size_t)stim >= d->nitems) {
				ran = -1;
				break;
			}
			double level = d->items[stim].level;
			struct observer_answer a;
			observer_answer(obs, m, choice[t] < 0 ? 0 : choice[t], true, level, &a);
			adapt_block_update(b, stair[t], stim, level, a.correct ? 1 : 0);
			add_point(p, np, cap, level, 1, a.correct ? 1 : 0);
			ran++;
		}
	}
	free(stair);
	free(choice);
	gsl_rng_free(rng);
	adapt_block_destroy(b);
	return ran;
}

static void run_one(struct job *j, int i)
{
	const struct forecast_opts *o = j->o;
	const struct forecast_design *d = j->d;
	uint64_t rs = forecast_run_seed(o->seed, (uint64_t)i);
	struct fit_point *p = NULL;
	size_t np = 0, cap = 0;
	int trials = 0;
	bool ok = true;
	struct adapt_spec spec;
	if (d->adaptive) {
		spec = *d->adaptive;   /* shallow: only max_trials differs */
		size_t ns = adapt_spec_nstairs(&spec, (size_t)o->m);
		int per = ns ? d->adaptive_trials / (int)ns : 0;
		spec.base.max_trials = per < 1 ? 1 : per;
	}
	for (int k = 0; k < d->observers && ok; k++) {
		struct observer_spec s = o->truth;
		s.seed = forecast_run_seed(rs, (uint64_t)k + 1) & 0xffffffffULL;
		struct observer *obs = observer_new(&s);
		if (d->adaptive) {
			int t = adaptive_observer(j, &spec, s.seed, obs, &p, &np, &cap);
			if (t < 0)
				ok = false;
			else
				trials += t;
		} else {
			for (size_t l = 0; l < d->nlevels; l++) {
				unsigned long kk = 0;
				for (int t = 0; t < d->trials_per_level; t++) {
					struct observer_answer a;
					/* The true category cycles so every choice is asked. */
					observer_answer(obs, o->m, t % o->m, true, d->levels[l], &a);
					kk += a.correct;
				}
				add_point(&p, &np, &cap, d->levels[l], (unsigned long)d->trials_per_level, kk);
				trials += d->trials_per_level;
			}
		}
		observer_destroy(obs);
	}
	j->trials[i] = trials;
	j->state[i] = 0;
	j->est[i] = j->lo[i] = j->hi[i] = NAN;
	if (ok) {
		struct fit_opts fo = o->fit;
		fo.threads = 1;
		fo.seed = forecast_run_seed(rs, 0);
		struct fit_result fr;
		if (fit_run(p, np, &fo, &fr) == 0 && fr.threshold_ok) {
			j->est[i] = fr.threshold;
			j->bounded[i] = fr.slope_bounded;
			j->state[i] = 1;
			if (fr.has_ci && isfinite(fr.threshold_ci[0]) && isfinite(fr.threshold_ci[1])) {
				j->lo[i] = fr.threshold_ci[0];
				j->hi[i] = fr.threshold_ci[1];
				j->state[i] = 2;
			}
		}
	}
	free(p);
}

static void *worker(void *arg)
{
	struct job *j = arg;
	for (;;) {
		pthread_mutex_lock(&j->mu);
		int i = j->next < j->o->runs ? j->next++ : -1;
		pthread_mutex_unlock(&j->mu);
		if (i < 0)
			return NULL;
		run_one(j, i);
		pthread_mutex_lock(&j->mu);
		j->done++;
		if (j->progress)
			j->progress(j->done, j->o->runs, j->ctx);
		pthread_mutex_unlock(&j->mu);
	}
}

/* ---- the summary ---------------------------------------------------------------------------- */

static double quantile(const double *sorted, size_t n, double q)
{
	return n ? gsl_stats_quantile_from_sorted_data(sorted, 1, n, q) : NAN;
}

/* Median, 5% and 95% of the finite values among V[0..N-1], and the Monte Carlo error of the
 * median from the distribution-free 95% interval of its rank (n/2 ± 1.96·√n/2). */
static void summarise(const double *v, size_t n, double *med, double *lo, double *hi, double *se)
{
	double *s = xmalloc((n ? n : 1) * sizeof *s);
	size_t k = 0;
	for (size_t i = 0; i < n; i++)
		if (isfinite(v[i]))
			s[k++] = v[i];
	gsl_sort(s, 1, k);
	*med = quantile(s, k, 0.5);
	*lo = quantile(s, k, 0.05);
	*hi = quantile(s, k, 0.95);
	if (se) {
		*se = NAN;
		if (k >= 10) {
			double h = 1.96 * sqrt((double)k) / 2;
			long a = (long)floor(k / 2.0 - h), b = (long)ceil(k / 2.0 + h);
			a = a < 0 ? 0 : a;
			b = b > (long)k - 1 ? (long)k - 1 : b;
			*se = (s[b] - s[a]) / (2 * 1.96);
		}
	}
	free(s);
}

static void summary(const struct job *j, struct forecast_result *r)
{
	int n = j->o->runs;
	double *logw = xmalloc((size_t)n * sizeof *logw);
	double sum = 0, sum2 = 0;
	int nest = 0;
	long trials = 0;
	for (int i = 0; i < n; i++) {
		trials += j->trials[i];
		r->widths[i] = r->estimates[i] = logw[i] = NAN;
		if (j->state[i] == 0) {
			r->failed++;
			continue;
		}
		r->estimates[i] = j->est[i];
		sum += j->est[i];
		sum2 += j->est[i] * j->est[i];
		nest++;
		r->slope_bounded += j->bounded[i];
		if (j->state[i] != 2) {
			r->failed += j->o->fit.nboot > 0;   /* an interval was asked for */
			continue;
		}
		r->with_ci++;
		r->widths[i] = j->hi[i] - j->lo[i];
		if (j->lo[i] > 0)
			logw[i] = log10(j->hi[i] / j->lo[i]);
		if (j->lo[i] <= r->true_threshold && r->true_threshold <= j->hi[i])
			r->covered++;
	}
	int obs = j->d->observers > 0 ? j->d->observers : 1;
	r->trials_per_observer = n ? (int)lround((double)trials / n / obs) : 0;
	summarise(r->widths, (size_t)n, &r->width_median, &r->width_lo, &r->width_hi,
		  &r->width_median_se);
	summarise(logw, (size_t)n, &r->logw_median, &r->logw_lo, &r->logw_hi, NULL);
	free(logw);
	r->est_mean = r->est_sd = r->bias = r->bias_se = NAN;
	if (nest > 0) {
		r->est_mean = sum / nest;
		r->bias = r->est_mean - r->true_threshold;
	}
	if (nest > 1) {
		double var = (sum2 - nest * r->est_mean * r->est_mean) / (nest - 1);
		r->est_sd = sqrt(var > 0 ? var : 0);
		r->bias_se = r->est_sd / sqrt((double)nest);
	}
	r->coverage = r->coverage_se = NAN;
	if (r->with_ci > 0) {
		double c = (double)r->covered / r->with_ci;
		r->coverage = c;
		r->coverage_se = sqrt(c * (1 - c) / r->with_ci);
	}
}

int forecast_run(const struct forecast_opts *o, const struct forecast_design *d,
		 struct forecast_result *r, forecast_progress_fn progress, void *ctx, char *err,
		 size_t errlen)
{
	memset(r, 0, sizeof *r);
	if (o->runs < 1 || o->m < 2 || d->observers < 1) {
		snprintf(err, errlen, "a forecast needs at least one run, two choices and one observer");
		return -1;
	}
	if (!d->adaptive && (d->nlevels == 0 || d->trials_per_level < 1)) {
		snprintf(err, errlen, "a design needs at least one level and one trial per level");
		return -1;
	}
	if (d->adaptive) {
		if (d->nitems == 0 || d->adaptive_trials < 1) {
			snprintf(err, errlen, "an adaptive design needs levels to choose from and trials");
			return -1;
		}
		/* Every staircase must be able to start on these items. */
		size_t ns = adapt_spec_nstairs(d->adaptive, (size_t)o->m);
		for (size_t i = 0; i < ns; i++) {
			struct adapt_params p;
			int choice;
			char why[256];
			if (adapt_spec_expand(d->adaptive, (size_t)o->m, d->items, d->nitems, i, &p,
					      &choice, why, sizeof why) < 0) {
				snprintf(err, errlen, "adaptive '%s': %s", d->adaptive->name, why);
				return -1;
			}
		}
	}
	r->runs = o->runs;
	r->true_threshold = forecast_truth_level(&o->truth, o->m, o->fit.pc_threshold);
	double g = 1.0 / o->m, span = 1 - g - o->truth.lapse;
	r->x25 = forecast_truth_level(&o->truth, o->m, g + 0.25 * span);
	r->x75 = forecast_truth_level(&o->truth, o->m, g + 0.75 * span);
	size_t n = (size_t)o->runs;
	r->widths = xmalloc(n * sizeof *r->widths);
	r->estimates = xmalloc(n * sizeof *r->estimates);
	struct job j = {.o = o, .d = d, .progress = progress, .ctx = ctx};
	j.est = xmalloc(n * sizeof *j.est);
	j.lo = xmalloc(n * sizeof *j.lo);
	j.hi = xmalloc(n * sizeof *j.hi);
	j.state = xcalloc(n, 1);
	j.bounded = xcalloc(n, 1);
	j.trials = xcalloc(n, sizeof *j.trials);
	pthread_mutex_init(&j.mu, NULL);
	int T = o->threads < 1 ? 1 : o->threads > 64 ? 64 : o->threads;
	pthread_t tid[64];
	bool started[64] = {false};
	for (int t = 1; t < T; t++)
		started[t] = pthread_create(&tid[t], NULL, worker, &j) == 0;
	worker(&j);   /* the calling thread works too; a thread that did not start costs nothing */
	for (int t = 1; t < T; t++)
		if (started[t])
			pthread_join(tid[t], NULL);
	pthread_mutex_destroy(&j.mu);
	if (d->adaptive) {
		double *lv = xmalloc(d->nitems * sizeof *lv);
		for (size_t i = 0; i < d->nitems; i++)
			lv[i] = d->items[i].level;
		r->bracket = forecast_bracketing(lv, d->nitems, r->x25, r->x75);
		free(lv);
	} else {
		r->bracket = forecast_bracketing(d->levels, d->nlevels, r->x25, r->x75);
	}
	summary(&j, r);
	free(j.est);
	free(j.lo);
	free(j.hi);
	free(j.state);
	free(j.bounded);
	free(j.trials);
	return 0;
}

void forecast_result_clear(struct forecast_result *r)
{
	if (!r)
		return;
	free(r->widths);
	free(r->estimates);
	r->widths = r->estimates = NULL;
}
