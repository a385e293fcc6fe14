/* results — one session's results in four views: accuracy with 95% intervals per condition (with
 * the interval drawn on a 0-100% scale), the psychometric curve drawn in terminal characters
 * (data points, their intervals, the fitted function and its threshold), the confusion matrix as a
 * shaded grid, and timing quality. The numbers come from the analysis module (the same tables as
 * `tachist report`) over the session's stored trials; practice trials are left out as there.
 * The curve's fit is the analysis module's (the same shapes and rules as `tachist report`, rising
 * or falling with the level), run without the bootstrap so the screen opens at once; `tachist
 * report` gives the intervals. */
#include "console.h"

#include <curses.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "analysis.h"
#include "diag.h"
#include "psyfn.h"
#include "store.h"

enum view { VIEW_ACCURACY, VIEW_CURVE, VIEW_CONFUSION, VIEW_TIMING, VIEW_COUNT };

struct results {
	char session_id[37];
	struct store_session ss;
	struct store_trial *trials;
	size_t ntrials;
	struct analysis_row *rows;
	struct analysis_session asess;
	struct analysis *a;
	char **choices;
	size_t nchoices;
	char error[300];
	enum view view;
	size_t top;          /* accuracy: first row shown */
	size_t series;       /* curve: which series */
	size_t level;        /* confusion: which level */
};

static const struct console_key results_keys[] = {
	{"Tab", "next view"},
	{"1-4", "view"},
	{"Left/Right", "series or level"},
	{"Up/Down", "scroll"},
	{"x", "export"},
	{"f", "forecast"},
};

static const char *const view_names[VIEW_COUNT] = {"accuracy", "curve", "confusions", "timing"};

static int load_session(struct console *c, struct results *r)
{
	struct store *db = NULL;
	char *err = NULL;
	struct store_iter *it = NULL;
	int rc = -1;
	if (store_open_existing(console_options(c)->db_path, &db, &err) != 0)
		goto out;
	if (store_session_get(db, r->session_id, &r->ss, &err) != 0)
		goto out;
	if (store_trials_load(db, r->ss.id, &r->trials, &r->ntrials, &err) != 0)
		goto out;
	if (store_iter_open(db, r->ss.id, NULL, &it, &err) != 0)
		goto out;
	size_t n = 0;
	const char *const *ch = store_iter_choices(it, 0, &n);
	r->choices = xcalloc(n ? n : 1, sizeof *r->choices);
	for (size_t i = 0; i < n; i++)
		r->choices[i] = xstrdup(ch[i]);
	r->nchoices = n;
	rc = 0;
out:
	if (rc != 0)
		snprintf(r->error, sizeof r->error, "%s", err ? err : "the session cannot be read");
	store_iter_close(it);
	store_close(db);
	free(err);
	return rc;
}

static void analyse(struct results *r)
{
	if (!r->ntrials)
		return;
	r->rows = xcalloc(r->ntrials, sizeof *r->rows);
	for (size_t i = 0; i < r->ntrials; i++) {
		const struct store_trial *t = &r->trials[i];
		struct analysis_row *w = &r->rows[i];
		w->session = r->ss.id;
		w->subject = r->ss.subject;
		w->block = t->block;
		w->block_name = t->block_name;
		w->practice = t->practice;
		w->group = "";
		w->image = t->image;
		w->category = t->category;
		w->response = t->response_category;
		w->has_level = t->has_level;
		w->level = t->level;
		w->correct = t->correct;
		w->timed_out = t->timed_out;
		w->anticipation = t->anticipation;
		w->has_rt = t->has_rt;
		w->rt_ms = t->rt_ms;
		w->frames_planned = t->frames_planned;
		w->frames_actual = t->frames_actual;
		w->dropped_frames = t->dropped_frames;
		w->timing_ok = t->timing_ok;
	}
	r->asess.id = r->ss.id;
	r->asess.subject = r->ss.subject;
	r->asess.timing_mode = r->ss.timing_mode;
	r->asess.refresh_hz = r->ss.refresh_hz;
	int m = r->nchoices >= 2 ? (int)r->nchoices : 2;
	struct analysis_opts o;
	analysis_opts_default(&o, m);
	o.fit_opts.nboot = 0;   /* the curve view shows the point fit; no bootstrap wait here */
	o.shape_auto = true;    /* as `tachist report`: Weibull rising, logistic falling */
	r->a = analysis_run(r->rows, r->ntrials, &r->asess, 1, &o);
}

