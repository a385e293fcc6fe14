/* test_lum — the gamma fit of display luminance, its inverse and the linearising table. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <string.h>

#include <cmocka.h>
#include <gsl/gsl_errno.h>

#include "lum.h"

/* The 17 evenly spaced codes that `calibrate` shows by default. */
static void default_codes(int code[17])
{
	for (int i = 0; i < 17; i++)
		code[i] = (int)lround(i * 255.0 / 16.0);
}

/* Exact readings from a pure power display: the fit recovers its parameters, and the code for half
 * the range is round(255 · 0.5^(1/2.2)) = 186 (arithmetic). */
static void lum_testPowerDisplay(void **state)
{
	(void)state;
	int code[17];
	double cd[17];
	default_codes(code);
	for (int i = 0; i < 17; i++)
		cd[i] = 0.4 + (110.0 - 0.4) * pow(code[i] / 255.0, 2.2);
	struct lum_curve c;
	char err[256] = "";
	bool warn = true;
	assert_int_equal(lum_fit(code, cd, 17, &c, &warn, err, sizeof err), 0);
	assert_false(warn);
	printf("# gamma %.12f (expect 2.2) l_min %.12f (0.4) l_max %.12f (110)\n", c.gamma, c.l_min,
	       c.l_max);
	assert_true(fabs(c.gamma - 2.2) < 1e-9);
	assert_true(fabs(c.l_min - 0.4) < 1e-9);
	assert_true(fabs(c.l_max - 110.0) < 1e-8);
	assert_true(c.rms < 1e-9);
	assert_false(lum_fit_is_poor(&c));
	double half = c.l_min + 0.5 * (c.l_max - c.l_min), got;
	int v = lum_code_for(&c, LUM_MODEL_AUTO, half, &got);
	printf("# code for 50%% of the range: %d (expect 186), light %.4f\n", v, got);
	assert_int_equal(v, 186);
	assert_int_equal((int)lround(255 * pow(0.5, 1 / 2.2)), 186);
}

/* Linearising and then showing through the display's curve gives a linear ramp. Two bounds, on a
 * power display of gamma 2.2 and of gamma 1.8:
 *  - in codes: T[x] is within one 8-bit step of the exact inverse 255 · (x/255)^(1/γ)
 *    (arithmetic);
 *  - in light: the shown ramp departs from the straight line by at most one ramp step, or by half
 *    the display's own largest step between adjacent codes where that is larger (with 8-bit codes
 *    nothing closer exists: near white a γ of 2.2 moves 2.2 ramp steps per code). */
static void lum_testLinearRamp(void **state)
{
	(void)state;
	const double gammas[] = {2.2, 1.8};
	for (size_t g = 0; g < 2; g++) {
		int code[17];
		double cd[17];
		default_codes(code);
		for (int i = 0; i < 17; i++)
			cd[i] = 0.2 + 80.0 * pow(code[i] / 255.0, gammas[g]);
		struct lum_curve c;
		char err[256];
		assert_int_equal(lum_fit(code, cd, 17, &c, NULL, err, sizeof err), 0);
		uint8_t t[256];
		lum_linear_table(&c, LUM_MODEL_AUTO, t);
		double lo = lum_model_eval(&c, 0), hi = lum_model_eval(&c, 255), worst = 0, gap = 0;
		int at = 0;
		for (int v = 1; v < 256; v++) {
			double step = (lum_model_eval(&c, v) - lum_model_eval(&c, v - 1)) / (hi - lo) * 255;
			if (step > gap)
				gap = step;
		}
		for (int x = 0; x < 256; x++) {
			double exact = 255.0 * pow(x / 255.0, 1.0 / gammas[g]);
			assert_true(fabs(t[x] - exact) <= 1.0);
			double shown = (lum_model_eval(&c, t[x]) - lo) / (hi - lo) * 255.0;
			if (fabs(shown - x) > worst) {
				worst = fabs(shown - x);
				at = x;
			}
			if (x)
				assert_true(t[x] >= t[x - 1]);
		}
		printf("# gamma %.1f: largest departure from the linear ramp %.4f steps (at %d); the "
		       "display's largest step %.4f\n", gammas[g], worst, at, gap);
		assert_true(worst <= fmax(1.0, gap / 2) + 1e-9);
		assert_int_equal(t[0], 0);
		assert_int_equal(t[255], 255);
	}
}

