/* test_trialloop — the frame-locked trial under the virtual clock, headless (SDL dummy driver):
 * exact exposures, injected drops flagged exactly where they hit the stimulus epochs, RT
 * arithmetic from scripted key events, screenshots of the stimulus and the photodiode marker,
 * Escape abandoning a trial. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cmocka.h>

#include <SDL.h>

#include "dclock.h"
#include "display.h"
#include "geom.h"
#include "observer.h"
#include "responder.h"
#include "rig.h"
#include "trialloop.h"

#define W 800
#define H 600

struct fixture {
	struct display *d;
	struct dclock *c;
	struct responder *r;
	struct trialloop *tl;
	struct SDL_Texture *tex, *mask;
	struct trialloop_config cfg;
};

static struct SDL_Texture *solid(struct display *d, int w, int h, uint8_t r, uint8_t g, uint8_t b)
{
	uint8_t *px = malloc((size_t)w * h * 4);
	for (int i = 0; i < w * h; i++) {
		px[4 * i] = r;
		px[4 * i + 1] = g;
		px[4 * i + 2] = b;
		px[4 * i + 3] = 255;
	}
	char err[200];
	struct SDL_Texture *t = display_texture_rgba(d, w, h, px, true, err, sizeof err);
	free(px);
	return t;
}

/* Epochs at 60 Hz: fixation 3, blank 2, stimulus 6, mask 4, response 30, feedback 2, ITI 5. */
static void setup_fx(struct fixture *f, double drop_rate, bool keyboard, int marker)
{
	memset(f, 0, sizeof *f);
	struct display_opts o = {.headless = true, .width_px = W, .height_px = H, .background = 128};
	char err[256];
	f->d = display_open(&o, err, sizeof err);
	assert_non_null(f->d);
	struct dclock_virtual_opts vo = {.hz = 60, .drop_rate = drop_rate, .seed = 99};
	f->c = dclock_virtual_new(display_renderer(f->d), &vo);
	if (keyboard) {
		const char *keys[] = {"f", "j"};
		f->r = responder_keyboard_new(keys, 2);
	} else {
		struct observer_spec s;
		assert_int_equal(observer_parse("model:rt=200,seed=3", &s, err, sizeof err), 0);
		f->r = responder_model_new(&s);
	}
	f->tex = solid(f->d, 100, 100, 255, 0, 0);
	f->mask = solid(f->d, 100, 100, 0, 0, 255);
	struct trialloop_config c = {
		.disp = f->d, .clock = f->c, .resp = f->r, .epoch_frames = {3, 2, 6, 4, 30, 2, 5},
		.period_ns = f->c->period_ns, .stim_px = 200, .fixation_px = 20,
		.marker_corner = marker, .marker_px = 30, .nchoices = 2, .mask = f->mask,
	};
	f->cfg = c;
	f->tl = trialloop_new(&c);
}

static void teardown_fx(struct fixture *f)
{
	trialloop_destroy(f->tl);
	display_texture_free(f->tex);
	display_texture_free(f->mask);
	responder_destroy(f->r);
	dclock_destroy(f->c);
	display_close(f->d);
}

/* Without drops every trial shows exactly the planned 6 frames, offset − onset = 6 periods, and
 * timing is ok; the model answers within the response window. */
static void trialloop_testExactFrames(void **state)
{
	(void)state;
	struct fixture f;
	setup_fx(&f, 0, false, 0);
	for (int i = 0; i < 40; i++) {
		struct trialloop_trial t = {f.tex, i % 2, true, 1.0, true};
		struct trial_record rec;
		memset(&rec, 0, sizeof rec);
		assert_int_equal(trialloop_run(f.tl, &t, &rec), TRIALLOOP_DONE);
		assert_int_equal(rec.frames_planned, 6);
		assert_int_equal(rec.frames_actual, 6);
		assert_int_equal(rec.offset_ns - rec.onset_ns, 6 * f.c->period_ns);
		assert_int_equal(rec.onset_ns - rec.start_ns, 5 * f.c->period_ns);
		assert_true(rec.timing_ok);
		assert_int_equal(rec.dropped_frames, 0);
		assert_true(rec.response >= 0);
		assert_false(rec.timed_out);
		assert_int_equal(trialloop_iti_finish(f.tl), TRIALLOOP_DONE);
	}
	teardown_fx(&f);
}

/* With drops injected at 4% of flips, a trial is flagged exactly when an injected late flip falls
 * on a stimulus or mask frame interval (flip indices onset+1 .. end of mask), and its dropped
 * count equals the drops injected anywhere in its flips. */
