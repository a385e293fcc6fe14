/* test_analysis — the report's tables on a small hand-made set of trial rows whose counts are
 * worked out by hand in the comments: conditions, RT rules, confusions, items, timing, pooling. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <string.h>
#include <cmocka.h>

#include "analysis.h"

#define ROW(subj, blk, lvl, img, cat, resp, cor, rt) \
	{"sess1", subj, blk, "main", false, "", img, cat, resp, true, lvl, cor, false, false, \
	 rt > 0, rt, 12, 12, 0, true}

/* Subject S1, block 0, 3 choices (ring, star, wave):
 *   level 1: 6 trials — 3 correct (RTs 400, 500, 600), 2 wrong (ring->star twice), 1 timeout
 *   level 2: 5 trials — 4 correct (RTs 300, 320, 80 [anticipation], 340), 1 wrong (star->wave)
 * plus one practice trial, which every table leaves out. */
static struct analysis_row rows[] = {
	ROW("S1", 0, 1.0, "r1.png", "ring", "ring", 1, 400),
	ROW("S1", 0, 1.0, "r1.png", "ring", "star", 0, 450),
	ROW("S1", 0, 1.0, "r2.png", "ring", "star", 0, 470),
	ROW("S1", 0, 1.0, "s1.png", "star", "star", 1, 500),
	ROW("S1", 0, 1.0, "w1.png", "wave", "wave", 1, 600),
	ROW("S1", 0, 1.0, "w1.png", "wave", NULL, -1, 0),
	ROW("S1", 0, 2.0, "r3.png", "ring", "ring", 1, 300),
	ROW("S1", 0, 2.0, "s2.png", "star", "star", 1, 320),
	ROW("S1", 0, 2.0, "s2.png", "star", "star", 1, 80),
	ROW("S1", 0, 2.0, "w2.png", "wave", "wave", 1, 340),
	ROW("S1", 0, 2.0, "s3.png", "star", "wave", 0, 700),
	{"sess1", "S1", 0, "practice", true, "", "p.png", "ring", "ring", true, 9.0, 1, false, false,
	 true, 500, 12, 12, 0, true},
};

static struct analysis *run_rows(struct analysis_row *r, size_t n)
{
	struct analysis_opts o;
	analysis_opts_default(&o, 3);
	o.fit_opts.nboot = 0;
	o.fit_opts.shape = PSYFN_LOGISTIC;
	struct analysis_session s = {"sess1", "S1", "simulated", 60.0, NULL, 0};
	return analysis_run(r, n, &s, 1, &o);
}

static void analysis_testConditions(void **state)
{
	(void)state;
	rows[5].timed_out = true;
	struct analysis *a = run_rows(rows, sizeof rows / sizeof rows[0]);
	assert_non_null(a);
	assert_int_equal(a->npractice, 1);
	assert_int_equal(a->nsubjects, 1);
	assert_int_equal(a->ncells, 2);   /* one subject: no pooled copy */
	const struct analysis_cell *c1 = &a->cells[0], *c2 = &a->cells[1];
	assert_float_equal(c1->level, 1.0, 0);
	assert_int_equal(c1->trials, 6);
	assert_int_equal(c1->n, 5);       /* the timeout has no response */
	assert_int_equal(c1->k, 3);
	assert_int_equal(c1->timeouts, 1);
	assert_float_equal(c1->pc, 0.6, 1e-15);
	double lo, hi;
	stats_ci(STATS_CI_WILSON, 3, 5, 0.95, &lo, &hi);
	assert_float_equal(c1->lower, lo, 0);
	assert_float_equal(c1->upper, hi, 0);
	assert_true(c1->has_dprime);
	/* RTs of correct trials only: 400, 500, 600 -> median 500. */
	assert_int_equal(c1->rt.n, 3);
	assert_float_equal(c1->rt.median, 500, 0);
	/* Level 2: the 80 ms response is an anticipation, counted and not averaged: 300, 320, 340. */
	assert_int_equal(c2->k, 4);
	assert_int_equal(c2->anticipations, 1);
	assert_int_equal(c2->rt.n, 3);
	assert_float_equal(c2->rt.median, 320, 0);
	/* Pooled RT of correct trials: 300 320 340 400 500 600 -> median 370. */
	assert_int_equal(a->rt.n, 6);
	assert_float_equal(a->rt.median, 370, 0);
	/* The fit over the two levels exists (ok or said why) and the series is the block. */
	assert_int_equal(a->nseries, 1);
	assert_int_equal(a->series[0].npts, 2);
	assert_int_equal(a->series[0].pts[0].n, 5);
	assert_int_equal(a->series[0].pts[1].k, 4);
	analysis_destroy(a);
}

