/* cmd_run — `tachist run`: one session from the command line, through the run layer (run.h).
 * Prints a one-line summary per block on stdout, warnings and problems on stderr, and a live
 * progress line on stderr when it is a terminal. Shares its option parsing and summaries with
 * `tachist demo` (cmd_run_session). */
#include <math.h>
#include <poll.h>
#include <stdbool.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "cmd.h"
#include "run.h"

static void print_block(const struct run_block_summary *b, void *ctx)
{
	(void)ctx;
	if (isatty(STDERR_FILENO))
		fprintf(stderr, "\r\033[K");
	char acc[48] = "no answers", rt[32] = "n/a";
	if (!isnan(b->accuracy))
		snprintf(acc, sizeof acc, "%.1f%% (%zu/%zu)", 100 * b->accuracy, b->correct, b->answered);
	if (!isnan(b->median_rt_ms))
		snprintf(rt, sizeof rt, "%.0f ms", b->median_rt_ms);
	const char *how = b->result == RUN_BLOCK_DONE ? "" : b->result == RUN_BLOCK_SKIPPED ? " [skipped]"
			: b->result == RUN_BLOCK_ENDED ? " [ended]" : b->result == RUN_BLOCK_INTERRUPTED
			? " [interrupted]" : " [stopped by an error]";
	printf("block %d %s: %zu trials, accuracy %s, median RT %s, timeouts %zu, timing faults %zu "
	       "(%zu repeated), dropped frames %zu, refresh %.2f Hz%s\n", b->block + 1, b->name,
	       b->trials, acc, rt, b->timeouts, b->faults, b->repeats, b->dropped_frames,
	       b->refresh.rate_hz, how);
	if (b->refresh.mismatch)
		fprintf(stderr, "tachist: warning: measured refresh %.3f Hz is %+.2f%% off the rig's "
			"%.3f Hz\n", b->refresh.rate_hz, b->refresh.off_percent, b->refresh.nominal_hz);
	fflush(stdout);
}

/* The experimenter's keys at the terminal running `run`: a letter and Enter on standard input
 * (p pause, g go on, s skip the rest of the block, e end the session). Read without waiting. */
struct term_ctl {
	bool closed, paused;
};

static enum run_cmd read_terminal(struct term_ctl *t)
{
	while (!t->closed) {
		struct pollfd pf = {STDIN_FILENO, POLLIN, 0};
		if (poll(&pf, 1, 0) <= 0 || !(pf.revents & (POLLIN | POLLHUP)))
			break;
		char buf[64];
		ssize_t n = read(STDIN_FILENO, buf, sizeof buf);
		if (n <= 0) {
			t->closed = true;
			break;
		}
		for (ssize_t i = 0; i < n; i++)
			switch (buf[i]) {
			case 'p': case 'P': t->paused = true; break;
			case 'g': case 'G': t->paused = false; return RUN_CMD_GO_ON;
			case 's': case 'S': t->paused = false; return RUN_CMD_SKIP;
			case 'e': case 'E': return RUN_CMD_END;
			default: break;
			}
	}
	return t->paused ? RUN_CMD_PAUSE : RUN_CMD_CONTINUE;
}

static enum run_cmd progress_line(const struct run_snapshot *s, void *ctx)
{
	if (s->state == RUN_STATE_ITI && isatty(STDERR_FILENO))
		fprintf(stderr, "\r\033[K%s: trial %zu of %zu, %.0f s left, %zu correct of %zu",
			s->block_name, s->trial_n, s->trial_total, s->remaining_s, s->correct, s->answered);
	if (s->state == RUN_STATE_PAUSED && s->paused_by_observer && isatty(STDERR_FILENO))
		fprintf(stderr, "\r\033[Kthe observer paused: g Enter goes on, s Enter skips the "
			"block, e Enter ends the session");
	return read_terminal(ctx);
}

int cmd_run_session(const struct run_options *o, char id_out[37])
{
	if (id_out)
		id_out[0] = '\0';
	struct diag_list d;
	diag_init(&d);
	char *err = NULL;
	struct run_session *s = run_open(o, &d, &err);
	diag_sort(&d);
	cmd_print_diags(&d, stderr);
	diag_clear(&d);
	if (!s) {
		fprintf(stderr, "tachist: %s\n", err ? err : "cannot start the session");
		free(err);
		return EXIT_PROBLEMS;
	}
	printf("session %s (%s timing, seed %llu)%s\n", run_session_id(s), run_timing_mode(s),
	       (unsigned long long)run_seed(s), o->resume_id ? " resumed" : "");
	fflush(stdout);
	struct term_ctl term = {.closed = o->headless && !isatty(STDIN_FILENO)};
	enum run_block_result r = run_all(s, progress_line, &term, print_block, &err);
	int code = EXIT_OK;
	if (r == RUN_BLOCK_FAILED) {
		fprintf(stderr, "tachist: %s\n", err ? err : "the session stopped");
		code = EXIT_PROBLEMS;
	} else if (r == RUN_BLOCK_INTERRUPTED) {
		fprintf(stderr, "tachist: interrupted; every trial finished so far is stored. Go on "
			"with: tachist run %s --resume %.8s\n", o->protocol_path, run_session_id(s));
		code = EXIT_PROBLEMS;
	} else if (r == RUN_BLOCK_ENDED) {
		fprintf(stderr, "tachist: the session was ended early; its trials are kept\n");
	}
	free(err);
	err = NULL;
	char id[37];
	snprintf(id, sizeof id, "%s", run_session_id(s));
	if (id_out)
		memcpy(id_out, id, sizeof id);
	if (run_close(s, &err)) {
		fprintf(stderr, "tachist: %s\n", err);
		code = EXIT_PROBLEMS;
	}
	free(err);
	printf("session %s %s\n", id, code == EXIT_OK && r == RUN_BLOCK_DONE ? "complete"
				       : r == RUN_BLOCK_INTERRUPTED ? "interrupted" : "ended early");
	return code;
}