/* ---- accuracy ---- */

static void draw_interval(struct console *c, int y, int x, int w, double lo, double pc, double hi)
{
	bool u = console_utf8(c);
	for (int i = 0; i < w; i++)
		console_put(c, y, x + i, 1, CONSOLE_DIM, u ? "\u00b7" : ".");
	int a = (int)lround(lo * (w - 1)), b = (int)lround(hi * (w - 1)),
	    p = (int)lround(pc * (w - 1));
	for (int i = a; i <= b; i++)
		console_put(c, y, x + i, 1, CONSOLE_OK, u ? "\u2500" : "-");
	console_put(c, y, x + a, 1, CONSOLE_OK, u ? "\u251c" : "[");
	console_put(c, y, x + b, 1, CONSOLE_OK, u ? "\u2524" : "]");
	console_put(c, y, x + p, 1, CONSOLE_HEAD, u ? "\u25cf" : "o");
}

static void draw_accuracy(struct console *c, struct results *r, int y)
{
	const struct analysis *a = r->a;
	int w = COLS - 4;
	/* Block names get 14 columns at 80; a wider terminal gives a longer name more. */
	int nw = 14;
	for (size_t i = 0; i < a->ncells; i++) {
		int l = a->cells[i].block_name ? (int)strlen(a->cells[i].block_name) : 0;
		int room = 14 + (COLS - CONSOLE_MIN_COLS);
		if (l > nw)
			nw = l < room ? l : room;
	}
	int barx = 64 + nw - 14, barw = COLS - barx - 3;
	if (barw > 30)
		barw = 30;
	console_putf(c, y, 2, w, CONSOLE_DIM, "%-*s level    trials  correct     %%     95%% Wilson",
		     nw, "block");
	if (barw >= 10) {
		console_put(c, y, barx, 2, CONSOLE_DIM, "0%");
		console_put(c, y, barx + (barw - 1) / 2 - 1, 3, CONSOLE_DIM, "50%");
		console_put(c, y, barx + barw - 4, 4, CONSOLE_DIM, "100%");
	}
	y++;
	size_t rows = (size_t)(LINES - 3 - y);
	if (r->top + rows > a->ncells)
		r->top = a->ncells > rows ? a->ncells - rows : 0;
	for (size_t i = r->top; i < a->ncells && y < LINES - 3; i++, y++) {
		const struct analysis_cell *k = &a->cells[i];
		char level[16] = "-";
		if (k->has_level)
			snprintf(level, sizeof level, "%g", k->level);
		if (!k->has_pc) {
			console_putf(c, y, 2, w, CONSOLE_DIM, "%-*.*s %-8s %6lu  no answers", nw, nw,
				     k->block_name ? k->block_name : "", level, k->trials);
			continue;
		}
		console_putf(c, y, 2, barx - 3, CONSOLE_PLAIN,
			     "%-*.*s %-8s %6lu  %7lu  %5.1f  %5.1f-%5.1f", nw, nw,
			     k->block_name ? k->block_name : "", level, k->trials, k->k, 100 * k->pc, 100 * k->lower, 100 * k->upper);
		if (barw >= 10)
			draw_interval(c, y, barx, barw, k->lower, k->pc, k->upper);
	}
}

/* ---- curve ---- */

static int row_of(double p, int top, int ph)
{
	return top + (int)lround((1.0 - p) * (ph - 1));
}

