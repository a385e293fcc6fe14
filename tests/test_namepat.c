/* test_namepat — file-name patterns: parsing rules and matching of {level}, {source} and *, on
 * names made up here (worked examples of the rules in docs/stimuli.md). */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <string.h>
#include <cmocka.h>

#include "namepat.h"

static void namepat_testParseErrors(void **state)
{
	(void)state;
	static const char *const bad[] = {"{source}", "{level}_{level}", "{lvl}", "{level", "a}{level}",
					  "dir/{level}", "{source}{source}{level}"};
	for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
		struct namepat p;
		const char *why = NULL;
		assert_int_equal(namepat_parse(bad[i], &p, &why), -1);
		assert_non_null(why);
		assert_int_equal(p.n, 0);
	}
}

static void namepat_testMatch(void **state)
{
	(void)state;
	struct namepat p;
	const char *why;
	assert_int_equal(namepat_parse("{source}_eps{level}", &p, &why), 0);
	struct namepat_match m;
	/* 'p' stands for the decimal point: 0p05 is 0.05. */
	assert_true(namepat_match(&p, "dog03_eps0p05", &m));
	assert_true(m.level == 0.05);
	assert_int_equal(m.source_len, 5);
	assert_memory_equal(m.source, "dog03", 5);
	/* The shortest source: "a_eps_b_eps2" splits at the first "_eps" that leaves a number. */
	assert_true(namepat_match(&p, "a_eps_b_eps2", &m));
	assert_memory_equal(m.source, "a_eps_b", m.source_len);
	assert_true(m.level == 2);
	assert_true(namepat_match(&p, "x_eps-1.5", &m));
	assert_true(m.level == -1.5);
	assert_false(namepat_match(&p, "dog03", &m));
	assert_false(namepat_match(&p, "_eps1", &m));        /* {source} is never empty */
	assert_false(namepat_match(&p, "dog_eps1.", &m));    /* no digits after the point */
	namepat_clear(&p);
	assert_int_equal(namepat_parse("*-{level}", &p, &why), 0);
	assert_true(namepat_match(&p, "noise-12", &m));
	assert_true(m.level == 12);
	assert_null(m.source);
	assert_true(namepat_match(&p, "a-b-3", &m));
	namepat_clear(&p);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(namepat_testParseErrors),
		cmocka_unit_test(namepat_testMatch),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