enum { O_SUBJECT, O_DB, O_RIG, O_OBSERVER, O_HEADLESS, O_PACE, O_INJECT_DROPS, O_SEED, O_RESUME,
       O_WINDOW, O_SCREENSHOTS, O_ACCEPT_RIG, O_CLOCK_HZ, O_COUNTERBALANCE };
const struct opts_row cmd_run_opts[] = {
	[O_SUBJECT] = {"subject", "ID", "the subject's pseudonymous ID, letters and digits"},
	[O_DB] = {"db", "FILE", "the database (run: tachist.db, demo: tachist-demo.db)"},
	[O_RIG] = {"rig", "FILE", "the rig profile (default $XDG_CONFIG_HOME/tachist/rig.ini)"},
	[O_OBSERVER] = {"observer", "WHO", "keyboard, or model:KEY=VALUE,... for the model observer"},
	[O_HEADLESS] = {"headless", NULL, "no display: a virtual clock, timing recorded as simulated"},
	[O_PACE] = {"pace", NULL, "headless: keep real time, to watch or interrupt"},
	[O_INJECT_DROPS] = {"inject-drops", "RATE", "headless: drop frames at this rate, 0 to 1 (tests)"},
	[O_SEED] = {"seed", "N", "the plan's seed, 0 to 4294967295 (default a fresh one)"},
	[O_RESUME] = {"resume", "SESSION", "continue this interrupted session at its first trial not stored"},
	[O_WINDOW] = {"window", NULL, "a window instead of the full screen"},
	[O_SCREENSHOTS] = {"screenshots", "DIR", "save PNGs of the first trial's frames into DIR"},
	[O_ACCEPT_RIG] = {"accept-rig-mismatch", NULL, "run on a display the rig does not describe (recorded)"},
	[O_CLOCK_HZ] = {"clock-hz", "HZ", "headless: the virtual clock's rate (default the rig's)"},
	[O_COUNTERBALANCE] = {"counterbalance", "N", "the subject's position in the protocol's design (default: sessions begun + 1)"},
	OPTS_END,
};

int cmd_run_options(const char *cmd, int argc, char **argv, struct run_options *o,
		    const char **rig_arg, const char **protocol)
{
	struct opts p;
	opts_begin(&p, cmd, cmd_run_opts, argc, argv);
	const char *v;
	for (int k; (k = opts_next(&p, &v)) != OPTS_DONE;) {
		unsigned long long x;
		switch (k) {
		case O_SUBJECT: o->subject = v; break;
		case O_DB: o->db_path = v; break;
		case O_RIG: *rig_arg = v; break;
		case O_OBSERVER: o->observer = v; break;
		case O_RESUME: o->resume_id = v; break;
		case O_SCREENSHOTS: o->screenshot_dir = v; break;
		case O_HEADLESS: o->headless = true; break;
		case O_PACE: o->pace = true; break;
		case O_WINDOW: o->window = true; break;
		case O_ACCEPT_RIG: o->accept_rig_mismatch = true; break;
		case O_COUNTERBALANCE:
			if (cmd_parse_u64(v, &x) || x < 1 || x > 100000)
				return opts_usage(cmd, "--counterbalance takes a position from 1 to 100000 "
						  "(got '%s')", v);
			o->counterbalance = (size_t)x;
			break;
		case O_CLOCK_HZ:
			if (cmd_parse_double(v, &o->clock_hz) || !(o->clock_hz >= 1 && o->clock_hz <= 1000))
				return opts_usage(cmd, "--clock-hz takes a rate from 1 to 1000 Hz (got '%s')", v);
			break;
		case O_SEED:
			if (cmd_parse_u64(v, &x) || x > 4294967295ull)
				return opts_usage(cmd, "--seed takes a whole number from 0 to 4294967295 "
						  "(got '%s')", v);
			o->seed = x;
			o->has_seed = true;
			break;
		case O_INJECT_DROPS:
			if (cmd_parse_double(v, &o->inject_drops) || o->inject_drops < 0 ||
			    o->inject_drops > 1)
				return opts_usage(cmd, "--inject-drops takes a rate from 0 to 1 (got '%s')", v);
			break;
		case OPTS_ARG:
			if (!protocol)
				return opts_usage(cmd, "unexpected argument '%s'", v);
			if (*protocol)
				return opts_usage(cmd, "one protocol at a time ('%s')", v);
			*protocol = v;
			break;
		default: return EXIT_USAGE;
		}
	}
	if ((o->pace || o->inject_drops > 0 || o->clock_hz > 0) && !o->headless)
		return opts_usage(cmd, "--pace, --inject-drops and --clock-hz need --headless");
	return 0;
}

int cmd_run(int argc, char **argv)
{
	struct run_options o = {.observer = "keyboard"};
	const char *rig_arg = NULL;
	if (cmd_run_options("run", argc, argv, &o, &rig_arg, &o.protocol_path))
		return EXIT_USAGE;
	if (!o.protocol_path)
		return opts_usage("run", "name the protocol file");
	if (!o.subject && !o.resume_id)
		return opts_usage("run", "--subject ID is required (letters and digits)");
	char *rig = NULL;
	if (!o.resume_id) {
		rig = cmd_rig_path(rig_arg);
		if (!rig) {
			fprintf(stderr, "tachist: no rig profile found; pass --rig FILE\n");
			return EXIT_PROBLEMS;
		}
	}
	o.rig_path = rig;
	int code = cmd_run_session(&o, NULL);
	free(rig);
	return code;
}
