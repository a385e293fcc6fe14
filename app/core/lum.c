/* lum — the gamma model of a display's light, fitted to photometer readings; its inverse and the
 * linearising table. See include/lum.h for the model and the contract of each function.
 *
 * The fit is separable: for a fixed γ the model is linear in L_min and L_max − L_min, so those two
 * come from ordinary least squares in closed form and only γ is searched. The derivative of the
 * remaining sum of squares with respect to γ is, by the envelope theorem,
 *     dS/dγ = −2 (L_max − L_min) Σ r_i x_i ln(v_i / 255),   x_i = (v_i / 255)^γ,
 * and its root is found with GSL's Brent solver after a scan on a logarithmic grid brackets the
 * minimum. This reaches the least-squares optimum to machine precision, which a general
 * Levenberg–Marquardt search only approaches to its stopping tolerance. */
#include "lum.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_errno.h>
#include <gsl/gsl_min.h>
#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>
#include <gsl/gsl_roots.h>

#define GAMMA_LO 0.05
#define GAMMA_HI 20.0
#define SCAN_STEPS 400

static const char *const channel_names[LUM_NCHANNELS] = {"grey", "red", "green", "blue"};

const char *lum_channel_name(enum lum_channel c)
{
	return (unsigned)c < LUM_NCHANNELS ? channel_names[c] : "?";
}

int lum_channel_parse(const char *s)
{
	static const struct { const char *word; int ch; } words[] = {
		{"grey", LUM_GREY}, {"gray", LUM_GREY}, {"all", LUM_GREY}, {"white", LUM_GREY},
		{"red", LUM_RED}, {"r", LUM_RED}, {"green", LUM_GREEN}, {"g", LUM_GREEN},
		{"blue", LUM_BLUE}, {"b", LUM_BLUE},
	};
	for (size_t i = 0; i < sizeof words / sizeof words[0]; i++)
		if (!strcmp(s, words[i].word))
			return words[i].ch;
	return -1;
}

/* The readings as the fit sees them. */
struct data {
	const int *code;
	const double *cd;
	size_t n;
};

/* Least-squares L_min (*A) and range (*B) for GAMMA; returns the residual sum of squares. */
static double solve_linear(const struct data *d, double gamma, double *a, double *b)
{
	double sx = 0, sy = 0;
	for (size_t i = 0; i < d->n; i++) {
		sx += pow(d->code[i] / 255.0, gamma);
		sy += d->cd[i];
	}
	double mx = sx / (double)d->n, my = sy / (double)d->n, sxx = 0, sxy = 0, syy = 0;
	for (size_t i = 0; i < d->n; i++) {
		double dx = pow(d->code[i] / 255.0, gamma) - mx, dy = d->cd[i] - my;
		sxx += dx * dx;
		sxy += dx * dy;
		syy += dy * dy;
	}
	*b = sxx > 0 ? sxy / sxx : 0;
	*a = my - *b * mx;
	double sse = syy - (sxx > 0 ? sxy * sxy / sxx : 0);
	return sse > 0 ? sse : 0;
}

static double sse_at(double gamma, void *p)
{
	double a, b;
	return solve_linear(p, gamma, &a, &b);
}

static double dsse_at(double gamma, void *p)
{
	const struct data *d = p;
	double a, b, s = 0;
	solve_linear(d, gamma, &a, &b);
	for (size_t i = 0; i < d->n; i++) {
		if (d->code[i] <= 0 || d->code[i] >= 255)
			continue;   /* x ln(v/255) is 0 at both ends */
		double u = d->code[i] / 255.0, x = pow(u, gamma);
		s += (d->cd[i] - a - b * x) * x * log(u);
	}
	return -2.0 * b * s;
}

/* Brent's root of dS/dγ in [LO, HI] when it changes sign there, else Brent's minimum of S in
 * (LO, HI) around GUESS. Returns 0 with *GAMMA, or -1. */
