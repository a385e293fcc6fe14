/* cmd_run — `tachist run`: one session from the command line, through the run layer (run.h).
 * Prints a one-line summary per block on stdout, warnings and problems on stderr, and a live
 * progress line on stderr when it is a terminal. Shares its option parsing and summaries with
 * `tachist demo` (cmd_run_session). */
#include <math.h>
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

static enum run_cmd progress_line(const struct run_snapshot *s, void *ctx)
{
	(void)ctx;
	if (s->state == RUN_STATE_ITI)
		fprintf(stderr, "\r\033[K%s: trial %zu of %zu, %.0f s left, %zu correct of %zu",
			s->block_name, s->trial_n, s->trial_total, s->remaining_s, s->correct, s->answered);
	return RUN_CMD_CONTINUE;
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
	enum run_block_result r = run_all(s, isatty(STDERR_FILENO) ? progress_line : NULL, NULL,
					  print_block, &err);
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

/* Parses the options `run` and `demo` share. Returns 0, or -1 after a message on stderr. */
int cmd_run_options(int argc, char **argv, int first, struct run_options *o, char **rig_arg)
{
	for (int i = first; i < argc; i++) {
		const char *a = argv[i];
		const char *v = i + 1 < argc ? argv[i + 1] : NULL;
		bool needs = true;
		if (!strcmp(a, "--subject") && v)
			o->subject = v;
		else if (!strcmp(a, "--db") && v)
			o->db_path = v;
		else if (!strcmp(a, "--rig") && v)
			*rig_arg = (char *)v;
		else if (!strcmp(a, "--observer") && v)
			o->observer = v;
		else if (!strcmp(a, "--resume") && v)
			o->resume_id = v;
		else if (!strcmp(a, "--screenshots") && v)
			o->screenshot_dir = v;
		else if (!strcmp(a, "--seed") && v) {
			unsigned long long x;
			if (cmd_parse_u64(v, &x) || x > 4294967295ull) {
				fprintf(stderr, "tachist: --seed takes a whole number from 0 to 4294967295\n");
				return -1;
			}
			o->seed = x;
			o->has_seed = true;
		} else if (!strcmp(a, "--inject-drops") && v) {
			if (cmd_parse_double(v, &o->inject_drops) || o->inject_drops < 0 || o->inject_drops > 1) {
				fprintf(stderr, "tachist: --inject-drops takes a rate from 0 to 1\n");
				return -1;
			}
		} else {
			needs = false;
			if (!strcmp(a, "--headless"))
				o->headless = true;
			else if (!strcmp(a, "--pace"))
				o->pace = true;
			else if (!strcmp(a, "--window"))
				o->window = true;
			else {
				fprintf(stderr, "tachist: %s: unknown option or missing value '%s'\n", argv[0], a);
				return -1;
			}
		}
		if (needs)
			i++;
	}
	if ((o->pace || o->inject_drops > 0) && !o->headless) {
		fprintf(stderr, "tachist: --pace and --inject-drops need --headless\n");
		return -1;
	}
	return 0;
}

int cmd_run(int argc, char **argv)
{
	struct run_options o = {.observer = "keyboard"};
	char *rig_arg = NULL;
	if (argc < 2 || argv[1][0] == '-') {
		cmd_print_usage("run", stderr);
		return EXIT_USAGE;
	}
	o.protocol_path = argv[1];
	if (cmd_run_options(argc, argv, 2, &o, &rig_arg)) {
		cmd_print_usage("run", stderr);
		return EXIT_USAGE;
	}
	if (!o.subject && !o.resume_id) {
		fprintf(stderr, "tachist: run needs --subject ID (letters and digits)\n");
		cmd_print_usage("run", stderr);
		return EXIT_USAGE;
	}
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