static void draw_curve(struct console *c, struct results *r, int y)
{
	const struct analysis *a = r->a;
	int w = COLS - 4;
	if (!a->nseries || !a->has_levels) {
		console_put(c, y, 2, w,
			    CONSOLE_DIM, "No graded levels in this session: there is no psychometric "
			    "curve to draw.");
		return;
	}
	if (r->series >= a->nseries)
		r->series = a->nseries - 1;
	const struct analysis_series *s = &a->series[r->series];
	const struct fit_result *fr = &s->fit;
	console_putf(c, y++, 2, w, CONSOLE_PLAIN, "Block \"%s\"  (series %zu of %zu, Left/Right)",
		     s->block_name ? s->block_name : "", r->series + 1, a->nseries);
	if (fr->status == FIT_OK) {
		char thr[80] = "";
		if (fr->threshold_ok)
			snprintf(thr, sizeof thr, "; %.0f%% correct at level %.4g",
				 100 * fr->pc_threshold, fr->threshold);
		char line[400];
		snprintf(line, sizeof line, "%s fit%s: alpha %.4g, beta %.4g%s, lapse %.3f%s",
			 psyfn_shape_name(fr->f.shape),
			 fr->f.beta < 0 ? " (accuracy falls as the level rises)" : "",
			 fr->f.alpha, fr->f.beta, fr->slope_bounded ? " (steepness bound)" : "",
			 fr->f.lambda, thr);
		y += console_wrap_from(c, y, 2, w, 4, 0, 3, CONSOLE_OK, line);
	} else {
		char line[400];
		snprintf(line, sizeof line, "no fit: %s",
			 fr->reason[0] ? fr->reason : "the data cannot support one");
		y += console_wrap_from(c, y, 2, w, 4, 0, 3, CONSOLE_WARN, line);
	}
	if (!s->npts)
		return;
	double lo = s->pts[0].level, hi = s->pts[s->npts - 1].level;
	if (hi <= lo)
		hi = lo + 1;
	int ax = 8, pw = COLS - ax - 10, top = y + 1, ph = LINES - 3 - top - 2;
	if (ph < 5 || pw < 20)
		return;
	bool u = console_utf8(c);
	/* y axis: proportion correct, 100% at the top */
	for (int row = 0; row < ph; row++)
		console_put(c, top + row, ax - 1, 1, CONSOLE_DIM, u ? "\u2502" : "|");
	for (int i = 0; i <= 2; i++)
		console_putf(c, row_of(1.0 - 0.5 * i, top, ph), 1, 6, CONSOLE_DIM, "%5.0f%%",
			     100.0 - 50.0 * i);
	for (int col = 0; col < pw; col++)
		console_put(c, top + ph, ax + col, 1, CONSOLE_DIM, u ? "\u2500" : "-");
	console_put(c, top + ph, ax - 1, 1, CONSOLE_DIM, u ? "\u2514" : "+");
	console_putf(c, top + ph + 1, ax, 12, CONSOLE_DIM, "%g", lo);
	char hitxt[24];
	snprintf(hitxt, sizeof hitxt, "%g", hi);
	console_put(c, top + ph + 1, ax + pw - (int)strlen(hitxt), (int)strlen(hitxt), CONSOLE_DIM,
		    hitxt);
	console_put(c, top + ph + 1, ax + pw / 2 - 3, 6, CONSOLE_DIM, "level");
	/* chance, 1/m */
	double chance = 1.0 / (a->opts.m > 0 ? a->opts.m : 2);
	int crow = row_of(chance, top, ph);
	for (int col = 0; col < pw; col += 2)
		console_put(c, crow, ax + col, 1, CONSOLE_DIM, "-");
	console_put(c, crow, ax + pw + 1, 8, CONSOLE_DIM, "chance");
	/* the fitted function */
	if (fr->status == FIT_OK)
		for (int col = 0; col < pw; col++) {
			double x = lo + (hi - lo) * col / (pw - 1);
			double p = psyfn_eval(&fr->f, x);
			if (isfinite(p))
				console_put(c, row_of(p, top, ph), ax + col, 1, CONSOLE_OK,
					    u ? "\u2219" : ".");
		}
	/* data: proportion correct with its 95% Wilson interval */
	for (size_t i = 0; i < s->npts; i++) {
		const struct fit_point *q = &s->pts[i];
		double l, h;
		if (!q->n || stats_ci(STATS_CI_WILSON, q->k, q->n, 0.95, &l, &h) != 0)
			continue;
		int col = ax + (int)lround((q->level - lo) / (hi - lo) * (pw - 1));
		for (int row = row_of(h, top, ph); row <= row_of(l, top, ph); row++)
			console_put(c, row, col, 1, CONSOLE_HEAD, u ? "\u2502" : "|");
		console_put(c, row_of((double)q->k / (double)q->n, top, ph), col, 1, CONSOLE_WARN,
			    u ? "\u25cf" : "o");
	}
	if (fr->status == FIT_OK && fr->threshold_ok) {
		double t = fr->threshold;
		if (t >= lo && t <= hi)
			console_put(c, top + ph, ax + (int)lround((t - lo) / (hi - lo) * (pw - 1)), 1,
				    CONSOLE_WARN, u ? "\u25b2" : "^");
	}
}

