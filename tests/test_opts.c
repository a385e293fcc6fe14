/* test_opts — the option parser (app/cmd/opts.c) and the command table it serves: every row of
 * every command's table parses, the synopsis, --help and the manual page name exactly the options
 * the parser accepts, abbreviations are refused, arguments come back in order. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cmocka.h>

#include "cmd.h"
#include "opts.h"

enum { T_SESSION, T_SUBJECT, T_JSON, T_DB };
static const struct opts_row trows[] = {
	[T_SESSION] = {"session", "ID", "a session"},
	[T_SUBJECT] = {"subject", "ID", "a subject"},
	[T_JSON] = {"json", NULL, "JSON"},
	[T_DB] = {"db", "FILE", "a database"},
	OPTS_END,
};

/* Parses the NULL-terminated words W against ROWS into KINDS/VALS (at most 16 items, the last
 * OPTS_DONE or OPTS_USAGE); returns the number of items. */
static int parse(const struct opts_row *rows, char **w, int *kinds, const char **vals)
{
	int argc = 0;
	while (w[argc])
		argc++;
	struct opts p;
	opts_begin(&p, "test", rows, argc, w);
	int n = 0;
	for (;;) {
		const char *v;
		int k = opts_next(&p, &v);
		kinds[n] = k;
		vals[n++] = v;
		if (k == OPTS_DONE || k == OPTS_USAGE || n == 16)
			return n;
	}
}

static void opts_testInOrder(void **state)
{
	(void)state;
	char *w[] = {"x", "a", "--json", "--db", "-", "b", "--session=S1", "--", "--json", "-", NULL};
	int k[16];
	const char *v[16];
	int n = parse(trows, w, k, v);
	assert_int_equal(n, 8);
	assert_int_equal(k[0], OPTS_ARG);
	assert_string_equal(v[0], "a");
	assert_int_equal(k[1], T_JSON);
	assert_null(v[1]);
	assert_int_equal(k[2], T_DB);
	assert_string_equal(v[2], "-");   /* a value may start with a dash: standard output */
	assert_int_equal(k[3], OPTS_ARG);
	assert_string_equal(v[3], "b");
	assert_int_equal(k[4], T_SESSION);
	assert_string_equal(v[4], "S1");
	assert_int_equal(k[5], OPTS_ARG);   /* after "--" options are words */
	assert_string_equal(v[5], "--json");
	assert_int_equal(k[6], OPTS_ARG);
	assert_string_equal(v[6], "-");
	assert_int_equal(k[7], OPTS_DONE);
}

static void opts_testRefusals(void **state)
{
	(void)state;
	char *bad[][4] = {
		{"x", "--sess", "S1", NULL},    /* an abbreviation, even a unique one */
		{"x", "--su=S1", NULL, NULL},   /* an ambiguous one */
		{"x", "--frob", NULL, NULL},    /* unknown */
		{"x", "--db", NULL, NULL},      /* missing value */
		{"x", "--json=1", NULL, NULL},  /* a flag given a value */
		{"x", "-q", NULL, NULL},        /* no short options */
	};
	for (size_t i = 0; i < sizeof bad / sizeof bad[0]; i++) {
		int k[16];
		const char *v[16];
		int n = parse(trows, bad[i], k, v);
		assert_int_equal(k[n - 1], OPTS_USAGE);
		assert_int_equal(n, 1);
	}
	/* A second parse after a failed one starts afresh. */
	char *w[] = {"x", "--subject", "S2", NULL};
	int k[16];
	const char *v[16];
	assert_int_equal(parse(trows, w, k, v), 2);
	assert_int_equal(k[0], T_SUBJECT);
	assert_string_equal(v[0], "S2");
}

/* True when TEXT contains PREFIX NAME followed by something that cannot continue a name. MAN:
 * TEXT is man(7) input, where the dashes of PREFIX and NAME are written "\-". */
static int mentions(const char *text, const char *name, int man)
{
	char want[96];
	size_t w = 0;
	for (const char *s = "--"; *s; s++)
		w += (size_t)snprintf(want + w, sizeof want - w, "%s", man ? "\\-" : "-");
	for (const char *s = name; *s; s++)
		w += (size_t)snprintf(want + w, sizeof want - w, "%s", *s == '-' && man ? "\\-" :
				      (char[2]){*s, 0});
	for (const char *s = strstr(text, want); s; s = strstr(s + 1, want)) {
		const char *e = s + w;
		if (*e == '-' || *e == '_' || (*e >= 'a' && *e <= 'z') || (*e >= '0' && *e <= '9'))
			continue;
		if (man && e[0] == '\\' && e[1] == '-')
			continue;
		return 1;
	}
	return 0;
}

