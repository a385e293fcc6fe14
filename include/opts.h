/* opts — the one option parser of every subcommand, on getopt_long.
 *
 * A command keeps a table of its options beside its function: one `struct opts_row` per option
 * (long name, argument placeholder or NULL for a flag, one line of help), indexed by the command's
 * own enum with designated initializers and closed by OPTS_END. The same table drives parsing,
 * `tachist COMMAND --help` and the manual page, so what a command accepts and what it documents
 * cannot drift. Options are `--name VALUE`, `--name=VALUE` or `--name`; abbreviations are refused
 * (an added option must never change what an old script meant). Arguments that are not options
 * come back in order as OPTS_ARG; after `--` every word is one.
 *
 *	enum { O_DB, O_JSON };
 *	const struct opts_row cmd_x_opts[] = {
 *		[O_DB] = {"db", "FILE", "the database (default tachist.db)"},
 *		[O_JSON] = {"json", NULL, "one JSON document on stdout"},
 *		OPTS_END,
 *	};
 *	struct opts p;
 *	opts_begin(&p, "x", cmd_x_opts, argc, argv);
 *	const char *v;
 *	for (int k; (k = opts_next(&p, &v)) != OPTS_DONE;)
 *		switch (k) {
 *		case O_DB: db = v; break;
 *		case O_JSON: json = true; break;
 *		case OPTS_ARG: ...positional v...; break;
 *		default: return EXIT_USAGE;   (OPTS_USAGE: the message is printed)
 *		}
 *
 * Callers: every app/cmd/cmd_*.c; app/cmd/main.c prints help and the manual page from the tables. */
#ifndef TACHIST_OPTS_H
#define TACHIST_OPTS_H

#include <getopt.h>
#include <stdio.h>

struct opts_row {
	const char *name;   /* without the leading "--" */
	const char *arg;    /* placeholder shown in help ("FILE", "N"); NULL for a flag */
	const char *help;   /* one line: what the option does */
};
#define OPTS_END {NULL, NULL, NULL}
#define OPTS_MAX 32

enum { OPTS_DONE = -1, OPTS_USAGE = -2, OPTS_ARG = -3 };

struct opts {
	const char *cmd;              /* "report", for messages: "tachist report: ..." */
	const struct opts_row *rows;
	int argc;
	char **argv;
	int rest;                     /* after "--" or the last option: the next word to hand back */
	struct option lo[OPTS_MAX + 1];   /* the getopt_long table built from ROWS */
};

/* Starts parsing ARGV[1..ARGC-1] (ARGV[0] is the command's name) against ROWS. CMD names the
 * command in messages; ROWS and ARGV must outlive P. */
void opts_begin(struct opts *p, const char *cmd, const struct opts_row *rows, int argc, char **argv);
/* The next item: the index of an option's row (*VALUE its argument or NULL), OPTS_ARG (*VALUE the
 * word), OPTS_DONE at the end, or OPTS_USAGE after printing what was wrong (unknown option, missing
 * or unexpected value) and the command's usage on stderr. */
int opts_next(struct opts *p, const char **value);
/* Prints "tachist CMD: MESSAGE", the usage lines and a pointer to --help on stderr; returns 2 (the
 * usage exit code) so a command can `return opts_usage(...)`. */
int opts_usage(const char *cmd, const char *fmt, ...) __attribute__((format(printf, 2, 3)));
/* The second half of opts_usage: the usage lines and the pointer to --help, on stderr, for a
 * command that printed its own "tachist CMD: ..." message. */
void opts_usage_hint(const char *cmd);
/* Number of rows in ROWS (0 for NULL). */
int opts_count(const struct opts_row *rows);
/* Writes the option list of ROWS to OUT, one option a line ("  --db FILE   the database"), then
 * -h, --help. */
void opts_help(const struct opts_row *rows, FILE *out);

#endif
