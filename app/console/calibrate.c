/* calibrate — the console's luminance calibration: the same measurement as `tachist calibrate`
 * with the readings typed on the experimenter's terminal.
 *
 * Three phases on one screen. Settings: steps, channels, order, patch size, surround and where
 * the codes are shown. Measuring: the observer's display (a child process, run/lumshow.c) shows
 * each code of the plan (core/lum.c, shuffled unless ascending); the experimenter types the
 * photometer's reading, which is checked as it is typed (a number, not negative) and warned
 * about when it breaks the rise of the earlier readings. Result: each channel's fit (γ, L_min,
 * L_max, residual RMS and the residual of every reading); `s` writes it into the rig profile's
 * [luminance] section (io/rig_lum.c: atomic, every other line kept) and hands the path back to
 * the set-up form. Stopping or leaving before `s` writes nothing. */
#include "console.h"

#include <curses.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include "diag.h"
#include "lum.h"
#include "lumshow.h"
#include "rig_file.h"
#include "rig_lum.h"

enum phase { PH_SETTINGS, PH_MEASURE, PH_RESULT };
enum row { ROW_STEPS, ROW_CHANNELS, ROW_ORDER, ROW_PATCH, ROW_SURROUND, ROW_SHOW, ROW_COUNT };
enum show { SHOW_WINDOW, SHOW_FULL, SHOW_HEADLESS, SHOW_COUNT };

struct calib {
	enum phase phase;
	int row;
	struct console_field f[ROW_COUNT];   /* STEPS, PATCH, SURROUND are fields */
	bool all_channels, ascending;
	enum show show;
	char *rig_path;
	struct rig rig;
	void (*saved)(struct console *c, void *ud, const char *path);
	void *ud;
	/* measuring */
	struct lumshow *disp;
	int plan[LUM_NCHANNELS * 256][2];
	size_t nplan, k;
	struct console_field reading;
	int code[LUM_NCHANNELS][LUM_MAX_READINGS];
	double cd[LUM_NCHANNELS][LUM_MAX_READINGS];
	size_t n[LUM_NCHANNELS];
	/* result */
	struct lum_cal cal;
	char fit_error[300];
};

static const struct console_key settings_keys[] = {
	{"g", "start measuring"}, {"Enter", "edit"}, {"Up/Down", "move"},
	{"Left/Right", "choose"}, {"Esc", "back"},
};
static const struct console_key measure_keys[] = {
	{"Enter", "take the reading"}, {"Esc", "stop (nothing is written)"},
};
static const struct console_key result_keys[] = {
	{"s", "save into the rig profile"}, {"r", "measure again"}, {"Esc", "leave unsaved"},
};

static const char *const labels[ROW_COUNT] = {
	"Steps", "Channels", "Order", "Patch (deg)", "Surround", "Show on",
};
static const char *const show_names[SHOW_COUNT] = {
	"a window on the observer's display", "full screen on the observer's display",
	"no display (headless, for trying the screen)",
};

static void set_keys(struct console *c, const struct console_key *k, size_t n)
{
	struct console_screen *me = console_top(c);
	me->keys = k;
	me->nkeys = n;
}

static const char *arrow(struct console *c, bool left)
{
	return console_utf8(c) ? (left ? "\u25c2" : "\u25b8") : (left ? "<" : ">");
}

/* ---- drawing ---- */