static void analysis_testConfusions(void **state)
{
	(void)state;
	struct analysis *a = run_rows(rows, sizeof rows / sizeof rows[0]);
	assert_int_equal(a->ncat, 3);
	assert_string_equal(a->cats[0], "ring");
	assert_string_equal(a->cats[1], "star");
	assert_string_equal(a->cats[2], "wave");
	assert_int_equal(a->nconf, 2);
	const struct analysis_confusion *c = &a->conf[0];
	/* Level 1: ring row = 1 ring, 2 star; star row = 1 star; wave row = 1 wave (timeout left out). */
	assert_int_equal(c->counts[0 * 3 + 0], 1);
	assert_int_equal(c->counts[0 * 3 + 1], 2);
	assert_int_equal(c->row_n[0], 3);
	assert_int_equal(c->row_n[2], 1);
	assert_int_equal(c->ntop, 1);
	assert_int_equal(c->top[0].truth, 0);
	assert_int_equal(c->top[0].chosen, 1);
	assert_float_equal(c->top[0].share, 2.0 / 3.0, 1e-15);
	/* Level 2: star -> wave once, of 3 star responses. */
	assert_int_equal(a->conf[1].counts[1 * 3 + 2], 1);
	assert_float_equal(a->conf[1].top[0].share, 1.0 / 3.0, 1e-15);
	analysis_destroy(a);
}

/* Items with enough trials are flagged: 8 of 8 (Wilson lower 0.676 > 2/3) at ceiling, 0 of 8
 * (upper 0.324 < 2/3) at floor; 6 of 6 (lower 0.610) is not yet evidence of a ceiling. Wilson
 * bounds: z = 1.96 score interval, worked by hand (n/(n+z²) for k = n). */
static void analysis_testItemFlagsNeedEvidence(void **state)
{
	(void)state;
	struct analysis_row v[22];
	size_t n = 0;
	for (int i = 0; i < 8; i++) {
		v[n++] = (struct analysis_row)ROW("S1", 0, 1.0, "a.png", "ring", "ring", 1, 400);
		v[n++] = (struct analysis_row)ROW("S1", 0, 1.0, "b.png", "star", "wave", 0, 400);
	}
	for (int i = 0; i < 6; i++)
		v[n++] = (struct analysis_row)ROW("S1", 0, 2.0, "c.png", "wave", "wave", 1, 400);
	struct analysis *a = run_rows(v, n);
	assert_int_equal(a->nitems, 3);
	assert_true(a->items[0].ceiling);   /* a.png, ring */
	assert_false(a->items[0].floor);
	assert_true(a->items[1].floor);     /* b.png, star */
	assert_false(a->items[2].ceiling);  /* c.png, wave: 6 of 6 */
	analysis_destroy(a);
}

static void analysis_testItemsAndCategories(void **state)
{
	(void)state;
	struct analysis *a = run_rows(rows, sizeof rows / sizeof rows[0]);
	/* Items sorted by category then image: r1 r2 r3 s1 s2 s3 w1 w2. */
	assert_int_equal(a->nitems, 8);
	assert_string_equal(a->items[0].image, "r1.png");
	assert_int_equal(a->items[0].n, 2);
	assert_int_equal(a->items[0].k, 1);
	assert_false(a->items[0].ceiling);
	/* One trial is no evidence: r2 (0 of 1; Wilson [0, 0.79]) and r3 (1 of 1; [0.21, 1]) both
	 * straddle 2/3, halfway between chance 1/3 and 1, so neither is flagged. */
	assert_false(a->items[1].floor);
	assert_false(a->items[2].ceiling);
	assert_string_equal(a->items[4].image, "s2.png");
	assert_float_equal(a->items[4].median_rt, 320, 0);   /* the 80 ms anticipation left out */
	assert_string_equal(a->items[6].image, "w1.png");
	assert_int_equal(a->items[6].n, 1);    /* the timeout is not a response */
	/* Categories: ring 2 of 4, star 3 of 4, wave 2 of 2. */
	assert_int_equal(a->ncatacc, 3);
	assert_int_equal(a->catacc[0].k, 2);
	assert_int_equal(a->catacc[0].n, 4);
	assert_int_equal(a->catacc[1].k, 3);
	assert_int_equal(a->catacc[2].n, 2);
	double lo, hi;
	stats_ci(STATS_CI_WILSON, 3, 4, 0.95, &lo, &hi);
	assert_float_equal(a->catacc[1].lower, lo, 0);
	analysis_destroy(a);
}

