/* test_plan — trial plans: reproducible from the seed, run limits kept, filters, repeats, frames,
 * duration estimate, adaptive blocks. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <string.h>
#include <cmocka.h>

#include "plan.h"
#include "protocol_file.h"
#include "rig_file.h"
#include "stimlist_file.h"

struct fixture {
	struct protocol p;
	struct stimlist l;
	struct rig r;
};

static const char *list_csv =
	"image,category,level,ex\n"
	"a0.png,a,0,1\na1.png,a,1,2\na2.png,a,2,3\n"
	"b0.png,b,0,1\nb1.png,b,1,2\nb2.png,b,2,3\n"
	"c0.png,c,0,1\nc1.png,c,1,2\nc2.png,c,2,3\n";

static void setup_with(struct fixture *f, const char *blocks)
{
	char text[4096];
	snprintf(text, sizeof text, "[experiment]\nlist = s.csv\n[categories]\na = 1\nb = 2\nc = 3\n"
		 "[timing]\nfixation_ms = 400\nblank_ms = 0\nstimulus_ms = 100\nmask_ms = 0\n"
		 "response_ms = 0\nfeedback_ms = 300\niti_ms = 500\n[display]\nsize_deg = 4\n%s",
		 blocks);
	struct diag_list d;
	diag_init(&d);
	assert_int_equal(protocol_parse("p.ini", text, &f->p, &d), 0);
	assert_int_equal(stimlist_parse("s.csv", list_csv, strlen(list_csv), &f->p, &f->l, &d), 0);
	assert_int_equal(rig_parse("r.ini", "[screen]\nwidth_cm=53\nheight_cm=30\nwidth_px=1920\n"
				   "height_px=1080\ndistance_cm=57\nrefresh_hz=85\n", &f->r, &d), 0);
	assert_int_equal(d.n, 0);
	diag_clear(&d);
}

static void teardown(struct fixture *f)
{
	protocol_clear(&f->p);
	stimlist_clear(&f->l);
	rig_clear(&f->r);
}

/* Same seed, same plan; another seed, another order; each category keeps its count. */
static void plan_testReproducible(void **state)
{
	(void)state;
	struct fixture f;
	setup_with(&f, "[block main]\nrepeats = 4\n");
	struct plan a, b, c;
	struct diag_list d;
	diag_init(&d);
	assert_int_equal(plan_build(&f.p, &f.l, &f.r, 42, &a, &d), 0);
	assert_int_equal(plan_build(&f.p, &f.l, &f.r, 42, &b, &d), 0);
	assert_int_equal(plan_build(&f.p, &f.l, &f.r, 43, &c, &d), 0);
	assert_int_equal(a.ntrials, 36);
	assert_string_equal(a.hash, b.hash);
	assert_memory_equal(a.trials, b.trials, a.ntrials * sizeof *a.trials);
	assert_string_not_equal(a.hash, c.hash);
	int count[3] = {0};
	for (size_t i = 0; i < a.ntrials; i++) {
		count[a.trials[i].choice]++;
		assert_int_equal(a.trials[i].trial, (int)i);
		assert_int_equal(a.trials[i].block_trial, (int)i);
		assert_int_equal(a.trials[i].staircase, -1);
		assert_int_equal(a.trials[i].choice, f.l.items[a.trials[i].stim].choice);
	}
	assert_int_equal(count[0], 12);
	assert_int_equal(count[2], 12);
	plan_clear(&a);
	plan_clear(&b);
	plan_clear(&c);
	plan_clear(NULL);
	diag_clear(&d);
	teardown(&f);
}

static int longest_run(const struct plan *pl)
{
	int best = 0, run = 0;
	for (size_t i = 0; i < pl->ntrials; i++) {
		run = i && pl->trials[i].choice == pl->trials[i - 1].choice ? run + 1 : 1;
		best = run > best ? run : best;
	}
	return best;
}

/* longest_streak = 1 with equal counts is always possible; over 200 seeds it always holds.
 * Without a limit, runs of 3 or more do occur (so the check above can fail). */