static void draw_settings(struct console *c, struct calib *e, int y)
{
	int vx = 18, w = COLS - vx - 2;
	console_wrap(c, y, 2, COLS - 4, 2, CONSOLE_PLAIN,
		     "The observer's display shows grey codes one after another; type the "
		     "photometer's reading (cd/m2) for each. Dim the room as it will be for sessions.");
	y += 3;
	const char *msg = NULL;
	for (int row = 0; row < ROW_COUNT; row++, y++) {
		bool f = e->row == row;
		console_put(c, y, 0, 2, CONSOLE_HEAD, f ? arrow(c, false) : "");
		console_put(c, y, 2, vx - 2, f ? CONSOLE_HEAD : CONSOLE_DIM, labels[row]);
		char buf[120];
		const char *choice = NULL, *hint = NULL;
		switch (row) {
		case ROW_CHANNELS:
			choice = e->all_channels ? "grey, then red, green and blue apart" : "grey";
			break;
		case ROW_ORDER:
			choice = e->ascending ? "ascending" : "shuffled";
			break;
		case ROW_SHOW:
			choice = show_names[e->show];
			break;
		case ROW_STEPS:
			hint = "codes evenly spaced over 0-255 (17: every 16th)";
			break;
		case ROW_PATCH:
			hint = "0 = the whole screen";
			break;
		case ROW_SURROUND:
			hint = "grey code around the patch";
			break;
		}
		if (choice) {
			snprintf(buf, sizeof buf, "%s %s %s", arrow(c, true), choice, arrow(c, false));
			console_put(c, y, vx, w, f ? CONSOLE_PICK : CONSOLE_PLAIN, buf);
			continue;
		}
		struct console_field shown = e->f[row];
		if (shown.msg[0] && f)
			msg = e->f[row].msg;
		shown.msg[0] = '\0';
		console_field_draw(c, &shown, y, vx, 10, f);
		if (!f || !e->f[row].editing)
			console_put(c, y, vx + 12, w - 12, CONSOLE_DIM, hint);
	}
	if (msg)
		console_put(c, y++, vx, w, CONSOLE_BAD, msg);
	y++;
	console_putf(c, y++, 2, COLS - 4, CONSOLE_PLAIN, "Rig profile  %s", e->rig_path);
	console_put(c, y++, 2, COLS - 4, CONSOLE_DIM,
		    "the result goes into its [luminance] section with today's date when you save it");
}

/* The readings of channel CH so far, sorted by code, as "code: cd" cells. */
static void draw_readings(struct console *c, const struct calib *e, int ch, int y, int rows)
{
	int idx[LUM_MAX_READINGS];
	size_t n = e->n[ch];
	for (size_t i = 0; i < n; i++)
		idx[i] = (int)i;
	for (size_t i = 1; i < n; i++)
		for (size_t j = i; j > 0 && e->code[ch][idx[j - 1]] > e->code[ch][idx[j]]; j--) {
			int t = idx[j];
			idx[j] = idx[j - 1];
			idx[j - 1] = t;
		}
	int cellw = 18, per_row = (COLS - 4) / cellw;
	if (per_row < 1)
		per_row = 1;
	for (size_t i = 0; i < n; i++) {
		int r = (int)i / per_row, col = (int)i % per_row;
		if (r >= rows)
			break;
		console_putf(c, y + r, 2 + col * cellw, cellw, CONSOLE_PLAIN, "%3d: %-10g",
			     e->code[ch][idx[i]], e->cd[ch][idx[i]]);
	}
}

static void draw_measure(struct console *c, struct calib *e, int y)
{
	int ch = e->plan[e->k][0], code = e->plan[e->k][1];
	console_putf(c, y++, 2, COLS - 4, CONSOLE_HEAD, "Reading %zu of %zu: code %d, %s", e->k + 1,
		     e->nplan, code, lum_channel_name(ch));
	console_bar(c, y++, 2, COLS - 4 > 40 ? 40 : COLS - 4, (double)e->k / (double)e->nplan);
	y++;
	console_putf(c, y++, 2, COLS - 4, CONSOLE_PLAIN, "Point the photometer at the %s and type "
		     "its reading.", e->f[ROW_PATCH].len && atof(e->f[ROW_PATCH].text) > 0 ?
		     "patch in the centre" : "centre of the screen");
	y++;
	console_put(c, y, 2, 14, CONSOLE_HEAD, "cd/m2");
	console_field_draw(c, &e->reading, y++, 16, 14, true);
	if (e->reading.msg[0])
		console_put(c, y, 16, COLS - 18, CONSOLE_BAD, e->reading.msg);
	y += 2;
	for (int k = 0; k < LUM_NCHANNELS && y < console_body_top() + console_body_rows() - 2; k++) {
		if (!e->n[k])
			continue;
		console_putf(c, y++, 2, COLS - 4, CONSOLE_DIM, "%s so far (code: cd/m2)",
			     lum_channel_name(k));
		int rows = 3;
		draw_readings(c, e, k, y, rows);
		y += rows;
	}
}

