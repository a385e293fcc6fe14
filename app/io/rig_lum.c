/* rig_lum — the rig profile's [luminance] section (see include/rig_lum.h for its keys).
 *
 * Reading: rig.c hands every entry of the section to rig_lum_parse_entry, which fills a parse state
 * per channel (fit values, readings with their lines); rig_lum_parse_finish checks that each
 * channel is complete and builds the struct lum_cal. Writing: the profile's text is re-read, the
 * old section's lines are dropped, the new section goes in their place (or at the end) and the
 * whole text replaces the file through a temporary file and rename(2) (ini_edit.c). */
#include "rig_lum.h"

#include <errno.h>
#include <math.h>
#include <stdbool.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "ini_edit.h"
#include "inifile.h"
#include "protocol.h"
#include "rig.h"
#include "suggest.h"

static const char *const suffix[LUM_NCHANNELS] = {"", "_red", "_green", "_blue"};
static const char *const models[] = {"auto", "fit", "table"};

struct chan_parse {
	int line_gamma, line_min, line_max;
	double gamma, l_min, l_max;
	int nread;
	int code[LUM_MAX_READINGS];
	double cd[LUM_MAX_READINGS];
	int line[LUM_MAX_READINGS];
};

struct rig_lum_parse {
	struct lum_cal cal;
	int line_measured, line_age, line_model;
	struct chan_parse ch[LUM_NCHANNELS];
};

struct rig_lum_parse *rig_lum_parse_new(void)
{
	struct rig_lum_parse *p = xcalloc(1, sizeof *p);
	p->cal.max_age_days = 30;
	p->cal.model = LUM_MODEL_AUTO;
	return p;
}

/* A plain decimal number (digits, sign, point, exponent; no hex, inf or nan) filling all of S. */
static int parse_decimal(const char *s, double *out)
{
	if (!*s || strspn(s, "0123456789+-.eE") != strlen(s))
		return -1;
	char *end;
	errno = 0;
	double x = strtod(s, &end);
	if (*end || errno == ERANGE || !isfinite(x))
		return -1;
	*out = x;
	return 0;
}

/* KEY as a channel key: the base name without its suffix goes to BASE; returns the channel. */
static int split_key(const char *key, char *base, size_t len)
{
	for (int c = LUM_NCHANNELS - 1; c >= 0; c--) {
		size_t kl = strlen(key), sl = strlen(suffix[c]);
		if (kl > sl && !strcmp(key + kl - sl, suffix[c]) && kl - sl < len) {
			memcpy(base, key, kl - sl);
			base[kl - sl] = '\0';
			return c;
		}
	}
	return -1;
}

static void take_reading(struct chan_parse *ch, const char *file, const char *key,
			 const char *value, int line, struct diag_list *d)
{
	char a[64], b[64], extra;
	double code, cd;
	if (sscanf(value, "%63s %63s %c", a, b, &extra) != 2 || parse_decimal(a, &code) ||
	    parse_decimal(b, &cd) || code != floor(code)) {
		diag_add(d, DIAG_ERROR, file, line, "%s = %s is not a code (0-255) and a luminance in "
			 "cd/m2, as in '%s = 128 21.5'", key, value, key);
		return;
	}
	if (code < 0 || code > 255 || cd < 0) {
		diag_add(d, DIAG_ERROR, file, line, "%s = %s is out of range (code 0-255, luminance 0 "
			 "cd/m2 or more)", key, value);
		return;
	}
	for (int i = 0; i < ch->nread; i++)
		if (ch->code[i] == (int)code) {
			diag_add(d, DIAG_ERROR, file, line, "code %d is read twice (first on line %d)",
				 (int)code, ch->line[i]);
			return;
		}
	if (ch->nread >= LUM_MAX_READINGS) {
		diag_add(d, DIAG_ERROR, file, line, "more than %d readings", LUM_MAX_READINGS);
		return;
	}
	ch->code[ch->nread] = (int)code;
	ch->cd[ch->nread] = cd;
	ch->line[ch->nread++] = line;
}

