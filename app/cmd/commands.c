/* commands — the table of subcommands and everything printed from it: `tachist --help`, each
 * `tachist COMMAND --help`, and the manual page tachist(1) (`tachist --man`).
 *
 * A row is {name, summary, usage, about, options, function}: `usage` is the synopsis (the shape
 * of the command line: what is required, what excludes what), `about` a few sentences, and
 * `options` the command's own table of `struct opts_row`, which lives beside its function in
 * app/cmd/cmd_<name>.c and also drives its parsing (include/opts.h). Help and the manual page are
 * both written from these rows, so they say the same. Callers: app/cmd/main.c, tests/test_opts.c. */
#include <ctype.h>
#include <stdbool.h>
#include <stdlib.h>
#include <string.h>

#include "cmd.h"
#include "version.h"

/* The date the manual page carries (its .TH line); move it on with a release. */
#define MAN_DATE "2026-12-02"

static const struct cmd commands[] = {
	{"console", "the experimenter's console (ncurses)",
	 "tachist console [--db FILE] [--rig FILE] [--clock-hz HZ]\n",
	 "Sets up and watches sessions on the experimenter's terminal: choose a protocol, check it, "
	 "start blocks on the observer's display, follow progress live, and look at results. It needs "
	 "a terminal of at least 80x24.",
	 cmd_console_opts, cmd_console},
	{"check", "validate a protocol, its rig and stimuli, and print the plan",
	 "tachist check PROTOCOL [--rig FILE] [--json] [--subjects N]\n",
	 "Reads the protocol, the rig profile and the stimulus list, reports every problem as "
	 "FILE:LINE: message, and prints the durations in whole frames and the blocks of the plan. "
	 "Exits 0 when the protocol can run (warnings allowed), 1 when any error was found.",
	 cmd_check_opts, cmd_check},
	{"run", "run a session",
	 "tachist run PROTOCOL --subject ID [--db FILE] [--rig FILE]\n"
	 "            [--observer keyboard|model:SPEC] [--headless [--pace] [--inject-drops RATE]]\n"
	 "            [--seed N] [--resume SESSION] [--window] [--screenshots DIR]\n"
	 "            [--accept-rig-mismatch] [--clock-hz HZ] [--counterbalance N]\n",
	 "Runs every block of the protocol on the observer's display and stores each trial in the "
	 "database before the next one starts. Without a display, --headless runs on a virtual clock "
	 "and the session records simulated timing. A session that was interrupted continues with "
	 "--resume at its first trial not stored. A display whose size or measured refresh (more than "
	 "2%) differs from the rig's is refused unless --accept-rig-mismatch.",
	 cmd_run_opts, cmd_run},
	{"timing", "measure the display's refresh",
	 "tachist timing [--rig FILE] [--frames N] [--headless] [--keys]\n",
	 "Flips empty frames on the observer's display and prints the frame-interval histogram, the "
	 "estimated refresh rate against the rig's, dropped frames, and whether presenting a frame "
	 "waits for the vertical blank. --keys lists the input devices this user can read and, on "
	 "the rig's [input] device, shows each press's kernel time beside SDL's and that lag.",
	 cmd_timing_opts, cmd_timing},
	{"sessions", "list the sessions in a database",
	 "tachist sessions [--db FILE|SERVER [--schema NAME]] [--subject ID] [--json]\n",
	 "Lists each session with its subject, protocol, status and number of trials, so that an "
	 "interrupted one can be found and resumed. Reads only.",
	 cmd_sessions_opts, cmd_sessions},
	{"report", "accuracy, d', fits, confusions and timing for sessions",
	 "tachist report [--db FILE|SERVER [--schema NAME]] [--session ID | --subject ID | --all]\n"
	 "               [--by COLUMNS]\n"
	 "               [--shape weibull|logistic|normal] [--lapse free|0|VALUE] [--pc P]\n"
	 "               [--boot N] [--seed N] [--ci wilson|exact] [--no-fit] [--json] [--plots DIR]\n",
	 "Summarises the chosen sessions (all of them unless one is chosen): proportion correct with "
	 "binomial intervals, d', reaction times, a psychometric fit per condition, the confusion "
	 "matrix and the timing quality of every trial. --plots writes SVG figures and an index.html.",
	 cmd_report_opts, cmd_report},
	{"export", "write trial tables (CSV, TSV, JSON, BIDS)",
	 "tachist export [--db FILE|SERVER [--schema NAME]] --format csv|tsv|json|bids\n"
	 "               [--session ID | --subject ID] --out PATH\n",
	 "Writes one row per trial with the same columns in every format. A table is written to a "
	 "temporary file and renamed into place when complete; --out - writes it to standard output. "
	 "bids writes a folder.",
	 cmd_export_opts, cmd_export},
	{"fit", "fit a psychometric function to a CSV of trials or counts",
	 "tachist fit FILE.csv --m N [--shape weibull|logistic|normal] [--lapse free|0|VALUE]\n"
	 "            [--pc P] [--boot N] [--seed N] [--json]\n",
	 "Fits by maximum likelihood, with the guess rate 1/N, to a CSV of single trials "
	 "(level,correct) or of counts per level (level,n,k: trials, correct). A fit the data cannot "
	 "support is said in words and exits 1; no number is printed for it.",
	 cmd_fit_opts, cmd_fit},
	{"forecast", "simulate a study before running it: interval widths for a grid of designs",
	 "tachist forecast PROTOCOL (--observer model:SPEC | --db FILE|SERVER [--schema NAME]\n"
	 "                 [--session ID | --subject ID | --all])\n"
	 "                 [--rig FILE] [--levels A,B,...]... [--trials N,N,...] [--observers N,N,...]\n"
	 "                 [--runs N] [--boot N] [--seed N] [--threads N] [--target-width W] [--log]\n"
	 "                 [--json] [--plot FILE.svg]\n",
	 "Simulates the study --runs times for every design of the grid (level sets, observers, "
	 "trials per level, and the protocol's adaptive block at the same trial count) with a model "
	 "observer, or with the function fitted to a pilot, and fits each run as report does. Prints "
	 "the median and 5-95% range of the threshold interval's width, the bias, the share of "
	 "failed fits and slope bounds, the intervals' coverage, the session length and whether the "
	 "levels bracket the threshold; --target-width names the smallest design that reaches it.",
	 cmd_forecast_opts, cmd_forecast},
	{"calc", "visual angle, pixels, frames, d' and intervals at the bench",
	 "tachist calc angle --size CM --distance CM [--json]\n"
	 "tachist calc size --deg D --distance CM [--json]\n"
	 "tachist calc pixels --deg D [--rig FILE] [--json]\n"
	 "tachist calc frames --ms MS --hz HZ [--json]\n"
	 "tachist calc dprime --m N --pc P [--n TRIALS] [--json]\n"
	 "tachist calc ci --k K --n N [--method wilson|exact] [--level 0.95] [--json]\n",
	 "One calculation per call; each accepts only the options on its line. Prints a sentence, or "
	 "with --json one object whose keys are the words given in the manual.",
	 cmd_calc_opts, cmd_calc},
	{"stimuli", "import, audit and make controls for a stimulus set",
	 "tachist stimuli import DIR --out LIST.csv [--level-from PATTERN] [--labels FILE]\n"
	 "                       [--protocol NEW.ini [--keys K,K,...]] [--max-image-side PX]\n"
	 "tachist stimuli audit LIST.csv [--rig FILE] [--json] [--verbose]\n"
	 "                      [--size-deg D | --protocol FILE] [--units unit|255] [--norm l2|linf]\n"
	 "                      [--tolerance FRAC] [--near-bits N] [--max-image-side PX]\n"
	 "tachist stimuli controls LIST.csv --out DIR [--seed N] [--budget measured|level]\n"
	 "                         [--units unit|255] [--tolerance FRAC] [--max-image-side PX]\n",
	 "import lists a folder of images as a stimulus list, audit measures every image of a list "
	 "(size, grey levels, luminance and contrast, near duplicates), controls writes matched "
	 "control images.",
	 cmd_stimuli_opts, cmd_stimuli},
	{"pool", "pool databases from several rigs into one",
	 "tachist pool --into FILE DB...\n"
	 "tachist pool --into postgresql://... [--schema NAME] [--follow [--interval SECONDS]] DB...\n",
	 "Copies every session of each DB into FILE, which is created when missing, or into a "
	 "PostgreSQL server (docs/pooling.md); a session already there is not copied twice.",
	 cmd_pool_opts, cmd_pool},
	{"calibrate", "measure the display's luminance with a photometer into the rig profile",
	 "tachist calibrate [--rig FILE] [--from CSV] [--steps N] [--channels grey|rgb|all]\n"
	 "                  [--patch-deg D] [--surround CODE] [--order shuffled|ascending] [--seed N]\n"
	 "                  [--model auto|fit|table] [--measured DATE] [--max-age-days N]\n"
	 "                  [--dry-run] [--json] [--headless] [--window] [--screenshots DIR]\n",
	 "Shows grey codes (or red, green and blue alone) on the observer's display, full screen or as "
	 "a patch in degrees, in a shuffled order, and takes the photometer reading typed for each; "
	 "or reads them from a CSV. Fits L = L_min + (L_max - L_min)(code/255)^gamma per channel by "
	 "least squares, prints the fit and its residuals, and writes both into the rig profile's "
	 "[luminance] section (atomically, every other line kept) unless --dry-run. Protocols can "
	 "then give background_cd and linearize = yes.",
	 cmd_calibrate_opts, cmd_calibrate},
	{"demo", "run the demo protocol (keyboard with a display, model observer without)",
	 "tachist demo [--db FILE] [--headless [--pace]] [--rig FILE] [--observer keyboard|model:SPEC]\n"
	 "             [--subject ID] [--seed N] [--resume SESSION] [--window] [--inject-drops RATE]\n"
	 "             [--screenshots DIR] [--accept-rig-mismatch] [--clock-hz HZ]\n"
	 "             [--counterbalance N]\n",
	 "Runs protocols/demo.ini from the source folder on the demo stimuli and prints a short "
	 "report. With a display the observer answers with the keyboard; without one a model "
	 "observer answers on a virtual clock. It accepts the options of run as well.",
	 cmd_run_opts, cmd_demo},
};