static void draw_result(struct console *c, struct calib *e, int y)
{
	int bottom = console_body_top() + console_body_rows();
	if (e->fit_error[0]) {
		console_put(c, y++, 2, COLS - 4, CONSOLE_BAD, "The readings cannot be fitted:");
		console_wrap(c, y, 4, COLS - 6, 3, CONSOLE_BAD, e->fit_error);
		y += 4;
		console_put(c, y, 2, COLS - 4, CONSOLE_PLAIN,
			    "Nothing is written. r measures again; Esc leaves.");
		return;
	}
	for (int k = 0; k < LUM_NCHANNELS && y < bottom; k++) {
		const struct lum_curve *cv = &e->cal.ch[k];
		if (!cv->present)
			continue;
		double range = cv->l_max - cv->l_min;
		console_putf(c, y++, 2, COLS - 4, CONSOLE_HEAD, "%s: gamma %.3f, L_min %.3g cd/m2, "
			     "L_max %.4g cd/m2, residual RMS %.3g cd/m2 (%.1f%% of the range)",
			     lum_channel_name(k), cv->gamma, cv->l_min, cv->l_max, cv->rms,
			     range > 0 ? 100 * cv->rms / range : 0.0);
		if (lum_fit_is_poor(cv))
			console_put(c, y++, 4, COLS - 6, CONSOLE_WARN,
				    "the curve fits poorly (over 2% of the range): the measured table "
				    "will be used");
		int cellw = 26, per_row = (COLS - 6) / cellw;
		if (per_row < 1)
			per_row = 1;
		for (size_t i = 0; i < cv->n && y < bottom; i++) {
			int col = (int)i % per_row;
			double fit = lum_model_eval(cv, cv->code[i]);
			console_putf(c, y, 4 + col * cellw, cellw, CONSOLE_PLAIN, "%3d: %-8.4g %+8.3g",
				     cv->code[i], cv->cd[i], cv->cd[i] - fit);
			if (col == per_row - 1 || i + 1 == cv->n)
				y++;
		}
		y++;
	}
	if (y < bottom)
		console_put(c, y, 2, COLS - 4, CONSOLE_DIM,
			    "code: reading (cd/m2) and its residual from the fitted curve");
}

static void calib_draw(struct console *c, void *st)
{
	struct calib *e = st;
	int y = console_body_top();
	console_put(c, y, 2, COLS - 4, CONSOLE_HEAD, "Luminance of the observer's display");
	y += 2;
	if (e->phase == PH_SETTINGS)
		draw_settings(c, e, y);
	else if (e->phase == PH_MEASURE)
		draw_measure(c, e, y);
	else
		draw_result(c, e, y);
}

/* ---- measuring ---- */

static void stop_display(struct calib *e)
{
	lumshow_stop(e->disp);
	e->disp = NULL;
}

/* Shows the code of reading K; on failure goes back to the settings with the reason. */
static bool show_current(struct console *c, struct calib *e)
{
	char err[400];
	if (lumshow_show(e->disp, e->plan[e->k][0], e->plan[e->k][1], err, sizeof err) == 0)
		return true;
	stop_display(e);
	e->phase = PH_SETTINGS;
	set_keys(c, settings_keys, sizeof settings_keys / sizeof settings_keys[0]);
	console_say(c, CONSOLE_BAD, "measuring stopped: %s; the rig profile is not changed", err);
	return false;
}

static void start(struct console *c, struct calib *e)
{
	for (int row = 0; row < ROW_COUNT; row++) {
		struct console_field *f = &e->f[row];
		if ((row == ROW_STEPS || row == ROW_PATCH || row == ROW_SURROUND) &&
		    console_field_check(f, f->text, f->msg, sizeof f->msg) != 0) {
			e->row = row;
			return;
		}
	}
	bool ch[LUM_NCHANNELS] = {true, e->all_channels, e->all_channels, e->all_channels};
	unsigned long seed = (unsigned long)time(NULL) ^ ((unsigned long)getpid() << 16);
	e->nplan = lum_plan(atoi(e->f[ROW_STEPS].text), ch, e->ascending, seed, e->plan);
	if (!e->nplan) {
		console_say(c, CONSOLE_BAD, "no codes to show");
		return;
	}
	struct lumshow_opts o = {.headless = e->show == SHOW_HEADLESS,
				 .window = e->show == SHOW_WINDOW,
				 .patch_deg = atof(e->f[ROW_PATCH].text),
				 .surround = atoi(e->f[ROW_SURROUND].text)};
	char err[500];
	e->disp = lumshow_start(&e->rig, &o, err, sizeof err);
	if (!e->disp) {
		console_say(c, CONSOLE_BAD, "cannot open the observer's display: %s", err);
		return;
	}
	memset(e->n, 0, sizeof e->n);
	e->k = 0;
	e->phase = PH_MEASURE;
	set_keys(c, measure_keys, sizeof measure_keys / sizeof measure_keys[0]);
	console_field_init(&e->reading, "reading", CONSOLE_NUMBER, 12, "");
	e->reading.min = 0;
	e->reading.max = 1e6;
	console_field_begin(&e->reading);
	console_top(c)->editing = true;
	show_current(c, e);
}

