/* test_stimlist — stimulus lists: columns, labels, quoting across lines, and problems by line. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <string.h>
#include <cmocka.h>

#include "protocol_file.h"
#include "stimlist_file.h"

static const char *msg(const struct diag_list *d, size_t i)
{
	static char buf[1024];
	if (i >= d->n)
		return "(none)";
	diag_format(&d->v[i], buf, sizeof buf);
	return buf;
}

static void load_protocol(struct protocol *p)
{
	struct diag_list d;
	diag_init(&d);
	const char *t = "[experiment]\nlist = s.csv\n[categories]\nring = f\nbar = j\n[timing]\n"
			"stimulus_ms = 200\n[display]\nsize_deg = 2\n[block b]\n";
	assert_int_equal(protocol_parse("p.ini", t, p, &d), 0);
	diag_clear(&d);
}

static void stimlist_testGood(void **state)
{
	(void)state;
	struct protocol p;
	load_protocol(&p);
	/* A quoted label with a comma and a line break (RFC 4180 §2, rules 6 and 7). */
	const char *csv = "image,category,level,source,note\r\n"
			  "a.png,ring,0,,plain\r\n"
			  "\r\n"
			  "b.png,bar,0.5,a.png,\"two, \"\"quoted\"\"\nlines\"\r\n"
			  "c.png,bar,1e-1,,x";
	struct stimlist l;
	struct diag_list d;
	diag_init(&d);
	assert_int_equal(stimlist_parse("sets/s.csv", csv, strlen(csv), &p, &l, &d), 0);
	assert_int_equal(d.n, 0);
	assert_int_equal(l.n, 3);
	assert_string_equal(l.items[0].path, "sets/a.png");
	assert_null(l.items[0].source);
	assert_string_equal(l.items[1].source_path, "sets/a.png");
	assert_int_equal(l.items[1].choice, 1);
	assert_true(l.items[1].level == 0.5);
	assert_string_equal(l.items[1].labels[0], "two, \"quoted\"\nlines");
	assert_int_equal(l.items[1].line, 4);
	assert_int_equal(l.items[2].line, 6);
	assert_int_equal(l.nlabels, 1);
	char buf[64];
	assert_string_equal(stimlist_value(&l, &l.items[2], "level", buf, sizeof buf), "0.10000000000000001");
	assert_string_equal(stimlist_value(&l, &l.items[2], "note", buf, sizeof buf), "x");
	assert_null(stimlist_value(&l, &l.items[2], "nope", buf, sizeof buf));
	assert_int_equal(strlen(l.sha256), 64);
	stimlist_clear(&l);
	stimlist_clear(NULL);
	protocol_clear(&p);
	diag_clear(&d);
}

static void stimlist_testProblems(void **state)
{
	(void)state;
	struct protocol p;
	load_protocol(&p);
	const char *csv = "image,category,level\n"   /* 1 */
			  "a.png,ring,0\n"            /* 2 */
			  "b.png,rnig,0\n"            /* 3 */
			  "c.png,bar,high\n"          /* 4 */
			  ",bar,1\n"                  /* 5 */
			  "a.png,ring,0\n"            /* 6 duplicate of 2 */
			  "d.png,bar\n"               /* 7 */
			  "e\xff.png,bar,1\n";        /* 8 */
	struct stimlist l;
	struct diag_list d;
	diag_init(&d);
	assert_int_equal(stimlist_parse("s.csv", csv, strlen(csv), &p, &l, &d), -1);
	const char *want[] = {
		("s.csv:3: error: category 'rnig' is not one of the protocol's categories (ring, bar); did "
		 "you mean 'ring'?"),
		"s.csv:4: error: level 'high' is not a number",
		"s.csv:5: error: empty cell in column 'image'",
		"s.csv:7: error: row has 2 fields; the header has 3",
		"s.csv:8: error: line is not valid UTF-8 text",
		"s.csv:6: error: duplicate row (same as line 2)",
	};
	for (size_t i = 0; i < 6; i++)
		assert_string_equal(msg(&d, i), want[i]);
	assert_int_equal(d.n, 6);
	stimlist_clear(&l);
	protocol_clear(&p);
	diag_clear(&d);
}

static void stimlist_testHeaderProblems(void **state)
{
	(void)state;
	struct stimlist l;
	struct diag_list d;
	diag_init(&d);
	const char *csv = "img,level\nx.png,1\n";
	assert_int_equal(stimlist_parse("s.csv", csv, strlen(csv), NULL, &l, &d), -1);
	assert_string_equal(msg(&d, 0), "s.csv:1: error: missing column 'image' (is 'img' meant to "
			    "be 'image'?)");
	assert_string_equal(msg(&d, 1), "s.csv:1: error: missing column 'category'");
	stimlist_clear(&l);
	diag_clear(&d);
	diag_init(&d);
	const char *q = "image,category\n\"a.png,ring\n";
	assert_int_equal(stimlist_parse("q.csv", q, strlen(q), NULL, &l, &d), -1);
	assert_string_equal(msg(&d, 0), "q.csv:2: error: a quoted field is never closed");
	stimlist_clear(&l);
	diag_clear(&d);
	diag_init(&d);
	assert_int_equal(stimlist_parse("e.csv", "", 0, NULL, &l, &d), -1);
	assert_string_equal(msg(&d, 0), "e.csv: error: the list is empty (it needs a header row "
			    "naming at least the columns image and category)");
	stimlist_clear(&l);
	diag_clear(&d);
}

/* RFC 4180 section 2, rule 4: "Spaces are considered part of a field and should not be
 * ignored" -- unquoted cells keep theirs. A NUL byte would end a cell in C: it is refused at its
 * line (the C string model; no outside source). */
static void stimlist_testCells(void **state)
{
	(void)state;
	struct stimlist l;
	struct diag_list d;
	diag_init(&d);
	const char *csv = "image,category,note\n a b.png,ring,  two leading\nc.png,bar,trailing \t\n";
	assert_int_equal(stimlist_parse("s.csv", csv, strlen(csv), NULL, &l, &d), 0);
	assert_int_equal(l.n, 2);
	assert_string_equal(l.items[0].image, " a b.png");
	assert_string_equal(l.items[0].labels[0], "  two leading");
	assert_string_equal(l.items[1].labels[0], "trailing \t");
	stimlist_clear(&l);
	diag_clear(&d);
	diag_init(&d);
	const char nul[] = "image,category\na.png,ring\nb.png,b\0ar\nc.png,ring\n";
	assert_int_equal(stimlist_parse("n.csv", nul, sizeof nul - 1, NULL, &l, &d), -1);
	assert_int_equal(d.n, 1);
	assert_string_equal(msg(&d, 0), "n.csv:3: error: a NUL byte (character 8 of the line); a cell "
			    "cannot hold one");
	stimlist_clear(&l);
	diag_clear(&d);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(stimlist_testGood),
		cmocka_unit_test(stimlist_testProblems),
		cmocka_unit_test(stimlist_testHeaderProblems),
		cmocka_unit_test(stimlist_testCells),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