static void trialloop_testDropsFlaggedWhereInjected(void **state)
{
	(void)state;
	struct fixture f;
	setup_fx(&f, 0.04, false, 0);
	int flagged = 0, dropped_elsewhere = 0;
	const size_t i_on = 5, i_end = 5 + 6 + 4;
	for (int i = 0; i < 300; i++) {
		uint64_t base = f.c->nflips;
		struct trialloop_trial t = {f.tex, i % 2, true, 1.0, false};
		struct trial_record rec;
		memset(&rec, 0, sizeof rec);
		assert_int_equal(trialloop_run(f.tl, &t, &rec), TRIALLOOP_DONE);
		size_t n;
		const uint64_t *inj = dclock_injected(f.c, &n);
		bool expect_flag = false;
		int in_trial = 0;
		for (size_t k = 0; k < n; k++) {
			if (inj[k] <= base + 1 || inj[k] > base + rec.nflips)
				continue;   /* the first flip's interval belongs to the ITI before */
			size_t idx = (size_t)(inj[k] - base - 1);   /* late flip's index in the trial */
			in_trial++;
			if (idx > i_on && idx <= i_end)
				expect_flag = true;
		}
		assert_int_equal(!rec.timing_ok, expect_flag);
		assert_int_equal(rec.dropped_frames, in_trial);
		if (expect_flag) {
			flagged++;
			/* A drop on a stimulus frame lengthens the exposure; on a mask frame it does not. */
		} else if (in_trial) {
			dropped_elsewhere++;
		}
		trialloop_iti_finish(f.tl);
	}
	printf("# %d trials flagged, %d with drops outside the stimulus epochs\n", flagged,
	       dropped_elsewhere);
	assert_true(flagged > 10);
	assert_true(dropped_elsewhere > 10);
	teardown_fx(&f);
}

/* Scripted key events: pushed before a known flip, polled right after it, so the RT is exactly
 * the frames between the onset and that flip times the period. */
struct script {
	int fire_epoch, fire_frame;
	const char *key;
	SDL_Keycode sym;
	int fired;
	struct script *next;
};

static void push_key(SDL_Keycode sym)
{
	SDL_Event ev;
	memset(&ev, 0, sizeof ev);
	ev.type = SDL_KEYDOWN;
	ev.key.keysym.sym = sym;
	ev.key.state = SDL_PRESSED;
	SDL_PushEvent(&ev);
}

static void script_hook(void *ctx, enum epoch e, int frame, bool stim)
{
	(void)stim;
	for (struct script *s = ctx; s; s = s->next)
		if (!s->fired && (int)e == s->fire_epoch && frame == s->fire_frame) {
			push_key(s->sym);
			s->fired = 1;
		}
}

static void trialloop_testRtFromScriptedKeys(void **state)
{
	(void)state;
	struct fixture f;
	setup_fx(&f, 0, true, 0);
	trialloop_destroy(f.tl);
	/* Response at response-epoch frame 7: 6 stimulus + 4 mask + 7 frames after the onset flip,
	 * plus the poll after that flip = onset + 17 periods. A 'j' during fixation is an
	 * anticipation; 'x' in the mask is ignored and logged; a second 'f' after the answer too. */
	struct script answer2 = {EPOCH_FEEDBACK, 0, "f", SDLK_f, 0, NULL};
	struct script answer = {EPOCH_RESPONSE, 7, "j", SDLK_j, 0, &answer2};
	struct script other = {EPOCH_MASK, 1, "x", SDLK_x, 0, &answer};
	struct script early = {EPOCH_FIXATION, 1, "j", SDLK_j, 0, &other};
	f.cfg.on_frame = script_hook;
	f.cfg.frame_ctx = &early;
	f.tl = trialloop_new(&f.cfg);
	struct trialloop_trial t = {f.tex, 1, false, 0, true};
	struct trial_record rec;
	memset(&rec, 0, sizeof rec);
	assert_int_equal(trialloop_run(f.tl, &t, &rec), TRIALLOOP_DONE);
	assert_int_equal(rec.response, 1);
	assert_string_equal(rec.response_key, "j");
	assert_int_equal(rec.correct, 1);
	assert_true(rec.anticipation);
	assert_true(rec.has_rt);
	assert_float_equal(rec.rt_ms, (double)(17 * f.c->period_ns) / 1e6, 0);
	size_t n;
	const struct trialloop_key *ig = trialloop_ignored(f.tl, &n);
	assert_int_equal(n, 3);
	assert_true(ig[0].anticipation);
	assert_string_equal(ig[1].key, "x");
	assert_float_equal(ig[1].t_ms, (double)(7 * f.c->period_ns) / 1e6, 0);
	assert_string_equal(ig[2].key, "f");
	/* No key: the 30-frame window times out. */
	trialloop_iti_finish(f.tl);
	struct trial_record rec2;
	memset(&rec2, 0, sizeof rec2);
	f.cfg.on_frame = NULL;
	assert_int_equal(trialloop_run(f.tl, &t, &rec2), TRIALLOOP_DONE);
	assert_true(rec2.timed_out);
	assert_int_equal(rec2.response, -1);
	assert_int_equal(rec2.correct, -1);
	teardown_fx(&f);
}

