/* test_text — text on the observer's display (SDL2_ttf, fontconfig), headless with SDL's dummy
 * driver: the capital height in pixels equals the requested visual angle on two rigs, UTF-8 lines
 * are drawn, and the trial loop draws the key legend in the response epoch only, outside the
 * stimulus rectangle. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cmocka.h>

#include "dclock.h"
#include "display.h"
#include "observer.h"
#include "responder.h"
#include "text.h"
#include "trialloop.h"

#define BG 128
/* Text is drawn in grey 20 on grey 128: a pixel is ink when darker than the midpoint, 74. */
static bool ink(const uint8_t *p) { return p[0] < 74; }

static struct display *open_display(int w, int h)
{
	struct display_opts o = {.headless = true, .width_px = w, .height_px = h, .background = BG};
	char err[256];
	struct display *d = display_open(&o, err, sizeof err);
	if (!d)
		printf("# %s\n", err);
	assert_non_null(d);
	return d;
}

/* Rows of the output holding ink, from the first to the last (0 when none). */
static int ink_rows(struct display *d, int *first)
{
	int w, h;
	uint8_t *px = display_read_pixels(d, &w, &h);
	assert_non_null(px);
	int y0 = -1, y1 = -1;
	for (int y = 0; y < h; y++)
		for (int x = 0; x < w; x++)
			if (ink(px + ((size_t)y * w + x) * 4)) {
				if (y0 < 0)
					y0 = y;
				y1 = y;
				break;
			}
	free(px);
	if (first)
		*first = y0;
	return y0 < 0 ? 0 : y1 - y0 + 1;
}

/* A capital H of text_deg degrees is s = 2·d·tan(θ/2) cm high (the visual angle of an object of
 * size s at distance d is θ = 2·atan(s / 2d)), times the rig's px per cm. Checked on a 57 cm
 * 1920 px / 53 cm rig and a 100 cm 1280 px / 34 cm rig; the drawn H spans that many rows, within
 * one row for the antialiased edge. The expected values are computed here, not by geom.c. */
static void text_testCapHeightInDegrees(void **state)
{
	(void)state;
	const struct {
		double distance_cm, width_cm;
		int width_px, height_px;
		double deg;
	} rigs[] = {{57, 53, 1920, 1080, 0.5}, {100, 34, 1280, 1024, 0.8}};
	for (size_t i = 0; i < 2; i++) {
		double pi = acos(-1.0);
		double cm = 2 * rigs[i].distance_cm * tan(rigs[i].deg / 2 * pi / 180);
		int want = (int)lround(cm * rigs[i].width_px / rigs[i].width_cm);
		struct display *d = open_display(rigs[i].width_px, rigs[i].height_px);
		char err[256];
		assert_int_equal(display_set_text(d, NULL, want, err, sizeof err), 0);
		display_clear(d);
		const char *line[] = {"HHHH"};
		assert_int_equal(display_draw_lines(d, line, 1, rigs[i].width_px / 2, 100, NULL), 0);
		int rows = ink_rows(d, NULL);
		printf("# rig %zu: %.1f° at %.0f cm = %.4f cm = %d px expected, H drawn %d rows high\n",
		       i + 1, rigs[i].deg, rigs[i].distance_cm, cm, want, rows);
		assert_true(abs(rows - want) <= 1);
		display_close(d);
	}
}

/* UTF-8 text (accents, a dash, CJK-free so DejaVu Sans covers it) renders: ink appears, and a
 * line that is not UTF-8 text does not crash the renderer. */
static void text_testUtf8(void **state)
{
	(void)state;
	struct display *d = open_display(640, 480);
	display_clear(d);
	const char *lines[] = {"Grüße — naïve café", "", "Ü"};
	assert_int_equal(display_draw_text(d, lines, 3), 0);
	assert_true(ink_rows(d, NULL) > 10);
	display_clear(d);
	const char *bad[] = {"\xff\xfe broken"};
	display_draw_text(d, bad, 1);   /* may fail, must not crash */
	display_close(d);
}