static void fit(struct calib *e)
{
	memset(&e->cal, 0, sizeof e->cal);
	e->fit_error[0] = '\0';
	for (int k = 0; k < LUM_NCHANNELS; k++) {
		if (!e->n[k])
			continue;
		char err[256];
		if (lum_fit(e->code[k], e->cd[k], e->n[k], &e->cal.ch[k], NULL, err, sizeof err)) {
			snprintf(e->fit_error, sizeof e->fit_error, "%s: %s", lum_channel_name(k), err);
			return;
		}
	}
	time_t now = time(NULL);
	struct tm tm;
	gmtime_r(&now, &tm);   /* as `tachist calibrate` dates it: UTC */
	strftime(e->cal.measured, sizeof e->cal.measured, "%Y-%m-%d", &tm);
	e->cal.max_age_days = e->rig.lum ? e->rig.lum->max_age_days : 30;
	e->cal.model = e->rig.lum ? e->rig.lum->model : LUM_MODEL_AUTO;
}

/* Enter on the reading field: take it, or say why not. */
static void take_reading(struct console *c, struct calib *e)
{
	double cd;
	char msg[200];
	if (lum_reading_parse(e->reading.text, &cd, msg, sizeof msg)) {
		console_field_begin(&e->reading);
		snprintf(e->reading.msg, sizeof e->reading.msg, "%s", msg);
		return;
	}
	int ch = e->plan[e->k][0], code = e->plan[e->k][1], c2;
	double l2;
	if (lum_reading_out_of_order(e->code[ch], e->cd[ch], e->n[ch], code, cd, &c2, &l2))
		console_say(c, CONSOLE_WARN, "%g cd/m2 at code %d against %g at code %d: the light "
			    "should rise with the code (is the photometer still on the patch?)", cd,
			    code, l2, c2);
	e->code[ch][e->n[ch]] = code;
	e->cd[ch][e->n[ch]++] = cd;
	console_field_set(&e->reading, "");
	if (++e->k < e->nplan) {
		console_field_begin(&e->reading);
		show_current(c, e);
		return;
	}
	stop_display(e);
	console_top(c)->editing = false;
	fit(e);
	e->phase = PH_RESULT;
	set_keys(c, result_keys, sizeof result_keys / sizeof result_keys[0]);
}

static void save(struct console *c, struct calib *e)
{
	char err[600];
	if (rig_lum_write(e->rig_path, &e->cal, err, sizeof err)) {
		console_say(c, CONSOLE_BAD, "not saved: %s", err);
		return;
	}
	char *path = xstrdup(e->rig_path);
	void (*saved)(struct console *, void *, const char *) = e->saved;
	void *ud = e->ud;
	console_pop(c);
	if (saved)
		saved(c, ud, path);
	console_say(c, CONSOLE_OK, "luminance calibration saved to %s", path);
	free(path);
}

/* ---- keys ---- */

static bool settings_key(struct console *c, struct calib *e, int ch)
{
	struct console_field *f = &e->f[e->row];
	bool choice = e->row == ROW_CHANNELS || e->row == ROW_ORDER || e->row == ROW_SHOW;
	if (!choice && f->editing) {
		if (console_field_key(f, ch) != CONSOLE_FIELD_GOING)
			console_top(c)->editing = false;
		return true;
	}
	if (console_form_move(&e->row, ROW_COUNT, ch))
		return true;
	switch (ch) {
	case KEY_LEFT:
	case KEY_RIGHT:
		if (e->row == ROW_CHANNELS)
			e->all_channels = !e->all_channels;
		else if (e->row == ROW_ORDER)
			e->ascending = !e->ascending;
		else if (e->row == ROW_SHOW)
			e->show = (enum show)((e->show + SHOW_COUNT + (ch == KEY_RIGHT ? 1 : -1)) %
					      SHOW_COUNT);
		return true;
	case '\n':
	case '\r':
	case KEY_ENTER:
		if (choice)
			return settings_key(c, e, KEY_RIGHT);
		console_field_begin(f);
		console_top(c)->editing = true;
		return true;
	case 'g':
	case 'G':
		start(c, e);
		return true;
	case 27:
	case 'q':
		console_pop(c);
		return true;
	default:
		return false;
	}
}

