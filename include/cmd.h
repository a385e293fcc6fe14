/* cmd — the subcommands and the helpers they share. Each subcommand lives in app/cmd/cmd_<name>.c
 * with its option table and is one row of the table in app/cmd/commands.c. Only this layer and the
 * console speak to people. */
#ifndef TACHIST_CMD_H
#define TACHIST_CMD_H

#include <stdbool.h>
#include <stdio.h>

#include "diag.h"
#include "opts.h"

/* Exit codes (docs/design.md): 0 success, 1 problems found or the work failed, 2 usage error. */
enum { EXIT_OK = 0, EXIT_PROBLEMS = 1, EXIT_USAGE = 2 };

struct cmd {
	const char *name;
	const char *summary;   /* one line for `tachist --help` */
	const char *usage;     /* the synopsis: "tachist NAME ..." lines, each ending in \n */
	const char *about;     /* a few sentences for --help and the manual page; may be NULL */
	const struct opts_row *opts;   /* the command's option table (beside its function) */
	int (*fn)(int argc, char **argv);   /* argv[0] is the subcommand name */
};

/* The option tables, one per command, each in its app/cmd/cmd_<name>.c. */
extern const struct opts_row cmd_console_opts[], cmd_check_opts[], cmd_run_opts[],
	cmd_timing_opts[], cmd_sessions_opts[], cmd_report_opts[], cmd_export_opts[], cmd_fit_opts[],
	cmd_calc_opts[], cmd_calibrate_opts[], cmd_stimuli_opts[], cmd_pool_opts[];
extern const struct opts_row cmd_forecast_opts[];

int cmd_console(int argc, char **argv);
int cmd_check(int argc, char **argv);
int cmd_run(int argc, char **argv);
int cmd_timing(int argc, char **argv);
int cmd_sessions(int argc, char **argv);
int cmd_report(int argc, char **argv);
int cmd_export(int argc, char **argv);
int cmd_fit(int argc, char **argv);
int cmd_calc(int argc, char **argv);
int cmd_stimuli(int argc, char **argv);
int cmd_pool(int argc, char **argv);
int cmd_demo(int argc, char **argv);
int cmd_calibrate(int argc, char **argv);
int cmd_forecast(int argc, char **argv);

/* Shared by `run` and `demo` (app/cmd/cmd_run.c; both take the options of cmd_run_opts): parse
 * ARGV into O (*RIG_ARG gets --rig, *PROTOCOL the one argument that is not an option; PROTOCOL NULL
 * when none is allowed), returning 0 or EXIT_USAGE after the message; run one session and print
 * its block summaries, returning the exit code; ID_OUT (may be NULL) gets the session's ID, ""
 * when none began. */
struct run_options;
int cmd_run_options(const char *cmd, int argc, char **argv, struct run_options *o,
		    const char **rig_arg, const char **protocol);
int cmd_run_session(const struct run_options *o, char id_out[37]);

/* The table row for NAME, or NULL. */
const struct cmd *cmd_find(const char *name);
/* The whole command table: *N gets its length. */
const struct cmd *cmd_table(size_t *n);
/* Prints NAME's --help (usage, about, the option table) to OUT. */
void cmd_print_help(const struct cmd *c, FILE *out);
/* Prints the manual page tachist(1), in man(7) markup, made from the command table. */
void cmd_print_man(FILE *out);
/* True when ARGV holds --help or -h; the caller then prints its usage and returns 0. */
bool cmd_wants_help(int argc, char **argv);
/* Prints the usage text of NAME to OUT. */
void cmd_print_usage(const char *name, FILE *out);
/* Prints each diagnostic as "FILE:LINE: level: message" to OUT. */
void cmd_print_diags(const struct diag_list *d, FILE *out);
/* Resolves the rig file: EXPLICIT when given; else $XDG_CONFIG_HOME/tachist/rig.ini (or
 * ~/.config/...), else the demo rig in assets-demo/ with a warning on stderr. Returns a malloc'd
 * path or NULL when none exists. */
char *cmd_rig_path(const char *explicit_path);
/* As cmd_rig_path but prints nothing: *IS_DEMO tells whether the demo rig was the fallback (the
 * console shows that on its first screen, since a line printed before curses starts is lost). */
char *cmd_rig_path_find(const char *explicit_path, bool *is_demo);
/* Resolves a path shipped with the program (for example "protocols/demo.ini"): the current folder
 * first, then beside the executable's source tree. Returns a malloc'd path or NULL. */
char *cmd_asset_path(const char *rel);
/* A --schema option given with TARGET, the value of OPT (--into for pool, --db for the readers):
 * 0 when SCHEMA is NULL, or a valid schema name and TARGET a PostgreSQL server; else prints
 * CMD's usage error and returns EXIT_USAGE. */
int cmd_server_schema(const char *cmd, const char *opt, const char *target, const char *schema);
/* Parses a whole unsigned decimal number; returns 0 or -1. */
int cmd_parse_u64(const char *s, unsigned long long *out);
/* Parses a finite double; returns 0 or -1. */
int cmd_parse_double(const char *s, double *out);

#endif
