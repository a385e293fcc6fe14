/* test_protocol_adaptive — the protocol's [adaptive NAME] sections: values into struct
 * adapt_spec, defaults, and every kind of problem with its FILE:LINE. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cmocka.h>

#include "adapt.h"
#include "protocol.h"

/* Lines 1-13; the adaptive section of each test starts on line 14. */
static const char *head =
	"[experiment]\n"
	"list = s.csv\n"
	"[categories]\n"
	"a = f\n"
	"b = j\n"
	"c = k\n"
	"[timing]\n"
	"stimulus_ms = 100\n"
	"[display]\n"
	"size_deg = 4\n"
	"[block main]\n"
	"adaptive = stairs\n"
	"select = category=a,b,c\n";

static char *with(const char *section)
{
	char *t = malloc(strlen(head) + strlen(section) + 1);
	strcpy(t, head);
	strcat(t, section);
	return t;
}

/* Every diagnostic, one per line, as the user sees it. */
static char *all(const struct diag_list *d)
{
	size_t cap = 64 + d->n * 300;
	char *out = calloc(1, cap), buf[600];
	for (size_t i = 0; i < d->n; i++) {
		diag_format(&d->v[i], buf, sizeof buf);
		strcat(out, buf);
		strcat(out, "\n");
	}
	return out;
}

/* Parses HEAD + SECTION and checks that the diagnostics are exactly WANT (lines joined). */
static void expect(const char *section, int rc, const char *want)
{
	char *text = with(section);
	struct protocol p;
	struct diag_list d;
	diag_init(&d);
	int got = protocol_parse("t.ini", text, &p, &d);
	char *msgs = all(&d);
	if (strcmp(msgs, want) || got != rc)
		print_message("expected (rc %d):\n%sgot (rc %d):\n%s", rc, want, got, msgs);
	assert_string_equal(msgs, want);
	assert_int_equal(got, rc);
	free(msgs);
	free(text);
	protocol_clear(&p);
	diag_clear(&d);
}

static void protocol_adaptive_testUpDown(void **state)
{
	(void)state;
	char *text = with("[adaptive stairs]\n"
			  "rule = updown\n"
			  "axis = log\n"
			  "easier = lower\n"
			  "start = 32, 4\n"
			  "per_category = yes\n"
			  "trials = 60\n"
			  "reversals = 12\n"
			  "down = 3\n"
			  "step = 0.2\n"
			  "halve_after = 2, 4\n"
			  "floor = 1\n"
			  "ceiling = 64\n"
			  "average_last = 8\n");
	struct protocol p;
	struct diag_list d;
	diag_init(&d);
	assert_int_equal(protocol_parse("t.ini", text, &p, &d), 0);
	assert_int_equal(d.n, 0);
	assert_int_equal(p.nadaptive, 1);
	const struct adapt_spec *s = adapt_spec_find(p.adaptive, p.nadaptive, "stairs");
	assert_non_null(s);
	assert_null(adapt_spec_find(p.adaptive, p.nadaptive, "other"));
	assert_int_equal(s->base.rule, ADAPT_UPDOWN);
	assert_int_equal(s->base.axis, ADAPT_AXIS_LOG);
	assert_true(s->base.easier_lower);
	assert_int_equal(s->nstarts, 2);
	assert_true(s->starts[0] == 32 && s->starts[1] == 4);
	assert_int_equal(s->lines.start, 18);
	assert_true(s->per_category);
	assert_int_equal(adapt_spec_nstairs(s, p.nchoices), 6);
	assert_int_equal(s->base.max_trials, 60);
	assert_int_equal(s->base.stop_reversals, 12);
	assert_int_equal(s->base.down, 3);
	assert_true(s->base.step_down == 0.2);
	assert_int_equal(s->base.nhalve, 2);
	assert_int_equal(s->base.halve_after[1], 4);
	assert_true(s->has_floor && s->has_ceiling);
	assert_true(s->base.floor == 1 && s->base.ceiling == 64);
	assert_int_equal(s->base.threshold_reversals, 8);
	protocol_clear(&p);
	diag_clear(&d);
	free(text);
}