static void plan_testLongestStreak(void **state)
{
	(void)state;
	struct fixture f, g;
	setup_with(&f, "[block main]\nrepeats = 5\nlongest_streak = 1\n");
	setup_with(&g, "[block main]\nrepeats = 5\n");
	struct diag_list d;
	diag_init(&d);
	int unlimited_long = 0;
	for (unsigned seed = 1; seed <= 200; seed++) {
		struct plan a, b;
		assert_int_equal(plan_build(&f.p, &f.l, &f.r, seed, &a, &d), 0);
		assert_int_equal(longest_run(&a), 1);
		assert_int_equal(plan_build(&g.p, &g.l, &g.r, seed, &b, &d), 0);
		unlimited_long += longest_run(&b) >= 3;
		plan_clear(&a);
		plan_clear(&b);
	}
	assert_true(unlimited_long > 100);
	assert_int_equal(diag_count(&d, DIAG_ERROR), 0);
	diag_clear(&d);
	teardown(&f);
	teardown(&g);
}

/* A run limit no order can meet is an error at the block's line. */
static void plan_testImpossibleRun(void **state)
{
	(void)state;
	struct fixture f;
	setup_with(&f, "[block main]\nselect = category=a,b\nlongest_streak = 1\n[block x]\n"
		       "select = category=a & level=0,1\nlongest_streak = 1\n");
	struct plan a;
	struct diag_list d;
	diag_init(&d);
	assert_int_equal(plan_build(&f.p, &f.l, &f.r, 1, &a, &d), -1);
	char buf[512];
	diag_format(&d.v[0], buf, sizeof buf);
	assert_string_equal(buf, "p.ini:20: error: block 'x': no order of its 2 trials keeps runs "
			    "of one category to longest_streak = 1");
	diag_clear(&d);
	teardown(&f);
}

/* order = fixed keeps list order, repeat after repeat; filters select numerically on level. */
static void plan_testFixedAndFilters(void **state)
{
	(void)state;
	struct fixture f;
	setup_with(&f, "[block one]\nselect = level=1.0,2 & ex=2,3\norder = fixed\nrepeats = 2\n"
		       "[block none]\nselect = category=zzz\n");
	struct plan a;
	struct diag_list d;
	diag_init(&d);
	assert_int_equal(plan_build(&f.p, &f.l, &f.r, 7, &a, &d), -1);
	char buf[512];
	diag_format(&d.v[0], buf, sizeof buf);
	assert_string_equal(buf, "p.ini:22: error: block 'none' selects no rows of the list");
	diag_clear(&d);
	teardown(&f);
	setup_with(&f, "[block one]\nselect = level=1.0,2 & ex=2,3\norder = fixed\nrepeats = 2\n");
	diag_init(&d);
	assert_int_equal(plan_build(&f.p, &f.l, &f.r, 7, &a, &d), 0);
	int want[] = {1, 2, 4, 5, 7, 8, 1, 2, 4, 5, 7, 8};
	assert_int_equal(a.ntrials, 12);
	for (size_t i = 0; i < 12; i++)
		assert_int_equal(a.trials[i].stim, want[i]);
	plan_clear(&a);
	diag_clear(&d);
	teardown(&f);
}

/* Frames at 85 Hz: 400 ms = 34 frames exactly; 100 ms = 8.5 frames, a tie, rounded to even = 8
 * (docs/timing.md), with a warning at its line; 500 ms = 42.5 -> 42 frames. Duration: per trial
 * 34 + 0 + 8 + 0 frames, 600 ms assumed RT (response unlimited), no feedback outside practice, 42
 * frames of ITI, and 120 flips of refresh measurement per block — arithmetic from the plan's
 * documented rule. */