static void take_number(double *dst, int *dst_line, const char *file, const char *key,
			const char *value, int line, double min, double max, struct diag_list *d)
{
	double x;
	if (*dst_line) {
		diag_add(d, DIAG_ERROR, file, line, "duplicate key '%s' (first set on line %d)", key,
			 *dst_line);
		return;
	}
	*dst_line = line;
	if (parse_decimal(value, &x)) {
		diag_add(d, DIAG_ERROR, file, line, "%s = %s is not a number", key, value);
		return;
	}
	if (x < min || x > max) {
		diag_add(d, DIAG_ERROR, file, line, "%s = %s is out of range (%g to %g)", key, value,
			 min, max);
		return;
	}
	*dst = x;
}

/* measured, max_age_days and model; returns 1 when KEY was one of them. */
static int take_common(struct rig_lum_parse *p, const char *file, const char *key,
		       const char *value, int line, struct diag_list *d)
{
	if (!strcmp(key, "measured")) {
		if (p->line_measured)
			diag_add(d, DIAG_ERROR, file, line, "duplicate key 'measured' (first set on line "
				 "%d)", p->line_measured);
		else if (!lum_date_valid(value))
			diag_add(d, DIAG_ERROR, file, line, "measured = %s is not a date written "
				 "YYYY-MM-DD", value);
		else
			snprintf(p->cal.measured, sizeof p->cal.measured, "%s", value);
		p->line_measured = line;
		return 1;
	}
	if (!strcmp(key, "max_age_days")) {
		double x = 30;
		take_number(&x, &p->line_age, file, key, value, line, 1, 3650, d);
		if (x != floor(x))
			diag_add(d, DIAG_ERROR, file, line, "max_age_days = %s is not a whole number",
				 value);
		p->cal.max_age_days = (int)x;
		return 1;
	}
	if (!strcmp(key, "model")) {
		p->line_model = line;
		for (int i = 0; i < 3; i++)
			if (!strcmp(value, models[i])) {
				p->cal.model = (enum lum_model)i;
				return 1;
			}
		diag_add(d, DIAG_ERROR, file, line, "model = %s is not one of auto, fit, table", value);
		return 1;
	}
	return 0;
}

void rig_lum_parse_entry(struct rig_lum_parse *p, const char *file, const char *key,
			 const char *value, int line, struct diag_list *d)
{
	if (take_common(p, file, key, value, line, d))
		return;
	char base[32];
	int c = split_key(key, base, sizeof base);
	struct chan_parse *ch = c >= 0 ? &p->ch[c] : NULL;
	if (ch && !strcmp(base, "reading")) {
		take_reading(ch, file, key, value, line, d);
	} else if (ch && !strcmp(base, "gamma")) {
		take_number(&ch->gamma, &ch->line_gamma, file, key, value, line, 0.05, 20, d);
	} else if (ch && !strcmp(base, "l_min")) {
		take_number(&ch->l_min, &ch->line_min, file, key, value, line, 0, 1e5, d);
	} else if (ch && !strcmp(base, "l_max")) {
		take_number(&ch->l_max, &ch->line_max, file, key, value, line, 0, 1e5, d);
	} else {
		static const char *const known[] = {"measured", "max_age_days", "model", "gamma",
						    "l_min", "l_max", "reading"};
		const char *near = suggest_nearest(c >= 0 ? base : key, known, 7);
		diag_add(d, DIAG_ERROR, file, line, "unknown key '%s' in [luminance]%s%s%s", key,
			 near ? "; did you mean '" : "", near ? near : "", near ? "'?" : "");
	}
}

