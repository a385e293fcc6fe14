/* forecastview — the console's forecast from a finished session taken as a pilot (key f on its
 * results screen): the session's non-practice answered trials with a level are fitted as `report`
 * fits them, and that observer is simulated on the session's own levels at half, the same and
 * double the trials per level, with 1 and 5 observers (forecast.h), 100 runs of 100 bootstrap
 * samples each so the view opens in seconds. The table is shown as a scrollable text view;
 * `tachist forecast` compares any other grid. */
#include "console.h"

#include <curses.h>
#include <math.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "diag.h"
#include "forecast.h"
#include "store.h"

#define FC_RUNS 100
#define FC_BOOT 100

struct lines {
	char **v;
	size_t n, cap;
};

static void add(struct lines *l, const char *fmt, ...) __attribute__((format(printf, 2, 3)));
static void add(struct lines *l, const char *fmt, ...)
{
	char buf[256];
	va_list ap;
	va_start(ap, fmt);
	vsnprintf(buf, sizeof buf, fmt, ap);
	va_end(ap);
	if (l->n == l->cap)
		l->v = xrealloc(l->v, (l->cap = l->cap ? 2 * l->cap : 32) * sizeof *l->v);
	l->v[l->n++] = xstrdup(buf);
}

struct progress {
	struct console *c;
	int design, designs;
};

/* Called one at a time (under the forecast's lock) while this thread waits in forecast_run, so
 * the terminal is never drawn from two threads at once. */
static void on_progress(int done, int total, void *ctx)
{
	struct progress *p = ctx;
	if (done % 10 && done != total)
		return;
	console_putf(p->c, LINES - 2, 2, COLS - 4, CONSOLE_DIM, "Simulating: design %d of %d, "
		     "run %d of %d ", p->design + 1, p->designs, done, total);
	refresh();
}

static int cmp_double(const void *a, const void *b)
{
	double x = *(const double *)a, y = *(const double *)b;
	return x < y ? -1 : x > y;
}