static bool calib_key(struct console *c, void *st, int ch)
{
	struct calib *e = st;
	if (e->phase == PH_SETTINGS)
		return settings_key(c, e, ch);
	if (e->phase == PH_MEASURE) {
		if (ch == 27) {
			size_t k = e->k;
			stop_display(e);
			console_top(c)->editing = false;
			e->phase = PH_SETTINGS;
			set_keys(c, settings_keys, sizeof settings_keys / sizeof settings_keys[0]);
			console_say(c, CONSOLE_WARN, "measuring stopped after %zu of %zu readings; the "
				    "rig profile is not changed", k, e->nplan);
			return true;
		}
		if (ch == '\n' || ch == '\r' || ch == KEY_ENTER) {
			take_reading(c, e);
			return true;
		}
		console_field_key(&e->reading, ch);
		if (!e->reading.editing)
			console_field_begin(&e->reading);
		return true;
	}
	switch (ch) {
	case 's':
	case 'S':
		if (e->fit_error[0])
			console_say(c, CONSOLE_BAD, "nothing to save: the readings cannot be fitted");
		else
			save(c, e);
		return true;
	case 'r':
	case 'R':
		e->phase = PH_SETTINGS;
		set_keys(c, settings_keys, sizeof settings_keys / sizeof settings_keys[0]);
		return true;
	case 27:
	case 'q':
		console_pop(c);
		console_say(c, CONSOLE_WARN, "the calibration was not saved");
		return true;
	default:
		return false;
	}
}

static void calib_destroy(void *st)
{
	struct calib *e = st;
	stop_display(e);
	rig_clear(&e->rig);
	free(e->rig_path);
	free(e);
}

void console_calibrate_push(struct console *c, const char *rig_path, bool headless,
			    void (*saved)(struct console *c, void *ud, const char *path), void *ud)
{
	const struct console_options *o = console_options(c);
	if (!rig_path || !*rig_path || (o->rig_is_fallback && o->rig_path &&
					!strcmp(o->rig_path, rig_path))) {
		console_say(c, CONSOLE_WARN, "the rig is the demo's: save a rig profile of your own "
			    "first (e), then calibrate it");
		return;
	}
	struct calib *e = xcalloc(1, sizeof *e);
	struct diag_list d;
	diag_init(&d);
	if (rig_load(rig_path, &e->rig, &d) != 0) {
		char msg[400] = "cannot read the rig profile";
		for (size_t i = 0; i < d.n; i++)
			if (d.v[i].level == DIAG_ERROR) {
				diag_format(&d.v[i], msg, sizeof msg);
				break;
			}
		console_say(c, CONSOLE_BAD, "%s", msg);
		diag_clear(&d);
		rig_clear(&e->rig);
		free(e);
		return;
	}
	diag_clear(&d);
	e->rig_path = xstrdup(rig_path);
	e->saved = saved;
	e->ud = ud;
	e->show = headless ? SHOW_HEADLESS : SHOW_FULL;
	console_field_init(&e->f[ROW_STEPS], "steps", CONSOLE_INTEGER, 3, "17");
	e->f[ROW_STEPS].min = 3;
	e->f[ROW_STEPS].max = 256;
	console_field_init(&e->f[ROW_PATCH], "patch", CONSOLE_NUMBER, 6, "0");
	e->f[ROW_PATCH].min = 0;
	e->f[ROW_PATCH].max = 180;
	console_field_init(&e->f[ROW_SURROUND], "surround", CONSOLE_INTEGER, 3, "0");
	e->f[ROW_SURROUND].min = 0;
	e->f[ROW_SURROUND].max = 255;
	struct console_screen s = {
		.title = "luminance",
		.keys = settings_keys,
		.nkeys = sizeof settings_keys / sizeof settings_keys[0],
		.draw = calib_draw,
		.key = calib_key,
		.destroy = calib_destroy,
		.st = e,
	};
	console_push(c, &s);
}