static void protocol_adaptive_testQuestDefaults(void **state)
{
	(void)state;
	char *text = with("[adaptive stairs]\n"
			  "rule = quest\n"
			  "prior_mean = 0.1\n"
			  "trials = 40\n");
	struct protocol p;
	struct diag_list d;
	diag_init(&d);
	assert_int_equal(protocol_parse("t.ini", text, &p, &d), 0);
	assert_int_equal(d.n, 0);
	const struct adapt_spec *s = adapt_spec_find(p.adaptive, p.nadaptive, "stairs");
	assert_non_null(s);
	assert_int_equal(s->base.rule, ADAPT_QUEST);
	assert_int_equal(s->base.axis, ADAPT_AXIS_LOG);      /* default */
	assert_false(s->base.easier_lower);                  /* default: higher is easier */
	assert_true(s->base.beta == 3.5 && s->base.delta == 0.01);   /* Watson & Pelli 1983 */
	assert_true(s->base.prior_sd == 0.5 && s->base.grid_step == 0.01);
	assert_int_equal(s->base.test_at, ADAPT_TEST_AT_MEAN);
	assert_false(s->has_floor || s->has_ceiling);
	assert_true(isnan(s->base.floor));
	/* γ = 1/m with the protocol's 3 choices */
	struct adapt_params q;
	int choice;
	char why[160];
	assert_int_equal(adapt_spec_expand(s, p.nchoices, NULL, 0, 0, &q, &choice, why, sizeof why),
			 0);
	assert_float_equal(q.gamma, 1.0 / 3, 1e-15);
	assert_int_equal(choice, -1);
	protocol_clear(&p);
	diag_clear(&d);
	free(text);
}

/* The list of bad values, each reported at its own line. */
static void protocol_adaptive_testBadValues(void **state)
{
	(void)state;
	expect("[adaptive stairs]\n"          /* 14 */
	       "rule = updown\n"              /* 15 */
	       "start = 0.5\n"                /* 16 */
	       "trials = 30\n"                /* 17 */
	       "down = 0\n"                   /* 18 */
	       "step = -0.1\n",               /* 19 */
	       -1,
	       "t.ini:18: error: down = 0 is out of range (1 to 20)\n"
	       "t.ini:19: error: step = -0.1 is out of range (above 0, up to 1e+12 axis units)\n");
	expect("[adaptive stairs]\n"
	       "rule = updown\n"
	       "start = 0.5\n"
	       "trials = 30\n"
	       "step = 0.1\n"                 /* 18 */
	       "floor = 2\n"                  /* 19 */
	       "ceiling = 1\n",               /* 20 */
	       -1,
	       "t.ini:19: error: floor = 2 must be below ceiling = 1 (line 20)\n"
	       "t.ini:16: error: start = 0.5 lies outside floor = 2 and ceiling = 1\n");
	expect("[adaptive stairs]\n"
	       "rule = quest\n"
	       "prior_mean = 5\n"             /* 16 */
	       "trials = 40\n"
	       "floor = 0.01\n"
	       "ceiling = 1\n",
	       -1, "t.ini:16: error: prior_mean = 5 lies outside floor = 0.01 and ceiling = 1\n");
	expect("[adaptive stairs]\n"
	       "rule = quest\n"
	       "axis = linear\n"              /* 16 */
	       "prior_mean = 0\n"             /* 17 */
	       "trials = 40\n",
	       -1,
	       "t.ini:16: error: rule = quest works on a log axis; set axis = log (or leave it out)\n");
	expect("[adaptive stairs]\n"
	       "rule = updown\n"
	       "start = 0, 2\n"               /* 16 */
	       "step = 0.1\n"
	       "trials = 10\n",
	       -1, "t.ini:16: error: start = 0: levels on a log axis must be above 0\n");
}