/* The forecast's lines for the N trials T of an M-choice session. */
static void build(struct console *c, const struct store_trial *t, size_t n, int m,
		  struct lines *out)
{
	double *lv = xmalloc((n ? n : 1) * sizeof *lv);
	int *ok = xmalloc((n ? n : 1) * sizeof *ok);
	size_t k = 0;
	for (size_t i = 0; i < n; i++)
		if (!t[i].practice && t[i].has_level && t[i].correct >= 0) {
			lv[k] = t[i].level;
			ok[k++] = t[i].correct;
		}
	struct forecast_opts o = {.m = m, .runs = FC_RUNS, .seed = 1};
	char why[320];
	if (m < 2 || k == 0) {
		add(out, "No forecast: the session has no answered non-practice trials with a level.");
		goto out;
	}
	if (forecast_truth_from_trials(lv, ok, k, m, &o.truth, why, sizeof why) < 0) {
		add(out, "No forecast: the session's %zu trials cannot be fitted: %s", k, why);
		goto out;
	}
	double *levels = xmalloc(k * sizeof *levels);
	memcpy(levels, lv, k * sizeof *levels);
	qsort(levels, k, sizeof *levels, cmp_double);
	size_t u = 0;
	for (size_t i = 0; i < k; i++)
		if (u == 0 || levels[u - 1] != levels[i])
			levels[u++] = levels[i];
	int per = (int)lround((double)k / (double)u);
	fit_opts_default(&o.fit, m);
	o.fit.nboot = FC_BOOT;
	o.fit.shape = o.truth.slope < 0 ? PSYFN_LOGISTIC : PSYFN_WEIBULL;
	o.fit.direction = o.truth.slope < 0 ? -1 : 1;
	long nc = sysconf(_SC_NPROCESSORS_ONLN);
	o.threads = nc < 1 ? 1 : nc > 8 ? 8 : (int)nc;
	add(out, "This session as a pilot: %s fit of %zu trials, alpha %.4g, beta %.4g, lapse %.3g",
	    psyfn_shape_name(o.truth.shape), k, o.truth.threshold, o.truth.slope, o.truth.lapse);
	char lvtext[160] = "";
	for (size_t i = 0; i < u && strlen(lvtext) < sizeof lvtext - 16; i++)
		snprintf(lvtext + strlen(lvtext), sizeof lvtext - strlen(lvtext), " %g", levels[i]);
	add(out, "Levels:%s", lvtext);
	add(out, "%d studies per design, %d bootstrap samples each (seed 1)", FC_RUNS, FC_BOOT);
	add(out, "%s", "");
	add(out, "%4s %7s %7s  %-24s %-19s %5s %6s", "obs", "per lvl", "per obs", "width [5%, 95%]",
	    "bias (MC error)", "fail", "cover");
	int trials[3] = {per / 2 > 0 ? per / 2 : 1, per, 2 * per}, observers[2] = {1, 5};
	struct progress p = {c, 0, 6};
	struct forecast_result r = {0};
	double thr = NAN, x25 = NAN, x75 = NAN;
	enum forecast_bracket br = FORECAST_BRACKETS;
	for (int ob = 0; ob < 2; ob++)
		for (int ti = 0; ti < 3; ti++, p.design++) {
			struct forecast_design d = {.levels = levels, .nlevels = u,
						    .trials_per_level = trials[ti],
						    .observers = observers[ob]};
			if (forecast_run(&o, &d, &r, on_progress, &p, why, sizeof why) < 0) {
				add(out, "No forecast: %s", why);
				free(levels);
				goto out;
			}
			thr = r.true_threshold;
			x25 = r.x25;
			x75 = r.x75;
			br = r.bracket;
			char w[48] = "-", b[40] = "-", cv[16] = "-";
			if (isfinite(r.width_median))
				snprintf(w, sizeof w, "%.3g [%.3g, %.3g]", r.width_median, r.width_lo,
					 r.width_hi);
			if (isfinite(r.bias))
				snprintf(b, sizeof b, "%+.3g (%.2g)", r.bias,
					 isfinite(r.bias_se) ? r.bias_se : 0.0);
			if (isfinite(r.coverage))
				snprintf(cv, sizeof cv, "%.1f%%", 100 * r.coverage);
			add(out, "%4d %7d %7zu  %-24s %-19s %4.0f%% %6s", observers[ob], trials[ti],
			    (size_t)trials[ti] * u, w, b, 100.0 * r.failed / r.runs, cv);
			forecast_result_clear(&r);
		}
	add(out, "%s", "");
	if (isfinite(thr) && isfinite(x25) && isfinite(x75))
		add(out, "Threshold at pc %.3g: %.4g; 25-75%% of the curve's span %.4g to %.4g",
		    o.fit.pc_threshold, thr, fmin(x25, x75), fmax(x25, x75));
	else
		add(out, "The fitted curve never reaches pc %.3g: no threshold to estimate.",
		    o.fit.pc_threshold);
	if (br != FORECAST_BRACKETS)
		add(out, "Warning: these levels do not bracket the threshold: %s of the curve's 25-75%% "
		    "range lies outside them.", br == FORECAST_OUTSIDE ? "all" : "part");
	add(out, "width: median width of the 95%% bootstrap interval of the threshold, level units.");
	add(out, "Other levels, trial counts and adaptive blocks: tachist forecast (docs/forecast.md).");
	free(levels);
out:
	free(lv);
	free(ok);
}

void console_forecast_push(struct console *c, const struct store_trial *trials, size_t n, int m)
{
	struct lines l = {0};
	console_putf(c, LINES - 2, 2, COLS - 4, CONSOLE_DIM, "Simulating the study...");
	refresh();
	build(c, trials, n, m, &l);
	console_text_push(c, "forecast", l.v, l.n);
}