/* Escape in the stimulus epoch abandons the trial at once. */
static void trialloop_testEscapeAbandons(void **state)
{
	(void)state;
	struct fixture f;
	setup_fx(&f, 0, true, 0);
	trialloop_destroy(f.tl);
	struct script esc = {EPOCH_STIMULUS, 2, "escape", SDLK_ESCAPE, 0, NULL};
	f.cfg.on_frame = script_hook;
	f.cfg.frame_ctx = &esc;
	f.tl = trialloop_new(&f.cfg);
	struct trialloop_trial t = {f.tex, 0, false, 0, false};
	struct trial_record rec;
	memset(&rec, 0, sizeof rec);
	assert_int_equal(trialloop_run(f.tl, &t, &rec), TRIALLOOP_PAUSE);
	teardown_fx(&f);
}

/* Screenshots: the stimulus covers exactly the calibrated pixel count, centred; the photodiode
 * marker is white on stimulus frames only. */
struct shots {
	struct display *d;
	int long_px;
	int stim_frames, other_frames, bad;
};

static void shot_hook(void *ctx, enum epoch e, int frame, bool stim)
{
	(void)frame;
	struct shots *s = ctx;
	int w, h;
	uint8_t *px = display_read_pixels(s->d, &w, &h);
	assert_non_null(px);
	long red = 0;
	int x0 = w, y0 = h, x1 = -1, y1 = -1;
	for (int y = 0; y < h; y++)
		for (int x = 0; x < w; x++) {
			const uint8_t *p = px + ((size_t)y * w + x) * 4;
			if (p[0] == 255 && p[1] == 0 && p[2] == 0) {
				red++;
				if (x < x0) x0 = x;
				if (x > x1) x1 = x;
				if (y < y0) y0 = y;
				if (y > y1) y1 = y;
			}
		}
	/* Marker: top-left 30 px patch (rig corner 1). */
	const uint8_t *m = px + ((size_t)5 * w + 5) * 4;
	bool white = m[0] == 255 && m[1] == 255 && m[2] == 255;
	bool black = m[0] == 0 && m[1] == 0 && m[2] == 0;
	if (stim) {
		s->stim_frames++;
		if (red != (long)s->long_px * s->long_px || !white)
			s->bad++;
		/* Centred: margins left/right and top/bottom equal, or one pixel apart when the
		 * screen and the stimulus differ in parity. */
		if (abs(x0 - (w - 1 - x1)) > 1 || abs(y0 - (h - 1 - y1)) > 1)
			s->bad++;
		if (s->bad)
			printf("# red %ld of %d, box %d..%d × %d..%d, marker %d %d %d\n", red,
			       s->long_px * s->long_px, x0, x1, y0, y1, m[0], m[1], m[2]);
	} else {
		s->other_frames++;
		if (red != 0 || !black)
			s->bad++;
	}
	(void)e;
	free(px);
}

static void trialloop_testScreenshots(void **state)
{
	(void)state;
	struct fixture f;
	setup_fx(&f, 0, false, 1);
	trialloop_destroy(f.tl);
	/* An 8° stimulus on a 40 cm, 800 px wide screen at 57 cm: geom gives the calibrated size. */
	struct rig r = {.width_cm = 40, .height_cm = 30, .width_px = W, .height_px = H,
			.distance_cm = 57, .refresh_hz = 60};
	double actual;
	int long_px = geom_deg_to_px(&r, 8.0, &actual);
	assert_true(long_px > 100 && long_px < H);
	struct shots s = {f.d, long_px, 0, 0, 0};
	f.cfg.stim_px = long_px;
	f.cfg.on_frame = shot_hook;
	f.cfg.frame_ctx = &s;
	f.tl = trialloop_new(&f.cfg);
	struct trialloop_trial t = {f.tex, 0, true, 1.0, true};
	struct trial_record rec;
	memset(&rec, 0, sizeof rec);
	assert_int_equal(trialloop_run(f.tl, &t, &rec), TRIALLOOP_DONE);
	trialloop_iti_finish(f.tl);
	printf("# %d stimulus frames, %d other frames, stimulus %d px\n", s.stim_frames,
	       s.other_frames, long_px);
	assert_int_equal(s.stim_frames, 6);
	assert_true(s.other_frames >= 3 + 2 + 4 + 1);
	assert_int_equal(s.bad, 0);
	teardown_fx(&f);
}

int main(void)
{
	setenv("SDL_VIDEODRIVER", "dummy", 1);
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(trialloop_testExactFrames),
		cmocka_unit_test(trialloop_testDropsFlaggedWhereInjected),
		cmocka_unit_test(trialloop_testRtFromScriptedKeys),
		cmocka_unit_test(trialloop_testEscapeAbandons),
		cmocka_unit_test(trialloop_testScreenshots),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
