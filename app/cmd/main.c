/* main — dispatch: finds the subcommand in the table (app/cmd/commands.c) and calls it; answers
 * --help, --version and --man itself. `tachist` alone opens the console when stdin is a terminal
 * and prints help otherwise. */
#include <stdio.h>
#include <string.h>
#include <unistd.h>

#include <gsl/gsl_errno.h>

#include "cmd.h"
#include "version.h"

static void print_help(FILE *out)
{
	fprintf(out, "tachist %s: brief-exposure image categorization for the bench\n\n"
		"usage: tachist COMMAND [OPTIONS]   (tachist COMMAND --help for details)\n\n",
		TACHIST_VERSION);
	size_t n;
	const struct cmd *commands = cmd_table(&n);
	for (size_t i = 0; i < n; i++)
		fprintf(out, "  %-10s %s\n", commands[i].name, commands[i].summary);
	fprintf(out, "\nWith no command, tachist opens the console when run from a terminal.\n"
		"tachist --version prints the version; tachist --man prints the manual page "
		"(tachist --man | man -l -).\n");
}

int main(int argc, char **argv)
{
	/* GSL's default handler aborts the process; every GSL call's status is checked instead. */
	gsl_set_error_handler_off();
	if (argc < 2) {
		if (isatty(STDIN_FILENO) && isatty(STDOUT_FILENO)) {
			char *cargv[] = {"console", NULL};
			return cmd_console(1, cargv);
		}
		print_help(stdout);
		return EXIT_OK;
	}
	if (!strcmp(argv[1], "--version")) {
		printf("tachist %s\n", TACHIST_VERSION);
		return EXIT_OK;
	}
	if (!strcmp(argv[1], "--man")) {
		cmd_print_man(stdout);
		return EXIT_OK;
	}
	if (!strcmp(argv[1], "--help") || !strcmp(argv[1], "-h") || !strcmp(argv[1], "help")) {
		print_help(stdout);
		return EXIT_OK;
	}
	const struct cmd *c = cmd_find(argv[1]);
	if (!c && !strcmp(argv[1], "merge")) {
		fprintf(stderr, "tachist: there is no command 'merge'; pooling databases is "
			"'tachist pool --into FILE DB...'\n");
		return EXIT_USAGE;
	}
	if (!c) {
		fprintf(stderr, "tachist: unknown command '%s'\n\n", argv[1]);
		print_help(stderr);
		return EXIT_USAGE;
	}
	if (cmd_wants_help(argc - 1, argv + 1)) {
		cmd_print_help(c, stdout);
		return EXIT_OK;
	}
	return c->fn(argc - 1, argv + 1);
}
