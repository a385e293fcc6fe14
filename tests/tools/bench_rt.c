/* bench_rt — reaction-time error against the true press time, through the real trial loop:
 * N simulated presses at random moments (uniform over 150–650 ms after the onset, a real-valued
 * time in ns), answered either by the kernel-stamped source (evsrc reading struct input_event
 * records from a pipe, stamped as the kernel stamps them: the true time truncated to the
 * microsecond) or by the frame source (an SDL key event seen at the poll after the next flip).
 * Virtual display clock, headless, at the refresh rates given. Prints p50, p99 and max |error| in
 * ms per source and rate, and the per-frame loop work while the reader thread runs with a second
 * writer feeding it 1,000 key-ups per second (ignored events, so the answers stay the bench's).
 * Figures are printed, never asserted. Usage: bench_rt [PRESSES] [HZ...] */
#include <math.h>
#include <pthread.h>
#include <stdatomic.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include <SDL.h>
#include <gsl/gsl_rng.h>
#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>
#include <linux/input.h>

#include "dclock.h"
#include "display.h"
#include "evsrc.h"
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

static void report(const char *what, struct samples *s, const char *unit)
{
	gsl_sort(s->v, 1, s->n);
	printf("   %-30s p50 %8.4f %s  p99 %8.4f %s  max %8.4f %s  (%zu)\n", what,
	       gsl_stats_quantile_from_sorted_data(s->v, 1, s->n, 0.5), unit,
	       gsl_stats_quantile_from_sorted_data(s->v, 1, s->n, 0.99), unit, s->v[s->n - 1], unit,
	       s->n);
}

struct hookctx {
	struct dclock *c;
	bool kernel;
	int wfd;
	struct evsrc *src;
	int64_t onset_ns;
	double true_rt_ns;       /* the press, after the onset (real-valued) */
	int64_t press_ns;        /* onset + true_rt_ns, rounded down to the ns */
	bool sent;
	uint64_t downs;
};

static void wait_downs(struct hookctx *h)
{
	for (;;) {
		struct evsrc_stats st;
		evsrc_stats(h->src, &st);
		if (st.downs >= h->downs)
			return;
		struct timespec d = {0, 20000};
		nanosleep(&d, NULL);
	}
}

/* Before each flip: when the press falls between the last flip and this one, it happens now. */
static void hook(void *ctx, enum epoch e, int frame, bool stim)
{
	(void)stim;
	struct hookctx *h = ctx;
	int64_t last = dclock_now(h->c);
	if (e == EPOCH_RESPONSE && frame == 0)   /* one stimulus frame, no mask: the onset flip */
		h->onset_ns = last;
	if (!h->onset_ns || h->sent)
		return;
	h->press_ns = h->onset_ns + (int64_t)floor(h->true_rt_ns);
	if (h->press_ns >= last + h->c->period_ns)
		return;
	h->sent = true;
	if (h->kernel) {
		struct input_event ev;
		memset(&ev, 0, sizeof ev);
		int64_t us = h->press_ns / 1000;   /* the kernel's stamp: whole microseconds */
		ev.input_event_sec = (time_t)(us / 1000000);
		ev.input_event_usec = (suseconds_t)(us % 1000000);
		ev.type = EV_KEY;
		ev.code = KEY_F;
		ev.value = 1;
		if (write(h->wfd, &ev, sizeof ev) != (ssize_t)sizeof ev)
			abort();
		h->downs++;
		wait_downs(h);
	} else {
		SDL_Event ev;
		memset(&ev, 0, sizeof ev);
		ev.type = SDL_KEYDOWN;
		ev.key.keysym.sym = SDLK_f;
		SDL_PushEvent(&ev);
	}
}

static void on_work(void *ctx, int64_t ns)
{
	if (ctx)
		add(ctx, (double)ns / 1e3);
}

struct noise {
	int fd;
	atomic_int stop;
};

/* 1,000 key-ups a second into the reader (ignored by it, but read, decoded and counted). */
static void *noise_writer(void *arg)
{
	struct noise *n = arg;
	struct timespec next;
	clock_gettime(CLOCK_MONOTONIC, &next);
	while (!atomic_load(&n->stop)) {
		next.tv_nsec += 1000000;
		if (next.tv_nsec >= 1000000000) {
			next.tv_nsec -= 1000000000;
			next.tv_sec++;
		}
		clock_nanosleep(CLOCK_MONOTONIC, TIMER_ABSTIME, &next, NULL);
		struct input_event ev;
		memset(&ev, 0, sizeof ev);
		ev.type = EV_KEY;
		ev.code = KEY_Q;
		ev.value = 0;
		if (write(n->fd, &ev, sizeof ev) != (ssize_t)sizeof ev)
			break;
	}
	return NULL;
}