static int refine(struct data *d, double lo, double guess, double hi, double *gamma)
{
	int status = GSL_CONTINUE;
	double flo = dsse_at(lo, d), fhi = dsse_at(hi, d);
	if (flo < 0 && fhi > 0) {
		gsl_function f = {dsse_at, d};
		gsl_root_fsolver *s = gsl_root_fsolver_alloc(gsl_root_fsolver_brent);
		if (!s || gsl_root_fsolver_set(s, &f, lo, hi) != GSL_SUCCESS) {
			gsl_root_fsolver_free(s);
			return -1;
		}
		for (int it = 0; it < 200 && status == GSL_CONTINUE; it++) {
			if (gsl_root_fsolver_iterate(s) != GSL_SUCCESS)
				break;
			status = gsl_root_test_interval(gsl_root_fsolver_x_lower(s),
							gsl_root_fsolver_x_upper(s), 0, 1e-15);
		}
		*gamma = gsl_root_fsolver_root(s);
		gsl_root_fsolver_free(s);
	} else {
		gsl_function f = {sse_at, d};
		gsl_min_fminimizer *m = gsl_min_fminimizer_alloc(gsl_min_fminimizer_brent);
		if (!m || gsl_min_fminimizer_set(m, &f, guess, lo, hi) != GSL_SUCCESS) {
			gsl_min_fminimizer_free(m);
			return -1;
		}
		for (int it = 0; it < 200 && status == GSL_CONTINUE; it++) {
			if (gsl_min_fminimizer_iterate(m) != GSL_SUCCESS)
				break;
			status = gsl_min_test_interval(gsl_min_fminimizer_x_lower(m),
						       gsl_min_fminimizer_x_upper(m), 0, 1e-12);
		}
		*gamma = gsl_min_fminimizer_x_minimum(m);
		gsl_min_fminimizer_free(m);
	}
	return status == GSL_SUCCESS && isfinite(*gamma) ? 0 : -1;
}

static int cmp_reading(const void *a, const void *b)
{
	const double *x = a, *y = b;
	return (x[0] > y[0]) - (x[0] < y[0]);
}

/* Copies and sorts the readings into OUT, refusing what lum_fit refuses before fitting. */
static int take_readings(const int *code, const double *cd, size_t n, struct lum_curve *out,
			 bool *warn, char *err, size_t errlen)
{
	if (n < 3) {
		snprintf(err, errlen, "%zu reading%s: a fit needs at least 3", n, n == 1 ? "" : "s");
		return -1;
	}
	if (n > LUM_MAX_READINGS) {
		snprintf(err, errlen, "%zu readings: at most one per code, %d", n, LUM_MAX_READINGS);
		return -1;
	}
	double pairs[LUM_MAX_READINGS][2];
	for (size_t i = 0; i < n; i++) {
		if (code[i] < 0 || code[i] > 255) {
			snprintf(err, errlen, "code %d is outside 0-255", code[i]);
			return -1;
		}
		if (!isfinite(cd[i]) || cd[i] < 0) {
			snprintf(err, errlen, "the reading for code %d (%g) is not a luminance of 0 cd/m2 "
				 "or more", code[i], cd[i]);
			return -1;
		}
		pairs[i][0] = code[i];
		pairs[i][1] = cd[i];
	}
	qsort(pairs, n, sizeof pairs[0], cmp_reading);
	bool falls = false, varies = false;
	for (size_t i = 0; i < n; i++) {
		out->code[i] = (int)pairs[i][0];
		out->cd[i] = pairs[i][1];
		if (i && out->code[i] == out->code[i - 1]) {
			snprintf(err, errlen, "code %d is read twice", out->code[i]);
			return -1;
		}
		if (i && out->cd[i] < out->cd[i - 1])
			falls = true;
		if (out->cd[i] != out->cd[0])
			varies = true;
	}
	out->n = n;
	if (!varies) {
		snprintf(err, errlen, "every reading is %g cd/m2: the light does not change with the "
			 "code (is the photometer on the patch?)", out->cd[0]);
		return -1;
	}
	if (out->cd[n - 1] <= out->cd[0]) {
		snprintf(err, errlen, "the light at code %d (%g cd/m2) is not above the light at code "
			 "%d (%g cd/m2): the readings fall as the code rises", out->code[n - 1],
			 out->cd[n - 1], out->code[0], out->cd[0]);
		return -1;
	}
	if (warn)
		*warn = falls;
	return 0;
}

