/* test_protocol — protocol parsing: values, defaults, and every kind of problem with its line. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <string.h>
#include <cmocka.h>

#include "protocol.h"

static const char *good =
	"[experiment]\n"
	"name = t1\n"
	"list = lists/s.csv\n"
	"[categories]\n"
	"a = f\n"
	"b = J\n"
	"[timing]\n"
	"stimulus_ms = 150\n"
	"  mask_ms = 50 ; indented, with a comment\n"
	"[display]\n"
	"size_deg = 4\n"
	"mask = noise\n"
	"[block warm]\n"
	"practice = yes\n"
	"select = level=0 & category=a,b\n"
	"[block main]\n"
	"repeats = 2\n"
	"order = fixed\n"
	"longest_streak = 3\n";

/* Text of diagnostic I, formatted as the user sees it. */
static const char *msg(const struct diag_list *d, size_t i)
{
	static char buf[1024];
	if (i >= d->n)
		return "(none)";
	diag_format(&d->v[i], buf, sizeof buf);
	return buf;
}

static void protocol_testGood(void **state)
{
	(void)state;
	struct protocol p;
	struct diag_list d;
	diag_init(&d);
	assert_int_equal(protocol_parse("dir/t.ini", good, &p, &d), 0);
	assert_int_equal(d.n, 0);
	assert_string_equal(p.name, "t1");
	assert_string_equal(p.stimuli, "dir/lists/s.csv");
	assert_int_equal(p.stimuli_line, 3);
	assert_int_equal(p.nchoices, 2);
	assert_string_equal(p.choices[1].key, "j");
	assert_int_equal(protocol_choice_index(&p, "b"), 1);
	assert_int_equal(protocol_choice_index(&p, "c"), -1);
	assert_true(p.epoch_ms[EPOCH_STIMULUS] == 150);
	assert_true(p.epoch_ms[EPOCH_MASK] == 50);
	assert_int_equal(p.epoch_line[EPOCH_MASK], 9);
	assert_true(p.epoch_ms[EPOCH_FIXATION] == 500);   /* default */
	assert_int_equal(p.mask, MASK_NOISE);
	assert_int_equal(p.background, 128);
	assert_int_equal(p.nblocks, 2);
	assert_true(p.blocks[0].practice && p.blocks[0].feedback);   /* feedback follows practice */
	assert_int_equal(p.blocks[0].nfilters, 2);
	assert_string_equal(p.blocks[0].filters[1].column, "category");
	assert_int_equal(p.blocks[0].filters[1].nvalues, 2);
	assert_int_equal(p.blocks[1].repeats, 2);
	assert_int_equal(p.blocks[1].order, ORDER_FIXED);
	assert_false(p.blocks[1].feedback);
	assert_non_null(strstr(p.text, "[block main]"));
	protocol_clear(&p);
	protocol_clear(NULL);
	diag_clear(&d);
}

/* One file with many problems: every one is reported, each at its line. */
static void protocol_testAllProblems(void **state)
{
	(void)state;
	const char *text =
		"[experiment]\n"                 /* 1 */
		"list = s.csv\n"                  /* 2 */
		"lsit = t.csv\n"                  /* 3 unknown key, suggestion */
		"[categories]\n"                  /* 4 */
		"a = f\n"                         /* 5 */
		"b = f\n"                         /* 6 two categories on one key */
		"c =\n"                           /* 7 category with no key */
		"[timing]\n"                      /* 8 */
		"stimulus_ms = 0\n"               /* 9 out of range */
		"mask_ms = fast\n"                /* 10 not a number */
		"mask_ms = 20\n"                  /* 11 duplicate */
		"[display]\n"                     /* 12 missing size_deg */
		"background = 300\n"              /* 13 */
		"[blok x]\n"                      /* 14 unknown section */
		"[block y]\n"                     /* 15 */
		"repeats = 1.5\n"                 /* 16 */
		"practice = maybe\n"              /* 17 */
		"order = randum\n"                /* 18 */
		"this line is wrong\n";           /* 19 */
	struct protocol p;
	struct diag_list d;
	diag_init(&d);
	assert_int_equal(protocol_parse("p.ini", text, &p, &d), -1);
	const char *want[] = {
		"p.ini:3: error: unknown key 'lsit' in [experiment]; did you mean 'list'?",
		"p.ini:6: error: categories 'a' and 'b' share the key 'f' (line 5)",
		"p.ini:7: error: category 'c' has no key",
		"p.ini:4: error: [categories] names 1 category; a forced choice needs at least 2",
		"p.ini:9: error: stimulus_ms = 0 is out of range (above 0, up to 60000 ms)",
		"p.ini:10: error: mask_ms = fast is not a number of ms",
		"p.ini:11: error: duplicate key 'mask_ms' (first set on line 10)",
		"p.ini:13: error: background = 300 is out of range (0 to 255)",
		"p.ini:12: error: missing required key 'size_deg' in [display]",
		"p.ini:14: error: unknown section [blok x]; did you mean [block NAME]?",
		"p.ini:16: error: repeats = 1.5 is not a whole number",
		"p.ini:17: error: practice = maybe is not yes or no",
		"p.ini:18: error: order = randum is not one of random, fixed; did you mean 'random'?",
		"p.ini:19: error: expected KEY = VALUE, a [section] header or a comment",
	};
	size_t nwant = sizeof want / sizeof want[0];
	for (size_t i = 0; i < nwant && i < d.n; i++)
		assert_string_equal(msg(&d, i), want[i]);
	assert_int_equal(d.n, nwant);
	protocol_clear(&p);
	diag_clear(&d);
}

