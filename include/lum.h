/* lum — display luminance: the gamma model fitted to photometer readings, its inverse, and the
 * tables that linearise images. Pure computation (core; GSL only).
 *
 * A display's light for an 8-bit code v is modelled as
 *     L(v) = L_min + (L_max − L_min) · (v / 255)^γ        (cd/m²)
 * and fitted to readings (code, cd/m²) by least squares. The measured table is kept beside the
 * fit: when the fit is poor (residual RMS over 2% of L_max − L_min) or the rig asks for it, light
 * is interpolated linearly between the readings instead (`lum_curve_eval`). One curve per channel:
 * grey (all three channels at the same code) and, optionally, red, green and blue alone.
 *
 * Callers: io/rig.c (the rig's [luminance] section), the `calibrate` command, `check` and the run
 * layer (background in cd/m², the linearising table applied on the preload worker). */
#ifndef TACHIST_LUM_H
#define TACHIST_LUM_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

enum lum_channel { LUM_GREY, LUM_RED, LUM_GREEN, LUM_BLUE, LUM_NCHANNELS };

/* How light is computed from a code: from the fit, from the table, or the fit unless it is poor. */
enum lum_model { LUM_MODEL_AUTO, LUM_MODEL_FIT, LUM_MODEL_TABLE };

/* A fit whose residual RMS exceeds this share of L_max − L_min is poor (common practice, no
 * source: a couple of percent is the usual tolerance quoted for gamma fits). */
#define LUM_POOR_FIT_SHARE 0.02
#define LUM_MAX_READINGS 256   /* one per code */

struct lum_curve {
	bool present;
	double gamma, l_min, l_max;    /* the fitted model */
	double rms;                    /* residual RMS of the fit, cd/m² */
	size_t n;                      /* readings, sorted by code, codes distinct */
	int code[LUM_MAX_READINGS];
	double cd[LUM_MAX_READINGS];
};

struct lum_cal {
	struct lum_curve ch[LUM_NCHANNELS];
	char measured[11];             /* YYYY-MM-DD, "" when unknown */
	int max_age_days;              /* check warns when the calibration is older; default 30 */
	enum lum_model model;
};

/* Names: "grey", "red", "green", "blue"; lum_channel_parse also takes "all", "r", "g", "b",
 * "gray" and "white" and returns -1 for anything else. */
const char *lum_channel_name(enum lum_channel c);
int lum_channel_parse(const char *s);

/* Fits the model to N readings (CODE in 0..255, CD ≥ 0 and finite) into OUT (readings copied,
 * sorted). Refuses, with a sentence in ERR: fewer than 3 readings, more than LUM_MAX_READINGS, a
 * code out of range or given twice, a negative or non-finite reading, all readings equal, or
 * readings that fall as the code rises overall (L(255) ≤ L(0)). Returns 0 or -1. The fit holds
 * L_min and L_max free and solves γ > 0 exactly: for a given γ the least-squares L_min and L_max
 * are linear (closed form), and γ is the root of the derivative of the remaining sum of squares
 * (GSL's Brent solver), bracketed by a scan over 0.05–20. *WARN (may be NULL) gets true when
 * some reading is lower than the reading at a lower code. */
int lum_fit(const int *code, const double *cd, size_t n, struct lum_curve *out, bool *warn,
	    char *err, size_t errlen);

/* True when the curve's fit is poor (rms > LUM_POOR_FIT_SHARE of the range). */
bool lum_fit_is_poor(const struct lum_curve *c);
/* True when MODEL (and, for auto, the fit's quality) says to interpolate the table. */
bool lum_uses_table(const struct lum_curve *c, enum lum_model model);

/* Light for CODE (0..255, may be fractional) by the fitted model. */
double lum_model_eval(const struct lum_curve *c, double code);
/* Light for CODE by linear interpolation of the readings (held flat outside them). */
double lum_table_eval(const struct lum_curve *c, double code);
/* Light for CODE by whichever MODEL selects. */
double lum_curve_eval(const struct lum_curve *c, enum lum_model model, double code);

/* The code 0..255 whose light is nearest CD; *ACHIEVED (may be NULL) gets that light. */
int lum_code_for(const struct lum_curve *c, enum lum_model model, double cd, double *achieved);

/* The linearising table: T[x] is the code whose light is nearest
 *     L(0) + (x / 255) · (L(255) − L(0)),
 * so an image value x shown through T gives light proportional to x over the display's range. */
void lum_linear_table(const struct lum_curve *c, enum lum_model model, uint8_t t[256]);

/* The IEC 61966-2-1 (sRGB) decoding curve: linear light 0..1 for an 8-bit code. Used by tests and
 * the demo as a made-up display. */
double lum_srgb_decode(int code);

/* The codes to show when measuring: STEPS (2..256) evenly spaced over 0..255 (rounded, repeats
 * dropped) for each channel CHANNEL[c] asks for, as (channel, code) pairs in PLAN (room for
 * LUM_NCHANNELS * 256), shuffled with SEED (MT19937 through GSL) unless ASCENDING. Returns how
 * many. */
size_t lum_plan(int steps, const bool channel[LUM_NCHANNELS], bool ascending, unsigned long seed,
		int (*plan)[2]);
/* A photometer reading as typed: a plain decimal number (spaces around allowed), finite and not
 * negative. Returns 0 with *CD, or -1 with a sentence in MSG. */
int lum_reading_parse(const char *s, double *cd, char *msg, size_t len);
/* True when CD at CODE breaks the rise of the N earlier readings (CODES, CDS) of one channel: an
 * earlier reading at a lower code is brighter, or one at a higher code is darker. *OTHER_CODE and
 * *OTHER_CD get the first such reading. */
bool lum_reading_out_of_order(const int *codes, const double *cds, size_t n, int code, double cd,
			      int *other_code, double *other_cd);

/* Whole days from MEASURED (YYYY-MM-DD) to TODAY (YYYY-MM-DD); -1 when either cannot be read. */
long lum_age_days(const char *measured, const char *today);
/* True when S is a valid calendar date written YYYY-MM-DD. */
bool lum_date_valid(const char *s);

#endif