const struct cmd *cmd_table(size_t *n)
{
	*n = sizeof commands / sizeof commands[0];
	return commands;
}

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
	if (!c)
		return;
	/* Lines after the first that start a new synopsis line up under the first. */
	fputs("usage: ", out);
	for (const char *s = c->usage; *s; s++) {
		fputc(*s, out);
		if (*s == '\n' && !strncmp(s + 1, "tachist ", 8))
			fputs("       ", out);
	}
}

/* Writes TEXT wrapped at 100 columns. */
static void put_wrapped(const char *text, FILE *out)
{
	size_t col = 0;
	while (*text) {
		size_t w = strcspn(text, " ");
		if (col && col + 1 + w > 100) {
			fputc('\n', out);
			col = 0;
		} else if (col) {
			fputc(' ', out);
			col++;
		}
		fwrite(text, 1, w, out);
		col += w;
		text += w;
		while (*text == ' ')
			text++;
	}
	fputc('\n', out);
}

void cmd_print_help(const struct cmd *c, FILE *out)
{
	cmd_print_usage(c->name, out);
	fputc('\n', out);
	char line[1024];
	snprintf(line, sizeof line, "tachist %s: %s. %s", c->name, c->summary, c->about ? c->about : "");
	put_wrapped(line, out);
	fputc('\n', out);
	if (c->opts)
		opts_help(c->opts, out);
}

