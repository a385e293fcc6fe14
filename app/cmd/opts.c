/* opts — the subcommands' option parser: a command's table of `struct opts_row` turned into a
 * getopt_long table, words handed back one at a time, and the one wording of every usage error.
 *
 * getopt_long runs in "return in order" mode (optstring "-:"): a word that is not an option comes
 * back as OPTS_ARG where it stands, so nothing depends on argument permutation or on
 * POSIXLY_CORRECT. Its own messages are off (opterr = 0); the messages here name the command.
 * getopt_long accepts unique abbreviations; opts_next refuses them by comparing the word it
 * consumed with the row's full name. Callers: every app/cmd/cmd_*.c and app/cmd/main.c. */
#include <assert.h>
#include <stdarg.h>
#include <stdbool.h>
#include <string.h>

#include "cmd.h"
#include "opts.h"
#include "suggest.h"

/* getopt_long's val for row i; above every character getopt_long itself returns. */
#define ROW_VAL 1000

int opts_count(const struct opts_row *rows)
{
	int n = 0;
	while (rows && rows[n].name)
		n++;
	return n;
}

void opts_begin(struct opts *p, const char *cmd, const struct opts_row *rows, int argc, char **argv)
{
	int n = opts_count(rows);
	assert(n <= OPTS_MAX);
	memset(p, 0, sizeof *p);
	p->cmd = cmd;
	p->rows = rows;
	p->argc = argc;
	p->argv = argv;
	for (int i = 0; i < n; i++)
		p->lo[i] = (struct option){rows[i].name, rows[i].arg ? required_argument : no_argument,
					   NULL, ROW_VAL + i};
	optind = 0;   /* glibc: start afresh, whatever an earlier parse left behind */
	opterr = 0;
}

int opts_usage(const char *cmd, const char *fmt, ...)
{
	va_list ap;
	fprintf(stderr, "tachist %s: ", cmd);
	va_start(ap, fmt);
	vfprintf(stderr, fmt, ap);
	va_end(ap);
	fputc('\n', stderr);
	opts_usage_hint(cmd);
	return EXIT_USAGE;
}

void opts_usage_hint(const char *cmd)
{
	cmd_print_usage(cmd, stderr);
	fprintf(stderr, "('tachist %s --help' describes every option)\n", cmd);
}

/* The option nearest to the unknown WORD ("--sesion"), or NULL. */
static const char *nearest(const struct opts *p, const char *word)
{
	const char *cands[OPTS_MAX];
	int n = opts_count(p->rows);
	for (int i = 0; i < n; i++)
		cands[i] = p->rows[i].name;
	while (*word == '-')
		word++;
	size_t len = strcspn(word, "=");
	char w[64];
	if (len == 0 || len >= sizeof w)
		return NULL;
	memcpy(w, word, len);
	w[len] = '\0';
	return suggest_nearest(w, cands, (size_t)n);
}

static int unknown(const struct opts *p, const char *word)
{
	const char *near = nearest(p, word);
	if (near)
		opts_usage(p->cmd, "unknown option '%s' (did you mean --%s?)", word, near);
	else
		opts_usage(p->cmd, "unknown option '%s'", word);
	return OPTS_USAGE;
}

/* True when WORD spells row NAME in full: "--NAME" or "--NAME=...". */
static bool spelt_in_full(const char *word, const char *name)
{
	size_t len = strlen(name);
	return !strncmp(word, "--", 2) && !strncmp(word + 2, name, len) &&
	       (word[2 + len] == '\0' || word[2 + len] == '=');
}

int opts_next(struct opts *p, const char **value)
{
	*value = NULL;
	if (p->rest) {
		if (p->rest < p->argc) {
			*value = p->argv[p->rest++];
			return OPTS_ARG;
		}
		return OPTS_DONE;
	}
	int c = getopt_long(p->argc, p->argv, "-:", p->lo, NULL);
	if (c == -1) {
		/* Only "--" stops the scan early; what follows it are arguments. */
		if (optind < p->argc) {
			p->rest = optind;
			return opts_next(p, value);
		}
		p->rest = p->argc;
		return OPTS_DONE;
	}
	if (c == 1) {
		*value = optarg;
		return OPTS_ARG;
	}
	const char *word = p->argv[optind - 1];
	if (c == ':') {
		int k = optopt - ROW_VAL;
		if (k < 0 || k >= opts_count(p->rows))
			return unknown(p, word);
		opts_usage(p->cmd, "--%s needs a value (%s)", p->rows[k].name, p->rows[k].arg);
		return OPTS_USAGE;
	}
	if (c == '?') {
		int k = optopt - ROW_VAL;
		if (k < 0 || k >= opts_count(p->rows) || !strchr(word, '='))
			return unknown(p, word);
		opts_usage(p->cmd, "--%s takes no value ('%s')", p->rows[k].name, word);
		return OPTS_USAGE;
	}
	int k = c - ROW_VAL;
	assert(k >= 0 && k < opts_count(p->rows));
	/* A separate value is the last word consumed; the option is the one before it. */
	if (optarg && optarg == p->argv[optind - 1] && optind >= 2)
		word = p->argv[optind - 2];
	if (!spelt_in_full(word, p->rows[k].name))
		return unknown(p, word);
	*value = optarg;
	return k;
}

void opts_help(const struct opts_row *rows, FILE *out)
{
	int n = opts_count(rows);
	size_t w = strlen("-h, --help");
	for (int i = 0; i < n; i++) {
		size_t l = 2 + strlen(rows[i].name) + (rows[i].arg ? 1 + strlen(rows[i].arg) : 0);
		if (l > w && l <= 24)
			w = l;
	}
	fprintf(out, "options:\n");
	for (int i = 0; i < n; i++) {
		char head[128];
		snprintf(head, sizeof head, "--%s%s%s", rows[i].name, rows[i].arg ? " " : "",
			 rows[i].arg ? rows[i].arg : "");
		if (strlen(head) > w)
			fprintf(out, "  %s\n  %-*s  %s\n", head, (int)w, "", rows[i].help);
		else
			fprintf(out, "  %-*s  %s\n", (int)w, head, rows[i].help);
	}
	fprintf(out, "  %-*s  %s\n", (int)w, "-h, --help", "print this help and exit");
}
