/* test_inifile — line-numbered INI reading, UTF-8 validation, and the suggestion helper. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <string.h>
#include <cmocka.h>

#include "inifile.h"
#include "suggest.h"

struct seen {
	char log[1024];
};

static int record(void *user, const char *section, const char *key, const char *value, int line)
{
	struct seen *s = user;
	size_t n = strlen(s->log);
	snprintf(s->log + n, sizeof s->log - n, "%d:%s|%s|%s;", line, section ? section : "(broken)",
		 key ? key : "-", value ? value : "-");
	return 0;
}

/* Every entry arrives with its own line; headers are announced; indented keys are plain keys;
 * inline " ;" comments go; CRLF line ends are fine. */
static void inifile_testLines(void **state)
{
	(void)state;
	const char *text = "; comment\r\n[a]\r\nx = 1 ; note\r\n\r\n   y = two words\n[ b c ]\nz=\n";
	struct seen s = {""};
	struct diag_list d;
	diag_init(&d);
	assert_int_equal(inifile_parse("t.ini", text, record, &s, &d), 0);
	assert_string_equal(s.log, "2:a|-|-;3:a|x|1;5:a|y|two words;6:b c|-|-;7:b c|z|;");
	assert_int_equal(d.n, 0);
	diag_clear(&d);
}

/* UTF-8 as RFC 3629 defines it: §3 forbids overlong forms, surrogates (U+D800..DFFF) and code
 * points above U+10FFFF. */
static void inifile_testUtf8(void **state)
{
	(void)state;
	assert_true(inifile_utf8_valid("caf\xc3\xa9 \xe2\x82\xac \xf0\x9f\x98\x80", 14));
	assert_false(inifile_utf8_valid("\xc0\xaf", 2));           /* overlong '/' */
	assert_false(inifile_utf8_valid("\xed\xa0\x80", 3));       /* surrogate U+D800 */
	assert_false(inifile_utf8_valid("\xf4\x90\x80\x80", 4));   /* U+110000 */
	assert_false(inifile_utf8_valid("\xe2\x82", 2));           /* cut short */
	assert_false(inifile_utf8_valid("caf\xe9", 4));            /* Latin-1 */
}

/* Levenshtein distance: kitten -> sitting is 3 (the usual textbook example, recalled from
 * memory; by hand: k->s, e->i, +g). */
static void suggest_testDistance(void **state)
{
	(void)state;
	assert_int_equal(suggest_distance("kitten", "sitting"), 3);
	assert_int_equal(suggest_distance("", "abc"), 3);
	assert_int_equal(suggest_distance("Size_Deg", "size_deg"), 0);
	static const char *const keys[] = {"fixation_ms", "stimulus_ms", "mask_ms"};
	assert_string_equal(suggest_nearest("stimulus", keys, 3), "stimulus_ms");
	assert_string_equal(suggest_nearest("fixaton_ms", keys, 3), "fixation_ms");
	assert_null(suggest_nearest("colour", keys, 3));
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(inifile_testLines),
		cmocka_unit_test(inifile_testUtf8),
		cmocka_unit_test(suggest_testDistance),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