struct legend_watch {
	struct display *d;
	int stim_px;
	int legend_frames, legend_inside, other_ink;
};

/* Counts ink: in the response epoch the legend's (none inside the centred stimulus rectangle);
 * in every other epoch there must be none below the stimulus rectangle. */
static void legend_hook(void *ctx, enum epoch e, int frame, bool stim)
{
	(void)frame;
	(void)stim;
	struct legend_watch *lw = ctx;
	int w, h;
	uint8_t *px = display_read_pixels(lw->d, &w, &h);
	assert_non_null(px);
	int sx0 = (w - lw->stim_px) / 2, sy0 = (h - lw->stim_px) / 2;
	long in = 0, below = 0;
	for (int y = 0; y < h; y++)
		for (int x = 0; x < w; x++) {
			if (!ink(px + ((size_t)y * w + x) * 4))
				continue;
			bool inside = x >= sx0 && x < sx0 + lw->stim_px && y >= sy0 && y < sy0 + lw->stim_px;
			in += inside;
			below += y >= sy0 + lw->stim_px;
		}
	if (e == EPOCH_RESPONSE) {
		lw->legend_frames += below > 0;
		lw->legend_inside += in > 0;
	} else if (below > 0) {
		lw->other_ink++;
	}
	free(px);
}

static void text_testLegendOnlyInResponse(void **state)
{
	(void)state;
	struct display *d = open_display(800, 600);
	struct dclock_virtual_opts vo = {.hz = 60, .seed = 1};
	struct dclock *c = dclock_virtual_new(display_renderer(d), &vo);
	struct observer_spec spec;
	char err[256];
	/* The model answers after about 2 s, so the response epoch lasts several frames. */
	assert_int_equal(observer_parse("model:rt=2000,seed=3", &spec, err, sizeof err), 0);
	struct responder *r = responder_model_new(&spec);
	char errbuf[256];
	assert_int_equal(display_set_text(d, NULL, 14, errbuf, sizeof errbuf), 0);
	const char *legend[] = {"ring S     bar D     cross F"};
	struct legend_watch lw = {d, 200, 0, 0, 0};
	struct trialloop_config cfg = {
		.disp = d, .clock = c, .resp = r, .epoch_frames = {3, 2, 6, 4, 0, 2, 5},
		.period_ns = c->period_ns, .stim_px = 200, .fixation_px = 0, .nchoices = 3,
		.legend = legend, .nlegend = 1, .legend_y = 300 + 100 + 14,
		.on_frame = legend_hook, .frame_ctx = &lw,
	};
	struct trialloop *tl = trialloop_new(&cfg);
	uint8_t px[4 * 50 * 50];
	memset(px, 0, sizeof px);   /* a black stimulus: ink, but inside the rectangle */
	for (size_t i = 3; i < sizeof px; i += 4)
		px[i] = 255;
	struct SDL_Texture *tex = display_texture_rgba(d, 50, 50, px, true, err, sizeof err);
	struct trialloop_trial t = {tex, 0, true, 1.0, false};
	struct trial_record rec;
	memset(&rec, 0, sizeof rec);
	assert_int_equal(trialloop_run(tl, &t, &rec), TRIALLOOP_DONE);
	trialloop_iti_finish(tl);
	printf("# legend in %d response frames, inside the stimulus in %d, other frames with ink "
	       "below the stimulus %d\n", lw.legend_frames, lw.legend_inside, lw.other_ink);
	assert_true(lw.legend_frames > 0);
	assert_int_equal(lw.legend_inside, 0);
	assert_int_equal(lw.other_ink, 0);
	trialloop_destroy(tl);
	display_texture_free(tex);
	responder_destroy(r);
	dclock_destroy(c);
	display_close(d);
}

int main(void)
{
	setenv("SDL_VIDEODRIVER", "dummy", 1);
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(text_testCapHeightInDegrees),
		cmocka_unit_test(text_testUtf8),
		cmocka_unit_test(text_testLegendOnlyInResponse),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