/* Writes the N bytes of S with man(7) escapes (backslash, minus signs, a dot or quote opening a
 * line); returns the bytes written. */
static size_t roff_n(const char *s, size_t n, bool line_start, FILE *out)
{
	size_t w = 0;
	if (line_start && n && (*s == '.' || *s == '\''))
		w += (size_t)fprintf(out, "\\&");
	for (size_t i = 0; i < n; i++) {
		if (s[i] == '\\')
			w += (size_t)fprintf(out, "\\e");
		else if (s[i] == '-')
			w += (size_t)fprintf(out, "\\-");
		else
			w += (fputc(s[i], out), 1);
	}
	return w;
}

static void roff(const char *s, FILE *out)
{
	roff_n(s, strlen(s), true, out);
}

/* Writes the text S as filled man(7) input: words joined by single spaces, a new input line
 * before one would pass 72 bytes, and a line break after each of S's own newlines. */
static void roff_text(const char *s, FILE *out)
{
	size_t col = 0;
	while (*s) {
		while (*s == ' ')
			s++;
		if (*s == '\n') {
			fputs(col ? "\n.br\n" : "", out);
			col = 0;
			s++;
			continue;
		}
		size_t n = strcspn(s, " \n");
		if (!n)
			break;
		if (col && col + 1 + n > 72) {
			fputc('\n', out);
			col = 0;
		} else if (col) {
			fputc(' ', out);
			col++;
		}
		col += roff_n(s, n, col == 0, out);
		s += n;
	}
	if (col)
		fputc('\n', out);
}

