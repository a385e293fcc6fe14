/* dclock — vsync and virtual display clocks (see dclock.h).
 *
 * The virtual clock keeps an integer timeline: base_ns advances by period_ns (plus the lost periods
 * of an injected drop) at every flip; the returned stamp is base_ns plus an optional jitter offset
 * bounded well inside one period, so stamps stay strictly increasing and frame counts computed by
 * rounding intervals stay exact. A paced clock maps the timeline to real time through real0_ns,
 * re-based when a flip comes more than one period late (an idle gap). Randomness comes from a GSL mt19937 seeded by the caller. */
#include "dclock.h"

#include <errno.h>
#include <math.h>
#include <time.h>

#include <SDL.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>

#include "diag.h"

int64_t dclock_monotonic_ns(void)
{
	struct timespec ts;
	clock_gettime(CLOCK_MONOTONIC, &ts);
	return (int64_t)ts.tv_sec * 1000000000 + ts.tv_nsec;
}

static void sleep_until(int64_t t_ns)
{
	struct timespec ts = {(time_t)(t_ns / 1000000000), (long)(t_ns % 1000000000)};
	while (clock_nanosleep(CLOCK_MONOTONIC, TIMER_ABSTIME, &ts, NULL) == EINTR)
		;
}

/* ---- vsync ---- */

struct vsync_clock {
	struct dclock base;
	SDL_Renderer *r;
};

static int64_t vsync_flip(struct dclock *c)
{
	struct vsync_clock *v = (struct vsync_clock *)c;
	SDL_RenderPresent(v->r);
	c->nflips++;
	return dclock_monotonic_ns();
}

static int64_t vsync_now(struct dclock *c)
{
	(void)c;
	return dclock_monotonic_ns();
}

static void vsync_destroy(struct dclock *c)
{
	free(c);
}

static const struct dclock_ops vsync_ops = {vsync_flip, vsync_now, vsync_destroy};

struct dclock *dclock_vsync_new(struct SDL_Renderer *renderer, double hz)
{
	struct vsync_clock *v = xcalloc(1, sizeof *v);
	v->base.ops = &vsync_ops;
	v->base.period_ns = (int64_t)llround(1e9 / hz);
	v->r = renderer;
	return &v->base;
}

/* ---- virtual ---- */

struct virtual_clock {
	struct dclock base;
	SDL_Renderer *r;
	struct dclock_virtual_opts o;
	gsl_rng *rng;
	int64_t base_ns;        /* jitter-free time of the last flip */
	int64_t last_ns;        /* last returned stamp */
	int64_t real0_ns;       /* real time matching origin (pacing) */
	int64_t origin_ns;
	uint64_t *injected;
	size_t ninjected, capinjected;
};

static int64_t virtual_flip(struct dclock *c)
{
	struct virtual_clock *v = (struct virtual_clock *)c;
	if (v->r)
		SDL_RenderPresent(v->r);
	int64_t step = c->period_ns;
	c->nflips++;
	if (v->o.drop_rate > 0 && gsl_rng_uniform(v->rng) < v->o.drop_rate) {
		step += c->period_ns * (v->o.drop_frames > 0 ? v->o.drop_frames : 1);
		if (v->ninjected == v->capinjected) {
			v->capinjected = v->capinjected ? 2 * v->capinjected : 64;
			v->injected = xrealloc(v->injected, v->capinjected * sizeof *v->injected);
		}
		v->injected[v->ninjected++] = c->nflips;
	}
	v->base_ns += step;
	int64_t t = v->base_ns;
	if (v->o.jitter_ms > 0) {
		double j = gsl_ran_gaussian(v->rng, v->o.jitter_ms * 1e6);
		double lim = 0.4 * (double)c->period_ns;
		if (j > lim) j = lim;
		if (j < -lim) j = -lim;
		t += (int64_t)j;
	}
	if (t <= v->last_ns)
		t = v->last_ns + 1;
	v->last_ns = t;
	if (v->o.pace) {
		/* After an idle gap (no flips between blocks or in a pause) real time is ahead of
		 * the timeline; the real-time origin is re-based so this flip happens now and the
		 * following ones are paced again, instead of rushing until the timeline catches
		 * up. The stamps themselves never depend on pacing. */
		int64_t target = v->real0_ns + (t - v->origin_ns);
		int64_t real = dclock_monotonic_ns();
		if (real - target > c->period_ns)
			v->real0_ns += real - target;
		else
			sleep_until(target);
	}
	return t;
}

static int64_t virtual_now(struct dclock *c)
{
	struct virtual_clock *v = (struct virtual_clock *)c;
	if (v->o.pace) {
		int64_t t = v->origin_ns + (dclock_monotonic_ns() - v->real0_ns);
		return t > v->last_ns ? t : v->last_ns;
	}
	return v->last_ns;
}

static void virtual_destroy(struct dclock *c)
{
	struct virtual_clock *v = (struct virtual_clock *)c;
	gsl_rng_free(v->rng);
	free(v->injected);
	free(v);
}

static const struct dclock_ops virtual_ops = {virtual_flip, virtual_now, virtual_destroy};

struct dclock *dclock_virtual_new(struct SDL_Renderer *renderer, const struct dclock_virtual_opts *o)
{
	if (!(o->hz > 0) || o->drop_rate < 0 || o->drop_rate > 1 || o->jitter_ms < 0)
		return NULL;
	struct virtual_clock *v = xcalloc(1, sizeof *v);
	v->base.ops = &virtual_ops;
	v->base.period_ns = (int64_t)llround(1e9 / o->hz);
	v->base.simulated = true;
	v->r = renderer;
	v->o = *o;
	v->rng = gsl_rng_alloc(gsl_rng_mt19937);
	gsl_rng_set(v->rng, (unsigned long)o->seed);
	v->real0_ns = dclock_monotonic_ns();
	v->origin_ns = o->origin_ns ? o->origin_ns : v->real0_ns;
	v->base_ns = v->last_ns = v->origin_ns;
	return &v->base;
}

void dclock_destroy(struct dclock *c)
{
	if (c)
		c->ops->destroy(c);
}

const uint64_t *dclock_injected(const struct dclock *c, size_t *n)
{
	if (!c || !c->simulated) {
		*n = 0;
		return NULL;
	}
	const struct virtual_clock *v = (const struct virtual_clock *)c;
	*n = v->ninjected;
	return v->injected;
}