/* The QUEST keys by their names: grid_step, test_at (mean, peak, percentile) and percentile. */
static void protocol_adaptive_testQuestKeys(void **state)
{
	(void)state;
	char *text = with("[adaptive stairs]\n"
			  "rule = quest\n"
			  "prior_mean = 0.1\n"
			  "trials = 40\n"
			  "grid_step = 0.02\n"
			  "test_at = percentile\n"
			  "percentile = 0.25\n");
	struct protocol p;
	struct diag_list d;
	diag_init(&d);
	assert_int_equal(protocol_parse("t.ini", text, &p, &d), 0);
	assert_int_equal(d.n, 0);
	const struct adapt_spec *s = adapt_spec_find(p.adaptive, p.nadaptive, "stairs");
	assert_non_null(s);
	assert_true(s->base.grid_step == 0.02);
	assert_int_equal(s->base.test_at, ADAPT_TEST_AT_PERCENTILE);
	assert_true(s->base.percentile == 0.25);
	protocol_clear(&p);
	diag_clear(&d);
	free(text);
	expect("[adaptive stairs]\nrule = quest\nprior_mean = 0.1\ntrials = 40\ntest_at = peak\n",
	       0, "");
	expect("[adaptive stairs]\nrule = quest\nprior_mean = 0.1\ntrials = 40\n"
	       "test_at = mode\n",   /* 18 */
	       -1, "t.ini:18: error: test_at = mode is not one of mean, peak, percentile\n");
	expect("[adaptive stairs]\nrule = quest\nprior_mean = 0.1\ntrials = 40\n"
	       "percentile = 0.3\n",   /* 18 */
	       0, "t.ini:18: warning: percentile applies only with test_at = percentile and is "
	       "ignored\n");
}

/* The words earlier versions used are errors that name the new word, at their line. */
static void protocol_adaptive_testRetiredWords(void **state)
{
	(void)state;
	expect("[adaptive stairs]\n"           /* 14 */
	       "rule = quest\n"                /* 15 */
	       "prior_mean = 0.1\n"            /* 16 */
	       "trials = 40\n"                 /* 17 */
	       "grain = 0.02\n"                /* 18 */
	       "place = quantile\n"            /* 19 */
	       "quantile = 0.25\n",            /* 20 */
	       -1,
	       "t.ini:18: error: 'grain' is now called 'grid_step': rename the key\n"
	       "t.ini:19: error: 'place' is now called 'test_at': rename the key\n"
	       "t.ini:20: error: 'quantile' is now called 'percentile': rename the key\n");
}

static void protocol_adaptive_testMissingAndMisplaced(void **state)
{
	(void)state;
	expect("[adaptive stairs]\n"          /* 14 */
	       "rule = quest\n"
	       "start = 0.1\n"                /* 16 */
	       "step = 0.1\n",                /* 17 */
	       -1,
	       "t.ini:14: error: missing required key 'trials' in [adaptive]\n"
	       "t.ini:16: error: rule = quest takes prior_mean (the prior's mean level), not start\n"
	       "t.ini:17: warning: step does not apply to rule = quest and is ignored\n");
	expect("[adaptive stairs]\n"
	       "rule = weighted\n"
	       "start = 0.1\n"
	       "trials = 20\n"
	       "down = 2\n"                   /* 18 */
	       "beta = 3\n",                  /* 19 */
	       -1,
	       "t.ini:14: error: [adaptive stairs]: rule = weighted needs step (in axis units: log10 "
	       "units on a log axis)\n"
	       "t.ini:19: warning: beta does not apply to rule = weighted and is ignored\n"
	       "t.ini:18: warning: down does not apply to rule = weighted and is ignored\n"
	       "t.ini:14: error: [adaptive stairs]: rule = weighted needs target_pc (the proportion "
	       "correct to track)\n");
	expect("[adaptive stairs]\n"
	       "rule = stairs\n"              /* 15 */
	       "trials = 20\n",
	       -1, "t.ini:15: error: rule = stairs is not one of updown, weighted, quest\n");
	expect("[adaptive stairs]\n"
	       "rule = updown\n"
	       "start = 0.1\n"
	       "prior_mean = 0.2\n"           /* 17 */
	       "step = 0.05\n"
	       "trials = 20\n"
	       "reversals = 4\n"              /* 20 */
	       "stepp = 1\n",                 /* 21 */
	       -1,
	       "t.ini:17: error: give either start or prior_mean, not both (start for rule = updown "
	       "or weighted, prior_mean for quest)\n"
	       "t.ini:21: error: unknown key 'stepp' in [adaptive]; did you mean 'step'?\n"
	       "t.ini:20: error: average_last = 6 needs at least that many reversals, but "
	       "reversals = 4 stops the staircase first\n");
}