/* Checks channel C of P and fills the calibration's curve. */
static void finish_channel(struct rig_lum_parse *p, int c, const char *file, struct diag_list *d)
{
	struct chan_parse *ch = &p->ch[c];
	struct lum_curve *cv = &p->cal.ch[c];
	int given = !!ch->line_gamma + !!ch->line_min + !!ch->line_max;
	if (!given && !ch->nread)
		return;
	int line = ch->line_gamma ? ch->line_gamma : ch->line_min ? ch->line_min :
		   ch->line_max ? ch->line_max : ch->line[0];
	if (given < 3) {
		diag_add(d, DIAG_ERROR, file, line, "the %s channel needs gamma%s, l_min%s and l_max%s "
			 "together (run 'tachist calibrate' to measure them)", lum_channel_name(c),
			 suffix[c], suffix[c], suffix[c]);
		return;
	}
	if (!(ch->l_max > ch->l_min)) {
		diag_add(d, DIAG_ERROR, file, ch->line_max, "l_max%s (%g) must be above l_min%s (%g)",
			 suffix[c], ch->l_max, suffix[c], ch->l_min);
		return;
	}
	cv->present = true;
	cv->gamma = ch->gamma;
	cv->l_min = ch->l_min;
	cv->l_max = ch->l_max;
	if (!ch->nread)
		return;
	/* The readings, sorted, with the written fit's residuals. */
	struct lum_curve fit;
	char err[256];
	if (lum_fit(ch->code, ch->cd, (size_t)ch->nread, &fit, NULL, err, sizeof err)) {
		diag_add(d, DIAG_ERROR, file, ch->line[0], "the %s readings: %s", lum_channel_name(c),
			 err);
		cv->present = false;
		return;
	}
	cv->n = fit.n;
	memcpy(cv->code, fit.code, sizeof fit.code);
	memcpy(cv->cd, fit.cd, sizeof fit.cd);
	double ss = 0;
	for (size_t i = 0; i < cv->n; i++) {
		double r = cv->cd[i] - lum_model_eval(cv, cv->code[i]);
		ss += r * r;
	}
	cv->rms = sqrt(ss / (double)cv->n);
	if (fabs(fit.gamma - cv->gamma) > 0.01 * cv->gamma)
		diag_add(d, DIAG_WARNING, file, ch->line_gamma, "gamma%s = %g differs from the fit of "
			 "the readings (%.4f); the written value is used", suffix[c], cv->gamma,
			 fit.gamma);
}

struct lum_cal *rig_lum_parse_finish(struct rig_lum_parse *p, const char *file, int line,
				     struct diag_list *d)
{
	size_t errors0 = diag_count(d, DIAG_ERROR);
	for (int c = 0; c < LUM_NCHANNELS; c++)
		finish_channel(p, c, file, d);
	if (!p->line_measured)
		diag_add(d, DIAG_ERROR, file, line, "[luminance] needs 'measured = YYYY-MM-DD', the "
			 "date of the readings");
	bool any = false;
	for (int c = 0; c < LUM_NCHANNELS; c++)
		any = any || p->cal.ch[c].present;
	if (!any && diag_count(d, DIAG_ERROR) == errors0)
		diag_add(d, DIAG_ERROR, file, line, "[luminance] has no channel: it needs gamma, l_min "
			 "and l_max (run 'tachist calibrate')");
	struct lum_cal *cal = NULL;
	if (diag_count(d, DIAG_ERROR) == errors0) {
		cal = xmalloc(sizeof *cal);
		*cal = p->cal;
	}
	free(p);
	return cal;
}

static void append(char **buf, size_t *len, size_t *cap, const char *s)
{
	size_t n = strlen(s);
	if (*len + n + 1 > *cap) {
		*cap = (*len + n + 1) * 2;
		*buf = xrealloc(*buf, *cap);
	}
	memcpy(*buf + *len, s, n + 1);
	*len += n;
}

char *rig_lum_format(const struct lum_cal *cal)
{
	char *buf = NULL, line[256];
	size_t len = 0, cap = 0;
	append(&buf, &len, &cap, "[luminance]\n");
	snprintf(line, sizeof line, "; written by 'tachist calibrate': the fit L = l_min + (l_max - "
		 "l_min) * (code/255)^gamma in cd/m2,\n; and the photometer readings (code, cd/m2)\n"
		 "measured = %s\nmax_age_days = %d\nmodel = %s\n", cal->measured, cal->max_age_days,
		 models[cal->model]);
	append(&buf, &len, &cap, line);
	for (int c = 0; c < LUM_NCHANNELS; c++) {
		const struct lum_curve *cv = &cal->ch[c];
		if (!cv->present)
			continue;
		snprintf(line, sizeof line, "gamma%s = %.10g\nl_min%s = %.10g\nl_max%s = %.10g\n",
			 suffix[c], cv->gamma, suffix[c], cv->l_min, suffix[c], cv->l_max);
		append(&buf, &len, &cap, line);
		for (size_t i = 0; i < cv->n; i++) {
			snprintf(line, sizeof line, "reading%s = %d %.10g\n", suffix[c], cv->code[i],
				 cv->cd[i]);
			append(&buf, &len, &cap, line);
		}
	}
	return buf;
}