/* ---- confusions ---- */

static void draw_confusion(struct console *c, struct results *r, int y)
{
	const struct analysis *a = r->a;
	int w = COLS - 4;
	if (!a->nconf || !a->ncat) {
		console_put(c, y, 2, w, CONSOLE_DIM, "No answers to count yet.");
		return;
	}
	if (r->level >= a->nconf)
		r->level = a->nconf - 1;
	const struct analysis_confusion *k = &a->conf[r->level];
	char lv[40] = "all trials";
	if (k->has_level)
		snprintf(lv, sizeof lv, "level %g", k->level);
	char intro[300];
	snprintf(intro, sizeof intro, "%s (%zu of %zu, Left/Right); rows: true category, columns: "
		 "answer; shade = share of the row", lv, r->level + 1, a->nconf);
	y += console_wrap(c, y, 2, w, 2, CONSOLE_PLAIN, intro);
	size_t n = a->ncat;
	/* Row labels and column heads as wide as the longest name allows: a wider terminal shows
	 * more of each name, never the same cut one. A head wider than its cell alternates over two
	 * rows, each then twice the cell wide. */
	int longest = 1;
	for (size_t j = 0; j < n; j++) {
		int l = (int)strlen(a->cats[j]);
		longest = l > longest ? l : longest;
	}
	int lab = longest + 2 < 12 ? 12 : longest + 2 > 24 ? 24 : longest + 2;
	int cell = n <= 8 ? 7 : 3;
	while (cell < 16 && cell <= longest && 2 + lab + (int)n * (cell + 1) <= COLS - 2)
		cell++;
	size_t fit_cols = (size_t)((COLS - 4 - lab) / cell);
	size_t ncol = n < fit_cols ? n : fit_cols;
	bool two = longest > cell - 1;
	y++;
	for (size_t j = 0; j < ncol; j++) {
		int hw = two ? 2 * cell - 1 : cell - 1;
		console_putf(c, y + (two && j % 2), 2 + lab + (int)j * cell, hw + 1, CONSOLE_DIM,
			     "%-*.*s", hw, hw, a->cats[j]);
	}
	y += two ? 2 : 1;
	for (size_t i = 0; i < n && y < LINES - 4; i++, y++) {
		console_putf(c, y, 2, lab - 1, CONSOLE_PLAIN, "%-*.*s", lab - 2, lab - 2, a->cats[i]);
		unsigned long rn = k->row_n[i];
		for (size_t j = 0; j < ncol; j++) {
			unsigned long cnt = k->counts[i * n + j];
			double share = rn ? (double)cnt / (double)rn : 0;
			const char *g = console_shade(c, share);
			int x = 2 + lab + (int)j * cell;
			enum console_role role = i == j ? CONSOLE_OK : CONSOLE_WARN;
			for (int q = 0; q < 2; q++)
				console_put(c, y, x + q, 1, rn ? role : CONSOLE_DIM, rn ? g : " ");
			if (cell >= 7 && rn)
				console_putf(c, y, x + 2, 4, CONSOLE_PLAIN, "%4.0f", 100 * share);
		}
	}
	y++;
	if (y < LINES - 3) {
		char legend[160];
		snprintf(legend, sizeof legend, "%s 0   %s under 25%%   %s under 50%%   %s under 75%%   %s 75%% or more",
			 console_shade(c, 0), console_shade(c, 0.1), console_shade(c, 0.3),
			 console_shade(c, 0.6), console_shade(c, 0.9));
		console_put(c, y++, 2, w, CONSOLE_DIM, legend);
	}
	for (size_t t = 0; t < k->ntop && y < LINES - 3; t++, y++)
		console_putf(c, y, 2, w, CONSOLE_PLAIN, "most confused: %s taken for %s, %lu times (%.0f%%)",
			     a->cats[k->top[t].truth], a->cats[k->top[t].chosen], k->top[t].count,
			     100 * k->top[t].share);
}