static int run(struct display *d, double hz, bool kernel, int presses, struct samples *err,
	       struct samples *work)
{
	struct dclock_virtual_opts vo = {.hz = hz, .seed = 1};
	struct dclock *c = dclock_virtual_new(display_renderer(d), &vo);
	const char *keys[] = {"f", "j"};
	struct hookctx h = {.c = c, .kernel = kernel, .wfd = -1};
	struct noise nz = {.fd = -1};
	pthread_t nth;
	struct responder *r;
	if (kernel) {
		int p[2];
		if (pipe(p))
			return -1;
		char e[300];
		h.src = evsrc_open_fd(p[0], "bench pipe", e, sizeof e);
		if (!h.src) {
			fprintf(stderr, "%s\n", e);
			return -1;
		}
		h.wfd = p[1];
		nz.fd = p[1];   /* writes of one record are atomic on a pipe: the two writers interleave whole records */
		pthread_create(&nth, NULL, noise_writer, &nz);
		r = responder_evdev_new(keys, 2, h.src);
	} else {
		r = responder_keyboard_new(keys, 2);
	}
	int resp_frames = (int)ceil(0.8 * hz);   /* 800 ms: every press falls inside */
	struct trialloop_config cfg = {
		.disp = d, .clock = c, .resp = r, .epoch_frames = {1, 0, 1, 0, resp_frames, 0, 1},
		.period_ns = c->period_ns, .stim_px = 64, .nchoices = 2, .on_frame = hook,
		.frame_ctx = &h, .on_work = on_work, .work_ctx = work,
	};
	struct trialloop *tl = trialloop_new(&cfg);
	gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
	gsl_rng_set(rng, kernel ? 11 : 12);
	for (int i = 0; i < presses; i++) {
		h.onset_ns = 0;
		h.sent = false;
		h.true_rt_ns = 150e6 + 500e6 * gsl_rng_uniform(rng);
		struct trialloop_trial t = {NULL, 0, false, 0, false};
		struct trial_record rec;
		memset(&rec, 0, sizeof rec);
		if (trialloop_run(tl, &t, &rec) != TRIALLOOP_DONE || !rec.has_rt) {
			fprintf(stderr, "trial %d: no answer\n", i);
			return -1;
		}
		add(err, fabs(rec.rt_ms - h.true_rt_ns / 1e6));
		trialloop_iti_finish(tl);
	}
	if (kernel) {
		atomic_store(&nz.stop, 1);
		pthread_join(nth, NULL);
	}
	gsl_rng_free(rng);
	trialloop_destroy(tl);
	responder_destroy(r);
	if (h.wfd >= 0)
		close(h.wfd);
	dclock_destroy(c);
	return 0;
}

int main(int argc, char **argv)
{
	int presses = argc > 1 ? atoi(argv[1]) : 10000;
	double rates[8] = {60, 144};
	int nrates = 2;
	if (argc > 2) {
		nrates = 0;
		for (int i = 2; i < argc && nrates < 8; i++)
			rates[nrates++] = atof(argv[i]);
	}
	setenv("SDL_VIDEODRIVER", "dummy", 0);
	char e[256];
	struct display_opts o = {.headless = true, .width_px = 320, .height_px = 240, .background = 128};
	struct display *d = display_open(&o, e, sizeof e);
	if (!d) {
		fprintf(stderr, "%s\n", e);
		return 1;
	}
	struct samples work = {0};
	for (int k = 0; k < nrates; k++) {
		printf("-- %g Hz (period %.3f ms), %d presses at random moments\n", rates[k],
		       1000.0 / rates[k], presses);
		struct samples ek = {0}, ef = {0};
		if (run(d, rates[k], true, presses, &ek, k == 0 ? &work : NULL) ||
		    run(d, rates[k], false, presses, &ef, NULL))
			return 1;
		report("kernel source |RT error|", &ek, "ms");
		report("frame source |RT error|", &ef, "ms");
		free(ek.v);
		free(ef.v);
	}
	printf("-- per-frame loop work with the reader thread running (1,000 events/s), target p99 < 50 µs\n");
	report("own loop work per frame", &work, "µs");
	free(work.v);
	display_close(d);
	return 0;
}