int rig_lum_write(const char *path, const struct lum_cal *cal, char *err, size_t errlen)
{
	struct diag_list d;
	diag_init(&d);
	char *old = inifile_read(path, NULL, &d);
	if (!old) {
		if (d.n)
			diag_format(&d.v[0], err, errlen);
		else
			snprintf(err, errlen, "cannot read %s", path);
		diag_clear(&d);
		return -1;
	}
	diag_clear(&d);
	char *section = rig_lum_format(cal);
	char *text = ini_edit_replace_section(old, "luminance", section);
	int rc = ini_edit_replace_file(path, text, err, errlen);
	free(old);
	free(section);
	free(text);
	return rc;
}

int rig_lum_apply(struct protocol *p, const struct rig *r, const char *today,
		  struct diag_list *d)
{
	size_t errors0 = diag_count(d, DIAG_ERROR);
	const struct lum_cal *cal = r->lum;
	const struct lum_curve *grey = cal && cal->ch[LUM_GREY].present ? &cal->ch[LUM_GREY] : NULL;
	if (cal && cal->measured[0]) {
		char now[11];
		if (!today) {
			time_t t = time(NULL);
			struct tm tm;
			gmtime_r(&t, &tm);
			strftime(now, sizeof now, "%Y-%m-%d", &tm);
			today = now;
		}
		long age = lum_age_days(cal->measured, today);
		if (age > cal->max_age_days)
			diag_add(d, DIAG_WARNING, r->path, 0, "the luminance calibration is %ld days old "
				 "(measured %s, max_age_days = %d): measure the display again with "
				 "'tachist calibrate'", age, cal->measured, cal->max_age_days);
		else if (age < 0 && lum_age_days(cal->measured, "9999-12-31") >= 0)
			diag_add(d, DIAG_WARNING, r->path, 0, "the luminance calibration is dated %s, "
				 "after today (%s)", cal->measured, today);
	}
	if (p->background_cd >= 0) {
		if (!grey) {
			diag_add(d, DIAG_ERROR, p->path, p->background_cd_line, "background_cd needs a "
				 "rig calibrated in cd/m2 (a [luminance] section with the grey channel; "
				 "run 'tachist calibrate --rig %s')", r->path ? r->path : "FILE");
		} else {
			double lo = lum_curve_eval(grey, cal->model, 0);
			double hi = lum_curve_eval(grey, cal->model, 255);
			p->background = lum_code_for(grey, cal->model, p->background_cd,
						     &p->background_cd_achieved);
			if (p->background_cd < lo - 1e-9 || p->background_cd > hi + 1e-9)
				diag_add(d, DIAG_WARNING, p->path, p->background_cd_line,
					 "background_cd = %g is outside the display's range (%.4g to "
					 "%.4g cd/m2); the nearest is code %d, %.4g cd/m2",
					 p->background_cd, lo, hi, p->background,
					 p->background_cd_achieved);
		}
	}
	if (p->linearize && !(cal && (grey || (cal->ch[LUM_RED].present && cal->ch[LUM_GREEN].present &&
					       cal->ch[LUM_BLUE].present))))
		diag_add(d, DIAG_ERROR, p->path, p->linearize_line, "linearize = yes needs a rig "
			 "calibrated in cd/m2 (run 'tachist calibrate --rig %s')",
			 r->path ? r->path : "FILE");
	return diag_count(d, DIAG_ERROR) > errors0 ? -1 : 0;
}

bool rig_lum_tables(const struct rig *r, uint8_t t[3][256])
{
	const struct lum_cal *cal = r ? r->lum : NULL;
	if (!cal)
		return false;
	const struct lum_curve *grey = cal->ch[LUM_GREY].present ? &cal->ch[LUM_GREY] : NULL;
	for (int c = 0; c < 3; c++) {
		const struct lum_curve *cv = cal->ch[LUM_RED + c].present ? &cal->ch[LUM_RED + c] : grey;
		if (!cv)
			return false;
		lum_linear_table(cv, cal->model, t[c]);
	}
	return true;
}