/* ---- timing ---- */

/* One labelled line of the timing view at *Y, wrapped under its value (18 columns in), never
 * cut; advances *Y. */
static void timing_line(struct console *c, int *y, enum console_role role, const char *fmt, ...)
	__attribute__((format(printf, 4, 5)));
static void timing_line(struct console *c, int *y, enum console_role role, const char *fmt, ...)
{
	char buf[400];
	va_list ap;
	va_start(ap, fmt);
	vsnprintf(buf, sizeof buf, fmt, ap);
	va_end(ap);
	int room = LINES - 3 - *y;
	if (room > 0)
		*y += console_wrap_from(c, *y, 2, COLS - 4, 18, 0, room, role, buf);
}

static void draw_timing(struct console *c, struct results *r, int y)
{
	const struct analysis *a = r->a;
	for (size_t i = 0; i < a->ntiming && y < LINES - 3; i++) {
		const struct analysis_timing *t = &a->timing[i];
		timing_line(c, &y, CONSOLE_PLAIN, "Timing mode       %s%s", t->timing_mode,
			    t->timing_mode && !strcmp(t->timing_mode, "simulated")
				    ? " (no real display: the frame times are a virtual clock's)" : "");
		if (t->refresh_hz > 0)
			timing_line(c, &y, CONSOLE_PLAIN, "Measured refresh  %.3f Hz", t->refresh_hz);
		else
			timing_line(c, &y, CONSOLE_PLAIN, "Measured refresh  not measured");
		timing_line(c, &y, CONSOLE_PLAIN, "Exact exposure    %lu of %lu trials (%.1f%%)",
			    t->exact, t->trials, t->trials ? 100.0 * t->exact / t->trials : 0);
		timing_line(c, &y, t->timing_faults ? CONSOLE_WARN : CONSOLE_OK,
			    "Timing faults     %lu trial%s; %lu dropped frame%s in %lu trial%s",
			    t->timing_faults, t->timing_faults == 1 ? "" : "s", t->dropped_frames,
			    t->dropped_frames == 1 ? "" : "s", t->trials_with_drops,
			    t->trials_with_drops == 1 ? "" : "s");
		timing_line(c, &y, CONSOLE_PLAIN, "Anticipations     %lu;  timeouts %lu",
			    t->anticipations, t->timeouts);
		y++;
	}
	if (a->rt.n)
		timing_line(c, &y, CONSOLE_PLAIN, "Correct RTs       median %.0f ms, IQR %.0f ms, 10%% "
			    "trimmed mean %.0f ms (n = %zu)", a->rt.median, a->rt.iqr, a->rt.trimmed,
			    a->rt.n);
}