/* The sRGB decoding curve (IEC 61966-2-1) as a made-up display: code 128 gives 0.2159 of the range
 * (the standard's formula: ((128/255 + 0.055)/1.055)^2.4 = 0.21586). The table interpolation
 * reproduces it at a measured code; the pure power fit approximates the curve (sRGB is not a power
 * law, its best single gamma is near 2.2) and misses by well under 1% of the range there. */
static void lum_testSrgbDisplay(void **state)
{
	(void)state;
	assert_true(fabs(lum_srgb_decode(128) - 0.2159) < 5e-5);
	int code[17];
	double cd[17];
	default_codes(code);
	for (int i = 0; i < 17; i++)
		cd[i] = 0.5 + 120.0 * lum_srgb_decode(code[i]);
	struct lum_curve c;
	char err[256];
	assert_int_equal(lum_fit(code, cd, 17, &c, NULL, err, sizeof err), 0);
	double table = (lum_table_eval(&c, 128) - 0.5) / 120.0;
	double fit = (lum_model_eval(&c, 128) - c.l_min) / (c.l_max - c.l_min);
	printf("# sRGB display: code 128 table %.5f fit %.5f (expect 0.2159); gamma %.4f rms %.4f\n",
	       table, fit, c.gamma, c.rms);
	assert_true(fabs(table - 0.2159) < 5e-5);
	assert_true(fabs(fit - 0.2159) < 0.01);
	assert_true(c.gamma > 2.0 && c.gamma < 2.4);
	assert_false(lum_uses_table(&c, LUM_MODEL_FIT));
	assert_true(lum_uses_table(&c, LUM_MODEL_TABLE));
}

/* A display far from a power law (a knee in the middle) is a poor fit, so auto interpolates. */
static void lum_testPoorFitUsesTable(void **state)
{
	(void)state;
	int code[17];
	double cd[17];
	default_codes(code);
	for (int i = 0; i < 17; i++)
		cd[i] = code[i] < 128 ? 1.0 + 0.01 * code[i] : 2.0 + 0.8 * (code[i] - 128);
	struct lum_curve c;
	char err[256];
	assert_int_equal(lum_fit(code, cd, 17, &c, NULL, err, sizeof err), 0);
	printf("# knee display: rms %.3f of range %.3f\n", c.rms, c.l_max - c.l_min);
	assert_true(lum_fit_is_poor(&c));
	assert_true(lum_uses_table(&c, LUM_MODEL_AUTO));
	assert_true(fabs(lum_curve_eval(&c, LUM_MODEL_AUTO, 64) - 1.64) < 1e-12);
}

/* The fit is a least-squares optimum: the sum of squares grows when any parameter moves. Noisy
 * invented readings; the comparison with scipy's curve_fit is in tests/e2e/calibrate.sh. */
static void lum_testOptimum(void **state)
{
	(void)state;
	int code[17];
	double cd[17];
	default_codes(code);
	const double noise[17] = {0.05, -0.1, 0.2, -0.15, 0.1, 0.3, -0.2, 0.05, -0.3,
				  0.25, -0.05, 0.15, -0.25, 0.1, 0.2, -0.1, 0.3};
	for (int i = 0; i < 17; i++)
		cd[i] = 0.3 + 95.0 * pow(code[i] / 255.0, 2.35) + noise[i];
	struct lum_curve c;
	char err[256];
	assert_int_equal(lum_fit(code, cd, 17, &c, NULL, err, sizeof err), 0);
	double p[3] = {c.l_min, c.l_max, c.gamma};
	double base = 0;
	for (int i = 0; i < 17; i++) {
		double r = cd[i] - lum_model_eval(&c, code[i]);
		base += r * r;
	}
	for (int k = 0; k < 3; k++)
		for (int sgn = -1; sgn <= 1; sgn += 2) {
			struct lum_curve m = c;
			double q[3] = {p[0], p[1], p[2]};
			q[k] += sgn * 1e-4 * fabs(q[k]);
			m.l_min = q[0];
			m.l_max = q[1];
			m.gamma = q[2];
			double s = 0;
			for (int i = 0; i < 17; i++) {
				double r = cd[i] - lum_model_eval(&m, code[i]);
				s += r * r;
			}
			assert_true(s > base);
		}
}

