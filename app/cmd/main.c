/* main — the command table and dispatch. `tachist` alone opens the console when stdin is a
 * terminal and prints help otherwise. */
#include <stdio.h>
#include <string.h>
#include <unistd.h>

#include <gsl/gsl_errno.h>

#include "cmd.h"
#include "version.h"

static const struct cmd commands[] = {
	{"console", "the experimenter's console (ncurses)",
	 "tachist console [--db FILE] [--rig FILE]\n", cmd_console},
	{"check", "validate a protocol, its rig and stimuli, and print the plan",
	 "tachist check PROTOCOL [--rig FILE] [--json]\n", cmd_check},
	{"run", "run a session",
	 "tachist run PROTOCOL --subject ID [--db FILE] [--rig FILE]\n"
	 "            [--observer keyboard|model:SPEC] [--headless [--pace] [--inject-drops RATE]]\n"
	 "            [--seed N] [--resume SESSION] [--window] [--screenshots DIR]\n", cmd_run},
	{"timing", "measure the display's refresh",
	 "tachist timing [--rig FILE] [--frames N] [--headless]\n", cmd_timing},
	{"sessions", "list the sessions in a database",
	 "tachist sessions [--db FILE] [--subject ID] [--json]\n", cmd_sessions},
	{"report", "accuracy, d', fits, confusions and timing for sessions",
	 "tachist report [--db FILE] [--session ID | --subject ID | --all] [--json] [--plots DIR]\n",
	 cmd_report},
	{"export", "write trial tables (CSV, TSV, JSON, BIDS)",
	 "tachist export [--db FILE] --format csv|tsv|json|bids [--session ID | --subject ID] --out PATH\n",
	 cmd_export},
	{"fit", "fit a psychometric function to a CSV of trials or counts",
	 "tachist fit FILE.csv --m N [--shape weibull|logistic|normal] [--lapse free|0|VALUE] [--json]\n",
	 cmd_fit},
	{"calc", "visual angle, pixels, frames, d' and intervals at the bench",
	 "tachist calc angle --size CM --distance CM [--json]\n"
	 "tachist calc size --deg D --distance CM [--json]\n"
	 "tachist calc pixels --deg D [--rig FILE] [--json]\n"
	 "tachist calc frames --ms MS --hz HZ [--json]\n"
	 "tachist calc dprime --m N --pc P [--n TRIALS] [--json]\n"
	 "tachist calc ci --k K --n N [--method wilson|exact] [--level 0.95] [--json]\n", cmd_calc},
	{"stimuli", "import, audit and make controls for a stimulus set",
	 "tachist stimuli import DIR --out LIST.csv [--level-from PATTERN]\n"
	 "tachist stimuli audit LIST.csv [--rig FILE] [--json] [--size-deg D | --protocol FILE]\n"
	 "                      [--units unit|255] [--norm l2|linf] [--tolerance FRAC] [--near-bits N]\n"
	 "tachist stimuli controls LIST.csv --out DIR [--seed N] [--budget measured|level]\n"
	 "                         [--units unit|255] [--tolerance FRAC]\n", cmd_stimuli},
	{"merge", "pool databases from several rigs into one",
	 "tachist merge --into FILE DB...\n", cmd_merge},
	{"calibrate", "measure the display's luminance with a photometer into the rig profile",
	 "tachist calibrate [--rig FILE] [--from CSV] [--steps N] [--channels grey|rgb|all]\n"
	 "                  [--patch-deg D] [--surround CODE] [--order shuffled|ascending] [--seed N]\n"
	 "                  [--model auto|fit|table] [--measured YYYY-MM-DD] [--max-age-days N]\n"
	 "                  [--dry-run] [--json] [--headless] [--window] [--screenshots DIR]\n",
	 cmd_calibrate},
	{"demo", "run the demo protocol (keyboard with a display, model observer without)",
	 "tachist demo [--db FILE] [--headless [--pace]] [--rig FILE] [--observer keyboard|model:SPEC]\n", cmd_demo},
};

const struct cmd *cmd_find(const char *name)
{
	for (size_t i = 0; i < sizeof commands / sizeof commands[0]; i++)
		if (!strcmp(commands[i].name, name))
			return &commands[i];
	return NULL;
}

void cmd_print_usage(const char *name, FILE *out)
{
	const struct cmd *c = cmd_find(name);
	if (c)
		fprintf(out, "usage: %s", c->usage);
}

static void print_help(FILE *out)
{
	fprintf(out, "tachist %s: brief-exposure image categorization for the bench\n\n"
		"usage: tachist COMMAND [OPTIONS]   (tachist COMMAND --help for details)\n\n",
		TACHIST_VERSION);
	for (size_t i = 0; i < sizeof commands / sizeof commands[0]; i++)
		fprintf(out, "  %-9s %s\n", commands[i].name, commands[i].summary);
	fprintf(out, "\nWith no command, tachist opens the console when run from a terminal.\n");
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
	if (!strcmp(argv[1], "--help") || !strcmp(argv[1], "-h") || !strcmp(argv[1], "help")) {
		print_help(stdout);
		return EXIT_OK;
	}
	const struct cmd *c = cmd_find(argv[1]);
	if (!c) {
		fprintf(stderr, "tachist: unknown command '%s'\n\n", argv[1]);
		print_help(stderr);
		return EXIT_USAGE;
	}
	if (cmd_wants_help(argc - 1, argv + 1)) {
		printf("usage: %s", c->usage);
		return EXIT_OK;
	}
	return c->fn(argc - 1, argv + 1);
}