static void results_draw(struct console *c, void *st)
{
	struct results *r = st;
	int y = console_body_top(), w = COLS - 4;
	if (r->error[0]) {
		console_wrap(c, y, 2, w, 4, CONSOLE_BAD, r->error);
		return;
	}
	char head[300];
	snprintf(head, sizeof head, "Session %.8s  subject %s  %s  %s  %zu trials", r->ss.id,
		 r->ss.subject ? r->ss.subject : "", r->ss.protocol_name ? r->ss.protocol_name : "",
		 store_status_name(r->ss.status), r->ntrials);
	y += console_wrap(c, y, 2, w, 2, CONSOLE_HEAD, head);
	int x = 2;
	for (int v = 0; v < VIEW_COUNT; v++) {
		char tab[32];
		snprintf(tab, sizeof tab, " %d %s ", v + 1, view_names[v]);
		x += console_put(c, y, x, COLS - x - 1, (int)r->view == v ? CONSOLE_PICK : CONSOLE_DIM, tab) + 1;
	}
	if (r->a && r->a->npractice) {
		/* The shorter wording where the longer would be cut (80 columns). */
		char note[64];
		snprintf(note, sizeof note, "(%zu practice trials left out)", r->a->npractice);
		if (x + 2 + (int)strlen(note) > COLS - 1)
			snprintf(note, sizeof note, "(%zu practice left out)", r->a->npractice);
		console_put(c, y, x + 2, COLS - x - 3, CONSOLE_DIM, note);
	}
	y += 2;
	if (!r->a) {
		console_put(c, y, 2, w, CONSOLE_DIM, "No trials stored in this session yet.");
		return;
	}
	switch (r->view) {
	case VIEW_ACCURACY: draw_accuracy(c, r, y); break;
	case VIEW_CURVE: draw_curve(c, r, y); break;
	case VIEW_CONFUSION: draw_confusion(c, r, y); break;
	default: draw_timing(c, r, y); break;
	}
}

static bool results_key(struct console *c, void *st, int ch)
{
	struct results *r = st;
	switch (ch) {
	case '\t':
		r->view = (enum view)((r->view + 1) % VIEW_COUNT);
		return true;
	case KEY_BTAB:
		r->view = (enum view)((r->view + VIEW_COUNT - 1) % VIEW_COUNT);
		return true;
	case '1': case '2': case '3': case '4':
		r->view = (enum view)(ch - '1');
		return true;
	case KEY_LEFT:
		if (r->view == VIEW_CURVE && r->series)
			r->series--;
		if (r->view == VIEW_CONFUSION && r->level)
			r->level--;
		return true;
	case KEY_RIGHT:
		if (r->view == VIEW_CURVE)
			r->series++;
		if (r->view == VIEW_CONFUSION)
			r->level++;
		return true;
	case KEY_UP:
		if (r->top)
			r->top--;
		return true;
	case KEY_DOWN:
		r->top++;
		return true;
	case 'x':
	case 'X':
		if (!r->error[0])
			console_export_push(c, r->ss.id);
		return true;
	case 'f':
	case 'F':
		if (!r->error[0])
			console_forecast_push(c, r->trials, r->ntrials, (int)r->nchoices);
		return true;
	default:
		return false;
	}
}

static void results_destroy(void *st)
{
	struct results *r = st;
	analysis_destroy(r->a);
	free(r->rows);
	store_trials_free(r->trials, r->ntrials);
	for (size_t i = 0; i < r->nchoices; i++)
		free(r->choices[i]);
	free(r->choices);
	store_session_clear(&r->ss);
	free(r);
}

void console_results_push(struct console *c, const char *session_id)
{
	struct results *r = xcalloc(1, sizeof *r);
	snprintf(r->session_id, sizeof r->session_id, "%s", session_id);
	if (load_session(c, r) == 0)
		analyse(r);
	struct console_screen s = {
		.title = "results",
		.keys = results_keys,
		.nkeys = sizeof results_keys / sizeof results_keys[0],
		.draw = results_draw,
		.key = results_key,
		.destroy = results_destroy,
		.st = r,
	};
	console_push(c, &s);
}