int lum_fit(const int *code, const double *cd, size_t n, struct lum_curve *out, bool *warn,
	    char *err, size_t errlen)
{
	memset(out, 0, sizeof *out);
	if (warn)
		*warn = false;
	if (take_readings(code, cd, n, out, warn, err, errlen))
		return -1;
	struct data d = {out->code, out->cd, out->n};
	double g[SCAN_STEPS + 1], s[SCAN_STEPS + 1];
	size_t best = 0;
	for (size_t i = 0; i <= SCAN_STEPS; i++) {
		g[i] = GAMMA_LO * pow(GAMMA_HI / GAMMA_LO, (double)i / SCAN_STEPS);
		s[i] = sse_at(g[i], &d);
		if (s[i] < s[best])
			best = i;
	}
	if (best == 0 || best == SCAN_STEPS) {
		snprintf(err, errlen, "the readings are not a power curve with gamma between %g and %g",
			 GAMMA_LO, GAMMA_HI);
		return -1;
	}
	double gamma;
	if (refine(&d, g[best - 1], g[best], g[best + 1], &gamma)) {
		snprintf(err, errlen, "the gamma fit did not converge");
		return -1;
	}
	double a, b;
	double sse = solve_linear(&d, gamma, &a, &b);
	if (!(b > 0)) {
		snprintf(err, errlen, "the fitted light does not rise with the code");
		return -1;
	}
	out->present = true;
	out->gamma = gamma;
	out->l_min = a;
	out->l_max = a + b;
	out->rms = sqrt(sse / (double)out->n);
	return 0;
}

bool lum_fit_is_poor(const struct lum_curve *c)
{
	return c->rms > LUM_POOR_FIT_SHARE * (c->l_max - c->l_min);
}

bool lum_uses_table(const struct lum_curve *c, enum lum_model model)
{
	if (c->n < 2)
		return false;
	if (model == LUM_MODEL_TABLE)
		return true;
	return model == LUM_MODEL_AUTO && lum_fit_is_poor(c);
}

double lum_model_eval(const struct lum_curve *c, double code)
{
	double u = code <= 0 ? 0 : code >= 255 ? 1 : code / 255.0;
	return c->l_min + (c->l_max - c->l_min) * pow(u, c->gamma);
}

double lum_table_eval(const struct lum_curve *c, double code)
{
	if (c->n == 0)
		return 0;
	if (code <= c->code[0])
		return c->cd[0];
	for (size_t i = 1; i < c->n; i++)
		if (code <= c->code[i]) {
			double t = (code - c->code[i - 1]) / (double)(c->code[i] - c->code[i - 1]);
			return c->cd[i - 1] + t * (c->cd[i] - c->cd[i - 1]);
		}
	return c->cd[c->n - 1];
}

double lum_curve_eval(const struct lum_curve *c, enum lum_model model, double code)
{
	return lum_uses_table(c, model) ? lum_table_eval(c, code) : lum_model_eval(c, code);
}

int lum_code_for(const struct lum_curve *c, enum lum_model model, double cd, double *achieved)
{
	int best = 0;
	double bestd = INFINITY, bestl = 0;
	for (int v = 0; v < 256; v++) {
		double l = lum_curve_eval(c, model, v), dist = fabs(l - cd);
		if (dist < bestd) {
			bestd = dist;
			best = v;
			bestl = l;
		}
	}
	if (achieved)
		*achieved = bestl;
	return best;
}

void lum_linear_table(const struct lum_curve *c, enum lum_model model, uint8_t t[256])
{
	double light[256];
	for (int v = 0; v < 256; v++)
		light[v] = lum_curve_eval(c, model, v);
	double lo = light[0], hi = light[255];
	for (int x = 0; x < 256; x++) {
		double target = lo + (x / 255.0) * (hi - lo), bestd = INFINITY;
		int best = 0;
		for (int v = 0; v < 256; v++) {
			double dist = fabs(light[v] - target);
			if (dist < bestd) {
				bestd = dist;
				best = v;
			}
		}
		t[x] = (uint8_t)best;
	}
}