static void plan_testFramesAndDuration(void **state)
{
	(void)state;
	struct fixture f;
	setup_with(&f, "[block main]\n");
	struct plan a;
	struct diag_list d;
	diag_init(&d);
	assert_int_equal(plan_build(&f.p, &f.l, &f.r, 1, &a, &d), 0);
	assert_int_equal(a.epoch_frames[EPOCH_FIXATION], 34);
	assert_int_equal(a.epoch_frames[EPOCH_STIMULUS], 8);
	assert_int_equal(a.epoch_frames[EPOCH_BLANK], 0);
	assert_int_equal(a.epoch_frames[EPOCH_ITI], 42);
	assert_int_equal(d.n, 3);   /* stimulus, feedback (25.5 frames) and iti */
	char buf[512];
	diag_format(&d.v[0], buf, sizeof buf);
	assert_string_equal(buf, "p.ini:10: warning: stimulus_ms = 100 is 8.50 frames at 85 Hz; shown "
			    "as 8 frames = 94.1 ms");
	double per_trial = 34000.0 / 85 + 8000.0 / 85 + 600 + 42000.0 / 85;
	assert_float_equal(a.est_seconds, (9 * per_trial + 120000.0 / 85) / 1000.0, 1e-9);
	/* The block carries the same estimate (the console's blocks screen shows it). */
	assert_int_equal(a.nblocks, 1);
	assert_float_equal(a.blocks[0].trial_seconds, per_trial / 1000.0, 1e-9);
	assert_float_equal(a.blocks[0].est_seconds, a.est_seconds, 1e-9);
	/* 4° at 57 cm on 1920 px / 53 cm: 144 px (see test_geom). */
	assert_int_equal(a.stim_px, 144);
	plan_clear(&a);
	diag_clear(&d);
	teardown(&f);
}

/* Adaptive blocks: the staircases of the [adaptive] section interleaved in rounds (each staircase
 * once per round), no image yet (stim -1), per-category staircases keep their category. */
static void plan_testAdaptiveStaircases(void **state)
{
	(void)state;
	struct fixture f;
	setup_with(&f, "[block st]\nselect = level=1,2\nadaptive = stair\n"
		       "[adaptive stair]\nrule = updown\nstart = 2, 1\nper_category = yes\n"
		       "step = 0.1\ntrials = 5\n");
	struct plan a, b;
	struct diag_list d;
	diag_init(&d);
	assert_int_equal(plan_build(&f.p, &f.l, &f.r, 5, &a, &d), 0);
	assert_int_equal(diag_count(&d, DIAG_ERROR), 0);
	assert_int_equal(a.ntrials, 30);   /* 3 categories × 2 starts × 5 trials */
	for (size_t round = 0; round < 5; round++) {
		int seen[6] = {0};
		for (size_t j = 0; j < 6; j++) {
			const struct plan_trial *t = &a.trials[round * 6 + j];
			assert_int_equal(t->stim, -1);
			assert_true(t->staircase >= 0 && t->staircase < 6);
			assert_int_equal(t->choice, t->staircase / 2);
			assert_int_equal(t->block_trial, (int)(round * 6 + j));
			seen[t->staircase]++;
		}
		for (int s = 0; s < 6; s++)
			assert_int_equal(seen[s], 1);
	}
	assert_int_equal(plan_build(&f.p, &f.l, &f.r, 5, &b, &d), 0);
	assert_string_equal(a.hash, b.hash);
	plan_clear(&a);
	plan_clear(&b);
	diag_clear(&d);
	teardown(&f);
}

/* A QUEST prior mean outside the levels the block offers is an error at its line. */
static void plan_testAdaptivePriorOutsideLevels(void **state)
{
	(void)state;
	struct fixture f;
	setup_with(&f, "[block st]\nselect = level=1,2\nadaptive = stair\n"   /* 17-19 */
		       "[adaptive stair]\nrule = quest\nprior_mean = 5\ntrials = 5\n");   /* 20-23 */
	struct plan a;
	struct diag_list d;
	diag_init(&d);
	assert_int_equal(plan_build(&f.p, &f.l, &f.r, 5, &a, &d), -1);
	assert_int_equal(diag_count(&d, DIAG_ERROR), 1);
	char buf[512];
	diag_format(&d.v[0], buf, sizeof buf);
	assert_string_equal(buf, "p.ini:22: error: block 'st' (adaptive stair): the prior mean 5 is "
			    "outside the level range [1, 2]");
	plan_clear(&a);
	diag_clear(&d);
	teardown(&f);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(plan_testReproducible),
		cmocka_unit_test(plan_testLongestStreak),
		cmocka_unit_test(plan_testImpossibleRun),
		cmocka_unit_test(plan_testFixedAndFilters),
		cmocka_unit_test(plan_testFramesAndDuration),
		cmocka_unit_test(plan_testAdaptiveStaircases),
		cmocka_unit_test(plan_testAdaptivePriorOutsideLevels),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