static void expect_refused(const int *code, const double *cd, size_t n, const char *word)
{
	struct lum_curve c;
	char err[256] = "";
	assert_int_equal(lum_fit(code, cd, n, &c, NULL, err, sizeof err), -1);
	printf("# refused: %s\n", err);
	assert_non_null(strstr(err, word));
}

/* Bad readings: each refused with a sentence that says why. */
static void lum_testBadReadings(void **state)
{
	(void)state;
	const int code[4] = {0, 85, 170, 255};
	const double two[2] = {1, 50};
	expect_refused(code, two, 2, "at least 3");
	const double neg[4] = {1, -2, 30, 90};
	expect_refused(code, neg, 4, "not a luminance");
	const double flat[4] = {20, 20, 20, 20};
	expect_refused(code, flat, 4, "does not change");
	const double down[4] = {90, 60, 30, 1};
	expect_refused(code, down, 4, "fall");
	const double nan_[4] = {1, NAN, 30, 90};
	expect_refused(code, nan_, 4, "not a luminance");
	const int twice[4] = {0, 85, 85, 255};
	const double ok[4] = {1, 10, 11, 90};
	expect_refused(twice, ok, 4, "twice");
	const int out[4] = {0, 85, 170, 256};
	expect_refused(out, ok, 4, "outside 0-255");
	/* A dip is accepted with a warning. */
	const double dip[4] = {1, 30, 25, 90};
	struct lum_curve c;
	char err[256];
	bool warn = false;
	assert_int_equal(lum_fit(code, dip, 4, &c, &warn, err, sizeof err), 0);
	assert_true(warn);
}

static void lum_testChannelsAndDates(void **state)
{
	(void)state;
	assert_int_equal(lum_channel_parse("r"), LUM_RED);
	assert_int_equal(lum_channel_parse("all"), LUM_GREY);
	assert_int_equal(lum_channel_parse("purple"), -1);
	assert_string_equal(lum_channel_name(LUM_BLUE), "blue");
	/* Calendar arithmetic: 2024 is a leap year (Gregorian rule), 2026 is not. */
	assert_int_equal(lum_age_days("2024-02-28", "2024-03-01"), 2);
	assert_int_equal(lum_age_days("2026-02-28", "2026-03-01"), 1);
	assert_int_equal(lum_age_days("2025-12-02", "2026-12-02"), 365);
	assert_int_equal(lum_age_days("2026-02-30", "2026-03-01"), -1);
	assert_false(lum_date_valid("2026-1-02"));
	assert_true(lum_date_valid("2000-02-29"));
	assert_false(lum_date_valid("1900-02-29"));
}

/* The measuring plan: 17 steps are every 16th code less a little, i·255/16 rounded (arithmetic:
 * 0, 16, 32, 48, 64, 80, 96, 112, 128, 143, 159, 175, 191, 207, 223, 239, 255); a shuffled plan
 * holds the same pairs, and the same seed gives the same order; four channels give four series. */