static void analysis_testTiming(void **state)
{
	(void)state;
	struct analysis_row r[sizeof rows / sizeof rows[0]];
	memcpy(r, rows, sizeof rows);
	r[3].frames_actual = 13;
	r[3].dropped_frames = 2;
	r[3].timing_ok = false;
	struct analysis *a = run_rows(r, sizeof r / sizeof r[0]);
	assert_int_equal(a->ntiming, 1);
	const struct analysis_timing *t = &a->timing[0];
	assert_string_equal(t->timing_mode, "simulated");
	assert_float_equal(t->refresh_hz, 60.0, 0);
	assert_int_equal(t->trials, 12);       /* timing counts practice trials too */
	assert_int_equal(t->exact, 11);
	assert_int_equal(t->timing_faults, 1);
	assert_int_equal(t->dropped_frames, 2);
	assert_int_equal(t->trials_with_drops, 1);
	assert_int_equal(t->anticipations, 1);
	analysis_destroy(a);
}

/* Without a chosen shape, rising data get the Weibull and falling data the logistic. */
static void analysis_testShapeAuto(void **state)
{
	(void)state;
	struct analysis_row r[sizeof rows / sizeof rows[0]];
	memcpy(r, rows, sizeof rows);
	struct analysis_opts o;
	analysis_opts_default(&o, 3);
	o.fit_opts.nboot = 0;
	o.shape_auto = true;
	struct analysis *a = analysis_run(r, 11, NULL, 0, &o);
	assert_int_equal(a->series[0].fit.f.shape, PSYFN_WEIBULL);   /* 0.6 then 0.8 */
	analysis_destroy(a);
	for (size_t i = 0; i < 11; i++)
		r[i].level = r[i].level == 1.0 ? 2.0 : 1.0;   /* now 0.8 then 0.6: falling */
	a = analysis_run(r, 11, NULL, 0, &o);
	assert_int_equal(a->series[0].fit.f.shape, PSYFN_LOGISTIC);
	analysis_destroy(a);
}

static void analysis_testPooledAndEdges(void **state)
{
	(void)state;
	struct analysis_row r[sizeof rows / sizeof rows[0]];
	memcpy(r, rows, sizeof rows);
	for (size_t i = 0; i < 4; i++)
		r[i].subject = "S2";
	struct analysis *a = run_rows(r, sizeof r / sizeof r[0]);
	assert_int_equal(a->nsubjects, 2);
	size_t pooled = 0, trials = 0;
	for (size_t i = 0; i < a->ncells; i++)
		if (!a->cells[i].subject) {
			pooled++;
			trials += a->cells[i].trials;
		}
	assert_int_equal(pooled, 2);
	assert_int_equal(trials, 11);
	analysis_destroy(a);
	/* No rows: empty tables, no crash. */
	a = run_rows(NULL, 0);
	assert_non_null(a);
	assert_int_equal(a->ncells, 0);
	assert_int_equal(a->nrt, 0);
	assert_true(isnan(a->rt.median));
	analysis_destroy(a);
	/* m < 2 is refused. */
	struct analysis_opts o;
	analysis_opts_default(&o, 1);
	assert_null(analysis_run(rows, 1, NULL, 0, &o));
	analysis_destroy(NULL);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(analysis_testConditions),
		cmocka_unit_test(analysis_testConfusions),
		cmocka_unit_test(analysis_testItemsAndCategories),
		cmocka_unit_test(analysis_testItemFlagsNeedEvidence),
		cmocka_unit_test(analysis_testTiming),
		cmocka_unit_test(analysis_testShapeAuto),
		cmocka_unit_test(analysis_testPooledAndEdges),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