/* What needs the whole file: chance level, unused sections, names, block keys. */
static void protocol_adaptive_testWholeFile(void **state)
{
	(void)state;
	expect("[adaptive stairs]\n"          /* 14 */
	       "rule = weighted\n"
	       "start = 0.1\n"
	       "step = 0.05\n"
	       "trials = 20\n"
	       "target_pc = 0.3\n"
	       "[adaptive spare]\n"           /* 20 */
	       "rule = quest\n"
	       "prior_mean = 1\n"
	       "trials = 5\n"
	       "[adaptive stairs]\n"          /* 24 */
	       "[adaptive bad name]\n",       /* 25 */
	       -1,
	       "t.ini:24: error: [adaptive stairs] is defined twice (first on line 14)\n"
	       "t.ini:25: error: adaptive section name 'bad name': use 1 to 64 letters, digits, '_' "
	       "or '-'\n"
	       "t.ini:14: error: [adaptive stairs]: target_pc = 0.3 is at or below chance (1/3 with 3 "
	       "choices)\n"
	       "t.ini:20: warning: [adaptive spare] is not used by any block (adaptive = spare)\n");
}

/* Block keys that adaptive blocks do not use are warned about at the block's line. */
static void protocol_adaptive_testBlockKeysIgnored(void **state)
{
	(void)state;
	char *text = with("repeats = 2\n"                /* block main, line 14 */
			  "repeat_faults = yes\n"
			  "longest_streak = 3\n"
			  "[adaptive stairs]\n"
			  "rule = quest\n"
			  "prior_mean = 1\n"
			  "trials = 5\n");
	struct protocol p;
	struct diag_list d;
	diag_init(&d);
	assert_int_equal(protocol_parse("t.ini", text, &p, &d), 0);
	char *msgs = all(&d);
	assert_string_equal(msgs,
			    "t.ini:11: warning: block 'main': repeat_faults does not apply to adaptive "
			    "blocks (every trial counts for its staircase as shown)\n"
			    "t.ini:11: warning: block 'main': repeats does not apply to adaptive blocks "
			    "(the rule's trials sets the length)\n"
			    "t.ini:11: warning: block 'main': order and longest_streak do not apply to adaptive "
			    "blocks (staircases take turns in random rounds)\n");
	free(msgs);
	free(text);
	protocol_clear(&p);
	diag_clear(&d);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(protocol_adaptive_testUpDown),
		cmocka_unit_test(protocol_adaptive_testQuestDefaults),
		cmocka_unit_test(protocol_adaptive_testBadValues),
		cmocka_unit_test(protocol_adaptive_testQuestKeys),
		cmocka_unit_test(protocol_adaptive_testRetiredWords),
		cmocka_unit_test(protocol_adaptive_testMissingAndMisplaced),
		cmocka_unit_test(protocol_adaptive_testWholeFile),
		cmocka_unit_test(protocol_adaptive_testBlockKeysIgnored),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
