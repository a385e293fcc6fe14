/* bench_frameloop — per-frame work of our own trial loop (responder polling, flip bookkeeping,
 * epoch logic), excluding the renderer's drawing and present, under the virtual clock with a
 * headless 640×480 display and the model observer. Prints p50, p99 and max in µs over every frame
 * of N trials, and the same figures for the draw+present of those frames as a side-by-side
 * reference. Usage: bench_frameloop [TRIALS] */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>

#include "dclock.h"
#include "display.h"
#include "observer.h"
#include "responder.h"
#include "trialloop.h"

struct samples {
	double *v;
	size_t n, cap;
};

static void add(struct samples *s, double x)
{
	if (s->n == s->cap) {
		s->cap = s->cap ? 2 * s->cap : 4096;
		s->v = realloc(s->v, s->cap * sizeof *s->v);
		if (!s->v)
			abort();
	}
	s->v[s->n++] = x;
}

static void on_work(void *ctx, int64_t ns)
{
	add(ctx, (double)ns / 1e3);
}

static void report(const char *what, struct samples *s)
{
	gsl_sort(s->v, 1, s->n);
	printf("   %-34s p50 %7.2f µs  p99 %7.2f µs  max %8.2f µs  (%zu frames)\n", what,
	       gsl_stats_quantile_from_sorted_data(s->v, 1, s->n, 0.5),
	       gsl_stats_quantile_from_sorted_data(s->v, 1, s->n, 0.99), s->v[s->n - 1], s->n);
}

int main(int argc, char **argv)
{
	int trials = argc > 1 ? atoi(argv[1]) : 200;
	setenv("SDL_VIDEODRIVER", "dummy", 0);
	char err[256];
	struct display_opts o = {.headless = true, .width_px = 640, .height_px = 480, .background = 128};
	struct display *d = display_open(&o, err, sizeof err);
	if (!d) {
		fprintf(stderr, "%s\n", err);
		return 1;
	}
	struct dclock_virtual_opts vo = {.hz = 60, .seed = 1};
	struct dclock *c = dclock_virtual_new(display_renderer(d), &vo);
	struct observer_spec spec;
	observer_parse("model:rt=500,seed=5", &spec, err, sizeof err);
	struct responder *r = responder_model_new(&spec);
	uint8_t *px = calloc(128 * 128 * 4, 1);
	for (int i = 0; i < 128 * 128; i++)
		px[4 * i] = (uint8_t)i, px[4 * i + 3] = 255;
	struct SDL_Texture *tex = display_texture_rgba(d, 128, 128, px, false, err, sizeof err);
	free(px);
	struct samples work = {0}, total = {0};
	struct trialloop_config cfg = {
		.disp = d, .clock = c, .resp = r, .epoch_frames = {30, 12, 12, 6, 180, 30, 30},
		.period_ns = c->period_ns, .stim_px = 160, .fixation_px = 12, .marker_corner = 1,
		.marker_px = 20, .nchoices = 4, .on_work = on_work, .work_ctx = &work,
	};
	struct trialloop *tl = trialloop_new(&cfg);
	int64_t last = dclock_monotonic_ns();
	uint64_t flips0 = c->nflips;
	for (int i = 0; i < trials; i++) {
		struct trialloop_trial t = {tex, i % 4, true, 1.0, true};
		struct trial_record rec;
		memset(&rec, 0, sizeof rec);
		trialloop_run(tl, &t, &rec);
		trialloop_iti_finish(tl);
	}
	int64_t elapsed = dclock_monotonic_ns() - last;
	double per_frame = (double)elapsed / 1e3 / (double)(c->nflips - flips0);
	add(&total, per_frame);
	printf("   %d trials, %llu flips\n", trials, (unsigned long long)(c->nflips - flips0));
	report("own loop work per frame", &work);
	printf("   %-34s mean %6.2f µs (software renderer, 640×480)\n",
	       "whole frame incl. draw and present", per_frame);
	free(work.v);
	free(total.v);
	trialloop_destroy(tl);
	display_texture_free(tex);
	responder_destroy(r);
	dclock_destroy(c);
	display_close(d);
	return 0;
}