double lum_srgb_decode(int code)
{
	double u = code / 255.0;
	return u <= 0.04045 ? u / 12.92 : pow((u + 0.055) / 1.055, 2.4);
}

/* Days since 1970-01-01 of a proleptic Gregorian date (the usual era arithmetic). */
static long days_from_civil(long y, long m, long d)
{
	y -= m <= 2;
	long era = (y >= 0 ? y : y - 399) / 400;
	long yoe = y - era * 400;
	long doy = (153 * (m + (m > 2 ? -3 : 9)) + 2) / 5 + d - 1;
	long doe = yoe * 365 + yoe / 4 - yoe / 100 + doy;
	return era * 146097 + doe - 719468;
}

static int read_date(const char *s, long *days)
{
	int y, m, d, used = 0;
	if (!s || strlen(s) != 10 || sscanf(s, "%4d-%2d-%2d%n", &y, &m, &d, &used) != 3 || used != 10)
		return -1;
	for (int i = 0; i < 10; i++)
		if ((i == 4 || i == 7) ? s[i] != '-' : (s[i] < '0' || s[i] > '9'))
			return -1;
	static const int mdays[12] = {31, 29, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31};
	if (m < 1 || m > 12 || d < 1 || d > mdays[m - 1] || y < 1900)
		return -1;
	bool leap = (y % 4 == 0 && y % 100 != 0) || y % 400 == 0;
	if (m == 2 && d == 29 && !leap)
		return -1;
	*days = days_from_civil(y, m, d);
	return 0;
}

bool lum_date_valid(const char *s)
{
	long d;
	return read_date(s, &d) == 0;
}

long lum_age_days(const char *measured, const char *today)
{
	long a, b;
	if (read_date(measured, &a) || read_date(today, &b))
		return -1;
	return b - a;
}

size_t lum_plan(int steps, const bool channel[LUM_NCHANNELS], bool ascending, unsigned long seed,
		int (*plan)[2])
{
	size_t n = 0;
	if (steps < 2 || steps > 256)
		return 0;
	for (int ch = 0; ch < LUM_NCHANNELS; ch++) {
		if (!channel[ch])
			continue;
		int last = -1;
		for (int i = 0; i < steps; i++) {
			int code = (int)lround(i * 255.0 / (steps - 1));
			if (code == last)
				continue;
			plan[n][0] = ch;
			plan[n++][1] = last = code;
		}
	}
	if (!ascending && n > 1) {
		gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
		if (rng) {
			gsl_rng_set(rng, seed);
			gsl_ran_shuffle(rng, plan, n, sizeof plan[0]);
			gsl_rng_free(rng);
		}
	}
	return n;
}

int lum_reading_parse(const char *s, double *cd, char *msg, size_t len)
{
	while (*s == ' ' || *s == '\t')
		s++;
	size_t n = strlen(s);
	while (n && (s[n - 1] == ' ' || s[n - 1] == '\t'))
		n--;
	char buf[64];
	if (!n) {
		snprintf(msg, len, "type the reading in cd/m2");
		return -1;
	}
	if (n >= sizeof buf || strspn(s, "0123456789+-.eE") < n) {
		snprintf(msg, len, "'%.*s' is not a number; type the reading in cd/m2",
			 (int)(n < 40 ? n : 40), s);
		return -1;
	}
	memcpy(buf, s, n);
	buf[n] = '\0';
	char *end;
	errno = 0;
	double x = strtod(buf, &end);
	if (end == buf || *end || errno == ERANGE || !isfinite(x)) {
		snprintf(msg, len, "'%s' is not a number; type the reading in cd/m2", buf);
		return -1;
	}
	if (x < 0) {
		snprintf(msg, len, "%g is negative: a luminance is 0 cd/m2 or more", x);
		return -1;
	}
	*cd = x;
	return 0;
}

bool lum_reading_out_of_order(const int *codes, const double *cds, size_t n, int code, double cd,
			      int *other_code, double *other_cd)
{
	for (size_t i = 0; i < n; i++)
		if ((codes[i] < code && cds[i] > cd) || (codes[i] > code && cds[i] < cd)) {
			*other_code = codes[i];
			*other_cd = cds[i];
			return true;
		}
	return false;
}