/* [categories] and longest_streak by their names; the words earlier versions used ([choices],
 * max_run) are errors naming the new word, and the old section is still read (one message). */
static void protocol_testRetiredWords(void **state)
{
	(void)state;
	struct protocol p;
	struct diag_list d;
	diag_init(&d);
	assert_int_equal(protocol_parse("dir/t.ini", good, &p, &d), 0);
	assert_int_equal(p.blocks[1].longest_streak, 3);
	protocol_clear(&p);
	const char *text =
		"[experiment]\n"                 /* 1 */
		"list = s.csv\n"                  /* 2 */
		"[choices]\n"                     /* 3 */
		"a = f\n"                         /* 4 */
		"b = j\n"                         /* 5 */
		"[timing]\n"                      /* 6 */
		"stimulus_ms = 100\n"             /* 7 */
		"[display]\n"                     /* 8 */
		"size_deg = 4\n"                  /* 9 */
		"[block main]\n"                  /* 10 */
		"max_run = 2\n";                  /* 11 */
	assert_int_equal(protocol_parse("o.ini", text, &p, &d), -1);
	const char *want[] = {
		"o.ini:3: error: [choices] is now called [categories]: rename the section",
		"o.ini:11: error: 'max_run' is now called 'longest_streak': rename the key",
	};
	size_t nwant = sizeof want / sizeof want[0];
	for (size_t i = 0; i < nwant && i < d.n; i++)
		assert_string_equal(msg(&d, i), want[i]);
	assert_int_equal(d.n, nwant);
	assert_int_equal(p.nchoices, 2);   /* read under the new name */
	assert_int_equal(p.blocks[0].longest_streak, 0);
	protocol_clear(&p);
	diag_clear(&d);
}

static void protocol_testMissingSections(void **state)
{
	(void)state;
	struct protocol p;
	struct diag_list d;
	diag_init(&d);
	assert_int_equal(protocol_parse("e.ini", "; nothing\n", &p, &d), -1);
	assert_string_equal(msg(&d, 0), "e.ini: error: missing section [experiment] (it must set list)");
	assert_string_equal(msg(&d, 4),
			    "e.ini: error: no [block NAME] section: a protocol needs at least one block");
	assert_string_equal(p.name, "e");   /* default from the file name */
	protocol_clear(&p);
	diag_clear(&d);
}

/* A block naming an adaptive section that no kind defines is an error at its line. */
static void protocol_testAdaptiveReference(void **state)
{
	(void)state;
	char text[2048];
	snprintf(text, sizeof text, "%sadaptive = stair1\n", good);
	struct protocol p;
	struct diag_list d;
	diag_init(&d);
	assert_int_equal(protocol_parse("a.ini", text, &p, &d), -1);
	assert_string_equal(msg(&d, 0), "a.ini:20: error: block 'main': adaptive = stair1 names no "
			    "[adaptive stair1] section");
	protocol_clear(&p);
	diag_clear(&d);
}

static void protocol_testLoadMissingFile(void **state)
{
	(void)state;
	struct protocol p;
	struct diag_list d;
	diag_init(&d);
	assert_int_equal(protocol_load("/nonexistent/x.ini", &p, &d), -1);
	assert_string_equal(msg(&d, 0),
			    "/nonexistent/x.ini: error: cannot read the file: No such file or directory");
	protocol_clear(&p);
	diag_clear(&d);
}

/* Found by the fuzzer: a section header longer than inih's line limit overflowed a buffer. It is
 * now one "line is longer" error, and its keys are not misattributed. */
static void protocol_testLongHeader(void **state)
{
	(void)state;
	char text[1024] = "[";
	memset(text + 1, 'x', 300);
	strcpy(text + 301, "]\nkey = 1\n");
	struct protocol p;
	struct diag_list d;
	diag_init(&d);
	assert_int_equal(protocol_parse("l.ini", text, &p, &d), -1);
	assert_string_equal(msg(&d, 0), "l.ini:1: error: line is longer than 198 characters");
	assert_string_equal(msg(&d, 1), "l.ini:2: error: key 'key' is outside any section (start "
			    "with [experiment])");
	protocol_clear(&p);
	diag_clear(&d);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(protocol_testGood),
		cmocka_unit_test(protocol_testAllProblems),
		cmocka_unit_test(protocol_testRetiredWords),
		cmocka_unit_test(protocol_testMissingSections),
		cmocka_unit_test(protocol_testAdaptiveReference),
		cmocka_unit_test(protocol_testLoadMissingFile),
		cmocka_unit_test(protocol_testLongHeader),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