void cmd_print_man(FILE *out)
{
	fprintf(out, ".\\\" tachist(1), written by `tachist --man` from the command and option tables.\n"
		".TH TACHIST 1 %s \"tachist %s\" \"User Commands\"\n.nh\n.ad l\n", MAN_DATE,
		TACHIST_VERSION);
	fputs(".SH NAME\ntachist \\- brief-exposure image categorization for the bench\n"
	      ".SH SYNOPSIS\n.B tachist\n.I command\n.RI [ options ]\n.br\n.B tachist\n"
	      ".RB [ \\-\\-help | \\-\\-version | \\-\\-man ]\n"
	      ".SH DESCRIPTION\n", out);
	roff_text("An ncurses console on the experimenter's terminal sets up and watches blocks of "
		  "trials; a window on the observer's display shows each image for a whole number of "
		  "refresh frames at a calibrated visual angle; the observer answers with one of n "
		  "keys; every trial is stored in an SQLite database before the next one starts. The "
		  "commands below do the same without the console and turn the database into tables, "
		  "figures and statistics.", out);
	fputs(".PP\n", out);
	roff_text("With no command, tachist opens the console when run from a terminal and prints "
		  "the list of commands otherwise. Every command answers --help with its usage and "
		  "options; --version prints the version and --man this page.", out);
	fputs(".SH COMMANDS\n", out);
	size_t n = sizeof commands / sizeof commands[0];
	for (size_t i = 0; i < n; i++) {
		const struct cmd *c = &commands[i];
		fprintf(out, ".SS %s\n", c->name);
		/* The synopsis filled, each "tachist ..." line on its own. */
		for (const char *u = c->usage; *u;) {
			size_t n = strcspn(u, "\n");
			char *line = xasprintf("%.*s", (int)n, u);
			if (u != c->usage && !strncmp(line, "tachist ", 8))
				fputs(".br\n", out);
			roff_text(line, out);
			free(line);
			u += n + (u[n] == '\n');
		}
		fputs(".PP\n", out);
		char *text = xasprintf("%s. %s", c->summary, c->about ? c->about : "");
		text[0] = (char)toupper((unsigned char)text[0]);
		roff_text(text, out);
		free(text);
		for (int k = 0; c->opts && c->opts[k].name; k++) {
			fputs(c->opts[k].arg ? ".TP\n.BI \\-\\-" : ".TP\n.B \\-\\-", out);
			roff(c->opts[k].name, out);
			if (c->opts[k].arg) {   /* the placeholder in italics after a space */
				fputs(" \" ", out);
				roff(c->opts[k].arg, out);
				fputc('"', out);
			}
			fputc('\n', out);
			roff_text(c->opts[k].help, out);
		}
	}
	fputs(".SH EXIT STATUS\n"
	      ".TP\n0\nsuccess\n"
	      ".TP\n1\nproblems found (in a protocol, list, rig or database) or the work failed\n"
	      ".TP\n2\nusage error: an unknown option, a missing or malformed value\n"
	      ".SH ENVIRONMENT\n"
	      ".TP\n.B XDG_CONFIG_HOME\n"
	      "The rig profile is read from\n.I $XDG_CONFIG_HOME/tachist/rig.ini\n"
	      "(or\n.IR ~/.config/tachist/rig.ini ),\n"
	      "falling back to the demo rig with a warning.\n"
	      ".TP\n.B NO_COLOR\nThe console uses no colours when it is set.\n"
	      ".TP\n.B TMPDIR\nWhere temporary copies are made (pool, and readers of a server).\n"
	      ".TP\n.B PGPASSWORD\nWith\n.BR PGHOST ,\n.B PGPASSFILE\nand libpq's other variables,\n"
	      "how a PostgreSQL server given to pool --into or --db is reached.\n"
	      ".SH FILES\n"
	      ".TP\n.I tachist.db\nThe default database, in the current folder.\n"
	      ".SH SEE ALSO\n"
	      "The manual in the source tree:\n"
	      ".I docs/commands.md\n(every command),\n"
	      ".I docs/files.md\n(protocol, rig, stimulus list) and the other files in\n"
	      ".IR docs/ .\n", out);
}