static char *capture_help(const struct cmd *c)
{
	char *buf = NULL;
	size_t len = 0;
	FILE *f = open_memstream(&buf, &len);
	assert_non_null(f);
	cmd_print_help(c, f);
	fclose(f);
	return buf;
}

/* Every row of every command's table parses as that row, with a separate or attached value. */
static void opts_testEveryRowParses(void **state)
{
	(void)state;
	size_t nc;
	const struct cmd *cmds = cmd_table(&nc);
	for (size_t i = 0; i < nc; i++) {
		const struct opts_row *rows = cmds[i].opts;
		int nr = opts_count(rows);
		assert_true(nr <= OPTS_MAX);
		for (int r = 0; r < nr; r++) {
			char opt[80], attached[96];
			snprintf(opt, sizeof opt, "--%s", rows[r].name);
			snprintf(attached, sizeof attached, "--%s=7", rows[r].name);
			char *w1[] = {(char *)cmds[i].name, opt, rows[r].arg ? "7" : NULL, NULL};
			char *w2[] = {(char *)cmds[i].name, rows[r].arg ? attached : opt, NULL};
			char **ws[] = {w1, w2};
			for (int j = 0; j < 2; j++) {
				int k[16];
				const char *v[16];
				int n = parse(rows, ws[j], k, v);
				if (k[0] != r)
					fail_msg("%s --%s parsed as %d", cmds[i].name, rows[r].name, k[0]);
				assert_int_equal(n, 2);
				if (rows[r].arg)
					assert_string_equal(v[0], "7");
				else
					assert_null(v[0]);
			}
			/* Names are unique and help is the parser's, not a row's. */
			for (int q = 0; q < r; q++)
				assert_string_not_equal(rows[q].name, rows[r].name);
			assert_string_not_equal(rows[r].name, "help");
			assert_true(rows[r].help && rows[r].help[0]);
		}
	}
}

/* The synopsis, --help and the manual page name exactly the options of the table. */
static void opts_testDocumentsMatchTables(void **state)
{
	(void)state;
	char *man = NULL;
	size_t mlen = 0;
	FILE *f = open_memstream(&man, &mlen);
	cmd_print_man(f);
	fclose(f);
	size_t nc;
	const struct cmd *cmds = cmd_table(&nc);
	for (size_t i = 0; i < nc; i++) {
		const struct cmd *c = &cmds[i];
		char ss[64];
		snprintf(ss, sizeof ss, "\n.SS %s\n", c->name);
		const char *sec = strstr(man, ss);
		if (!sec)
			fail_msg("the manual page has no section for %s", c->name);
		size_t at = (size_t)(sec - man) + 1, end = at;
		while (end < mlen && strncmp(man + end, "\n.SS ", 5) && strncmp(man + end, "\n.SH ", 5))
			end++;
		char *section = strndup(man + at, end - at);
		if (!c->opts) {   /* not yet on an option table: its usage text stands alone */
			free(section);
			continue;
		}
		char *help = capture_help(c);
		const struct opts_row *rows = c->opts;
		for (int r = 0; rows[r].name; r++) {
			if (!mentions(c->usage, rows[r].name, 0))
				fail_msg("the synopsis of %s leaves out --%s", c->name, rows[r].name);
			char line[128];
			snprintf(line, sizeof line, "\n  --%s%s%s ", rows[r].name, rows[r].arg ? " " : "",
				 rows[r].arg ? rows[r].arg : "");
			if (!strstr(help, line) || !strstr(help, rows[r].help))
				fail_msg("%s --help leaves out --%s", c->name, rows[r].name);
			if (!mentions(section, rows[r].name, 1))
				fail_msg("the manual's %s section leaves out --%s", c->name, rows[r].name);
		}
		/* Conversely every --word of the synopsis is a row. */
		for (const char *s = strstr(c->usage, "--"); s; s = strstr(s + 2, "--")) {
			size_t n = strspn(s + 2, "abcdefghijklmnopqrstuvwxyz0123456789-");
			char word[64];
			snprintf(word, sizeof word, "%.*s", (int)n, s + 2);
			int r = 0;
			while (rows[r].name && strcmp(rows[r].name, word))
				r++;
			if (!rows[r].name)
				fail_msg("the synopsis of %s names --%s, which it does not accept", c->name,
					 word);
		}
		free(help);
		free(section);
	}
	free(man);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(opts_testInOrder),
		cmocka_unit_test(opts_testRefusals),
		cmocka_unit_test(opts_testEveryRowParses),
		cmocka_unit_test(opts_testDocumentsMatchTables),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