static void lum_testPlan(void **state)
{
	(void)state;
	static int plan[LUM_NCHANNELS * 256][2], again[LUM_NCHANNELS * 256][2];
	bool grey[LUM_NCHANNELS] = {true, false, false, false};
	static const int want[17] = {0, 16, 32, 48, 64, 80, 96, 112, 128, 143, 159, 175, 191, 207,
				     223, 239, 255};
	assert_int_equal(lum_plan(17, grey, true, 1, plan), 17);
	for (int i = 0; i < 17; i++) {
		assert_int_equal(plan[i][0], LUM_GREY);
		assert_int_equal(plan[i][1], want[i]);
	}
	assert_int_equal(lum_plan(17, grey, false, 42, plan), 17);
	assert_int_equal(lum_plan(17, grey, false, 42, again), 17);
	assert_memory_equal(plan, again, sizeof plan[0] * 17);
	int sum = 0, moved = 0;
	for (int i = 0; i < 17; i++) {
		sum += plan[i][1];
		moved += plan[i][1] != want[i];
	}
	assert_int_equal(sum, 2168);   /* the same codes: 0 + 16 + ... + 255 = 2168 */
	assert_true(moved > 0);
	bool all[LUM_NCHANNELS] = {true, true, true, true};
	assert_int_equal(lum_plan(5, all, true, 1, plan), 20);
	assert_int_equal(plan[19][0], LUM_BLUE);
	assert_int_equal(plan[19][1], 255);
	assert_int_equal(lum_plan(1, grey, true, 1, plan), 0);
	assert_int_equal(lum_plan(257, grey, true, 1, plan), 0);
	/* 256 steps are every code once. */
	assert_int_equal(lum_plan(256, grey, true, 1, plan), 256);
	assert_int_equal(plan[200][1], 200);
}

/* Typed readings: numbers with spaces around are taken; words, negatives, infinities and empty
 * text are refused with a sentence; a reading below one at a lower code is out of order. */
static void lum_testReadings(void **state)
{
	(void)state;
	double cd = -1;
	char msg[160];
	assert_int_equal(lum_reading_parse(" 12.5 ", &cd, msg, sizeof msg), 0);
	assert_true(cd == 12.5);
	assert_int_equal(lum_reading_parse("1e2", &cd, msg, sizeof msg), 0);
	assert_true(cd == 100);
	assert_int_equal(lum_reading_parse("0", &cd, msg, sizeof msg), 0);
	assert_int_equal(lum_reading_parse("12 cd", &cd, msg, sizeof msg), -1);
	assert_non_null(strstr(msg, "is not a number"));
	assert_int_equal(lum_reading_parse("-3", &cd, msg, sizeof msg), -1);
	assert_non_null(strstr(msg, "negative"));
	assert_int_equal(lum_reading_parse("1e999", &cd, msg, sizeof msg), -1);
	assert_int_equal(lum_reading_parse("", &cd, msg, sizeof msg), -1);
	assert_non_null(strstr(msg, "type the reading"));
	assert_int_equal(lum_reading_parse("1.2.3", &cd, msg, sizeof msg), -1);
	int codes[3] = {0, 128, 255}, oc = -1;
	double cds[3] = {0.5, 20, 100}, ol = -1;
	assert_false(lum_reading_out_of_order(codes, cds, 3, 64, 5, &oc, &ol));
	assert_true(lum_reading_out_of_order(codes, cds, 3, 64, 30, &oc, &ol));
	assert_int_equal(oc, 128);
	assert_true(ol == 20);
	assert_true(lum_reading_out_of_order(codes, cds, 3, 192, 10, &oc, &ol));
	assert_int_equal(oc, 128);
}

int main(void)
{
	gsl_set_error_handler_off();
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(lum_testPowerDisplay),
		cmocka_unit_test(lum_testLinearRamp),
		cmocka_unit_test(lum_testSrgbDisplay),
		cmocka_unit_test(lum_testPoorFitUsesTable),
		cmocka_unit_test(lum_testOptimum),
		cmocka_unit_test(lum_testBadReadings),
		cmocka_unit_test(lum_testChannelsAndDates),
		cmocka_unit_test(lum_testPlan),
		cmocka_unit_test(lum_testReadings),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
