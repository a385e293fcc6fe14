/* blocks — the open session's blocks: trial counts, estimated durations, practice marked, what has
 * been run; start, skip or repeat a block; close the session. Also where the console says how the
 * presentation side is doing: still opening, failed to open (with FILE:LINE problems), ended
 * unexpectedly (its session marked interrupted), or closed. */
#include "console.h"

#include <curses.h>
#include <math.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "diag.h"
#include "estimate.h"
#include "run.h"
#include "store.h"

struct blocks {
	int sel;
	bool chose;                       /* selection placed on the first block to run */
	long seen_summaries;
	bool skipped[CONSOLE_MAX_BLOCKS];
	int pending;                      /* block waiting for a yes/no */
};

static const struct console_key blocks_keys[] = {
	{"Enter", "start block"},
	{"Up/Down", "choose"},
	{"k", "skip"},
	{"a", "run again"},
	{"r", "results"},
	{"c", "close session"},
	{"m", "accept rig mismatch"},
};

/* A block's estimated length: planned until trials have run in this session, then from their
 * measured mean duration (estimate.h), keeping the block's refresh measurement. */
static double block_estimate(const struct console_pres_state *st, const struct console_block *k)
{
	double overhead = k->est_seconds - k->trial_seconds * (double)k->ntrials;
	double per = estimate_per_trial(k->trial_seconds, st->measured_s, st->measured_trials);
	return per * (double)k->ntrials + (overhead > 0 ? overhead : 0);
}

static int first_to_run(const struct console_pres_state *st, const struct blocks *b)
{
	for (size_t i = 0; i < st->nblocks; i++)
		if (st->blocks[i].stored < st->blocks[i].ntrials && !b->skipped[i])
			return (int)i;
	return st->nblocks ? (int)st->nblocks - 1 : 0;
}

static void summary_line(char *buf, size_t len, const struct console_summary *s)
{
	char acc[32] = "no answers", rt[32] = "";
	if (isfinite(s->accuracy))
		snprintf(acc, sizeof acc, "%.0f%% correct", 100.0 * s->accuracy);
	if (isfinite(s->median_rt_ms))
		snprintf(rt, sizeof rt, ", median RT %.0f ms", s->median_rt_ms);
	static const char *const how[] = {"done", "skipped by the observer", "ended",
					  "interrupted", "stopped by an error"};
	const char *h = s->result >= 0 && s->result <= 4 ? how[s->result] : "over";
	snprintf(buf, len, "Block \"%s\" %s: %zu trials, %s%s, %zu timing fault%s", s->name, h,
		 s->trials, acc, rt, s->faults, s->faults == 1 ? "" : "s");
}

/* The run layer words its advice for the command line (a --headless flag); the console has a
 * form row for it instead. Copies ERR into OUT, cut before that advice and with the console's own
 * words in its place. */
static void console_words(const char *err, char *out, size_t len)
{
	const char *flag = strstr(err, "--headless");
	if (!flag) {
		snprintf(out, len, "%s", err);
		return;
	}
	const char *cut = flag;
	for (const char *q = err; q < flag; q++)
		if (*q == ';')
			cut = q;
	if (cut == flag)
		for (const char *q = err; q + 4 < flag; q++)
			if (!strncmp(q, ", or", 4))
				cut = q;
	snprintf(out, len, "%.*s. Go back (Esc) to the set-up form and choose a headless display "
		 "there for simulated timing.", (int)(cut - err), err);
}

static void draw_state(struct console *c, const struct console_pres_state *st, int y)
{
	int w = COLS - 4;
	switch (st->phase) {
	case CONSOLE_PRES_OPENING:
		console_put(c, y, 2, w, CONSOLE_WARN,
			    "Opening the session: loading the files and the observer's display ...");
		return;
	case CONSOLE_PRES_CRASHED: {
		char buf[400], how[80];
		if (st->term_signal)
			snprintf(how, sizeof how, "signal %d, %s", st->term_signal,
				 strsignal(st->term_signal));
		else
			snprintf(how, sizeof how, "exit code %d", st->exit_code);
		snprintf(buf, sizeof buf,
			 "The presentation process stopped unexpectedly (%s). Every trial stored "
			 "before that is kept; the session is marked interrupted and can be resumed "
			 "from the sessions list.", how);
		y += console_wrap(c, y, 2, w, 4, CONSOLE_BAD, buf);
		break;
	}
	case CONSOLE_PRES_FAILED: {
		char words[1200];
		console_words(st->error[0] ? st->error : "The session could not go on", words,
			      sizeof words);
		y += console_wrap(c, y, 2, w, 4, CONSOLE_BAD, words);
		if (st->rig_mismatch)
			y += console_wrap(c, y + 1, 2, w, 2, CONSOLE_WARN,
					  "m accepts the mismatch and opens the session anyway (the "
					  "choice is stored as an event of the session).") + 1;
		break;
	}
	case CONSOLE_PRES_CLOSED:
		console_put(c, y++, 2, w, CONSOLE_OK,
			    "Session closed. Every trial is in the database; r shows the results.");
		if (st->error[0])
			y += console_wrap(c, y, 2, w, 2, CONSOLE_BAD, st->error);
		break;
	case CONSOLE_PRES_CLOSING:
		console_put(c, y, 2, w, CONSOLE_WARN, "Closing the session ...");
		return;
	default:
		return;
	}
	for (int i = 0; i < st->ndiags && y < LINES - 3; i++)
		y += console_wrap_from(c, y, 4, w - 2, 4, 0, LINES - 3 - y, CONSOLE_BAD,
				       st->diags[i]);
	/* What the presentation process printed (libraries' own messages among it) helps only
	 * when it died unexpectedly. */
	if (st->phase == CONSOLE_PRES_CRASHED)
		for (int i = st->nlog > 3 ? st->nlog - 3 : 0; i < st->nlog && y < LINES - 3; i++)
			y += console_wrap_from(c, y, 4, w - 2, 4, 0, LINES - 3 - y, CONSOLE_DIM,
					       st->log[i]);
}

static void blocks_draw(struct console *c, void *sv)
{
	struct blocks *b = sv;
	struct console_pres *p = console_presenter(c);
	if (!p) {
		console_put(c, 2, 2, COLS - 4, CONSOLE_DIM, "No session is open.");
		return;
	}
	const struct console_pres_state *st = console_pres_state(p);
	int y = console_body_top();
	if (st->session_id[0])
		console_putf(c, y++, 2, COLS - 4, CONSOLE_HEAD, "Session %.8s   seed %llu   %s timing",
			     st->session_id, (unsigned long long)st->seed, st->timing_mode);
	y++;
	if (st->nblocks) {
		/* Block names get 18 columns at 80; a wider terminal gives a longer name up to half
		 * of what it adds (the state column takes the rest). */
		int nw = 18;
		for (size_t i = 0; i < st->nblocks; i++) {
			int l = (int)strlen(st->blocks[i].name), room = 18 + (COLS - CONSOLE_MIN_COLS) / 2;
			if (l > nw)
				nw = l < room ? l : room;
		}
		console_putf(c, y++, 2, COLS - 4, CONSOLE_DIM,
			     "  #  %-*s trials       about  kind       state", nw, "block");
		double left = 0, total = 0;
		for (size_t i = 0; i < st->nblocks; i++) {
			double e = block_estimate(st, &st->blocks[i]);
			total += e;
			if (st->blocks[i].stored < st->blocks[i].ntrials && !b->skipped[i])
				left += e * (double)(st->blocks[i].ntrials - st->blocks[i].stored) /
					(double)st->blocks[i].ntrials;
		}
		for (size_t i = 0; i < st->nblocks && y < LINES - 7; i++, y++) {
			const struct console_block *k = &st->blocks[i];
			char dur[32], state[80];
			estimate_format(block_estimate(st, k), dur, sizeof dur);
			if (k->stored >= k->ntrials && k->ntrials)
				snprintf(state, sizeof state, "done");
			else if (k->stored)
				snprintf(state, sizeof state, "%zu of %zu stored", k->stored, k->ntrials);
			else if (b->skipped[i])
				snprintf(state, sizeof state, "skipped");
			else
				snprintf(state, sizeof state, "not run");
			if (st->block_has_result[i] && isfinite(st->block_result[i].accuracy)) {
				size_t n = strlen(state);
				snprintf(state + n, sizeof state - n, ", %.0f%% correct",
					 100.0 * st->block_result[i].accuracy);
			}
			if (k->runs > 1) {
				size_t n = strlen(state);
				snprintf(state + n, sizeof state - n, ", run %d times", k->runs);
			}
			bool sel = (int)i == b->sel && st->phase == CONSOLE_PRES_IDLE;
			enum console_role role = sel ? CONSOLE_PICK : CONSOLE_PLAIN;
			int sx = 2 + console_putf(c, y, 2, COLS - 4, role,
						  "%s%2zu  %-*.*s %6zu  %10s  %-9s  ", sel ? ">" : " ",
						  i + 1, nw, nw, k->name, k->ntrials, dur,
						  k->practice ? "practice"
							      : k->adaptive ? "adaptive" : "");
			/* A state wider than its column goes on under itself, not cut. */
			int used = console_wrap(c, y, sx, COLS - 2 - sx, 2, role, state);
			y += used > 1 ? used - 1 : 0;
		}
		char t1[32], t2[32];
		if (st->measured_trials)
			console_putf(c, y++, 2, COLS - 4, CONSOLE_DIM, "session about %s, %s left "
				     "(from %zu trials run, %.2f s each)",
				     estimate_format(total, t1, sizeof t1),
				     estimate_format(left, t2, sizeof t2), st->measured_trials,
				     st->measured_s / (double)st->measured_trials);
		else
			console_putf(c, y++, 2, COLS - 4, CONSOLE_DIM, "session about %s (planned)",
				     estimate_format(total, t1, sizeof t1));
		y++;
	}
	if (st->has_summary && y < LINES - 3) {
		char buf[300];
		summary_line(buf, sizeof buf, &st->summary);
		y += console_wrap(c, y, 2, COLS - 4, 2,
				  st->summary.result == 0 ? CONSOLE_OK : CONSOLE_WARN, buf);
		if (st->summary.error[0])
			console_put(c, y++, 2, COLS - 4, CONSOLE_BAD, st->summary.error);
		if (st->summary.refresh_mismatch)
			console_putf(c, y++, 2, COLS - 4, CONSOLE_WARN,
				     "measured refresh %.2f Hz differs from the rig's %.2f Hz by more "
				     "than 1%%", st->summary.refresh_hz, st->summary.refresh_nominal_hz);
		y++;
	}
	draw_state(c, st, y);
}

/* Blocks skipped earlier in a resumed session, from its "skip" events (detail = block name). */
static void load_skips(struct console *c, struct blocks *b, const struct console_pres_state *st)
{
	struct store *db = NULL;
	struct store_event_row *ev = NULL;
	size_t n = 0;
	if (store_open(console_options(c)->db_path, &db, NULL) == 0 &&
	    store_events_load(db, st->session_id, &ev, &n, NULL) == 0)
		for (size_t i = 0; i < n; i++)
			for (size_t k = 0; k < st->nblocks && !strcmp(ev[i].kind, "skip"); k++)
				if (ev[i].detail && !strcmp(ev[i].detail, st->blocks[k].name))
					b->skipped[k] = true;
	store_events_free(ev, n);
	store_close(db);
}

static bool blocks_tick(struct console *c, void *sv)
{
	struct blocks *b = sv;
	struct console_pres *p = console_presenter(c);
	if (!p)
		return false;
	const struct console_pres_state *st = console_pres_state(p);
	if (!b->chose && st->phase == CONSOLE_PRES_IDLE && st->nblocks) {
		load_skips(c, b, st);
		b->sel = first_to_run(st, b);
		b->chose = true;
		return true;
	}
	if (st->nsummaries != b->seen_summaries) {
		b->seen_summaries = st->nsummaries;
		b->sel = first_to_run(st, b);
		return true;
	}
	return false;
}

static void start_block(struct console *c, int i)
{
	struct console_pres *p = console_presenter(c);
	if (console_pres_run_block(p, i) != 0) {
		console_say(c, CONSOLE_BAD, "the session cannot start a block now");
		return;
	}
	console_live_push(c);
}

static void answer_again(struct console *c, void *ud, bool yes)
{
	struct blocks *b = ud;
	if (yes)
		start_block(c, b->pending);
}

static void answer_skip(struct console *c, void *ud, bool yes)
{
	struct blocks *b = ud;
	if (!yes)
		return;
	struct console_pres *p = console_presenter(c);
	if (console_pres_skip_block(p, b->pending) == 0) {
		b->skipped[b->pending] = true;
		console_say(c, CONSOLE_OK, "block %d skipped (recorded as an event)", b->pending + 1);
		const struct console_pres_state *st = console_pres_state(p);
		b->sel = first_to_run(st, b);
	}
}

static void answer_close(struct console *c, void *ud, bool yes)
{
	(void)ud;
	if (!yes)
		return;
	console_pres_close(console_presenter(c));
}

static void answer_accept(struct console *c, void *ud, bool yes)
{
	(void)ud;
	struct console_pres *p = console_presenter(c);
	if (!yes || !p)
		return;
	char err[300];
	struct console_pres *np = console_pres_reopen_accepting(p, err, sizeof err);
	if (!np) {
		console_say(c, CONSOLE_BAD, "%s", err);
		return;
	}
	console_set_presenter(c, np);
	console_say(c, CONSOLE_WARN, "opening the session on the mismatched display");
}

static bool blocks_key(struct console *c, void *sv, int ch)
{
	struct blocks *b = sv;
	blocks_tick(c, sv);   /* a block may have ended since the last tick: act on the new state */
	struct console_pres *p = console_presenter(c);
	const struct console_pres_state *st = p ? console_pres_state(p) : NULL;
	bool idle = st && st->phase == CONSOLE_PRES_IDLE;
	bool over = !st || st->phase == CONSOLE_PRES_CLOSED || st->phase == CONSOLE_PRES_FAILED ||
		    st->phase == CONSOLE_PRES_CRASHED;
	switch (ch) {
	case KEY_UP:
		if (b->sel > 0)
			b->sel--;
		return true;
	case KEY_DOWN:
		if (st && (size_t)b->sel + 1 < st->nblocks)
			b->sel++;
		return true;
	case '\n':
	case '\r':
	case KEY_ENTER:
		if (!idle) {
			console_say(c, CONSOLE_WARN, "the session is not open for blocks");
			return true;
		}
		if (st->blocks[b->sel].ntrials && st->blocks[b->sel].stored >= st->blocks[b->sel].ntrials)
			return blocks_key(c, sv, 'a');
		start_block(c, b->sel);
		return true;
	case 'a':
	case 'A': {
		if (!idle)
			return true;
		b->pending = b->sel;
		char q[160];
		snprintf(q, sizeof q, "Run block %d (\"%s\") again? Its trials are stored again with "
			 "new trial numbers.", b->sel + 1, st->blocks[b->sel].name);
		console_confirm(c, q, answer_again, b);
		return true;
	}
	case 'k':
	case 'K': {
		if (!idle)
			return true;
		b->pending = b->sel;
		char q[160];
		snprintf(q, sizeof q, "Skip block %d (\"%s\")?", b->sel + 1, st->blocks[b->sel].name);
		console_confirm(c, q, answer_skip, b);
		return true;
	}
	case 'm':
	case 'M':
		if (st && st->phase == CONSOLE_PRES_FAILED && st->rig_mismatch)
			console_confirm(c, "Open the session on this display although it does not "
					   "match the rig?", answer_accept, b);
		else
			console_say(c, CONSOLE_DIM, "only when a session was refused for a display "
				    "that does not match the rig");
		return true;
	case 'r':
	case 'R':
		if (st && st->session_id[0])
			console_results_push(c, st->session_id);
		return true;
	case 'c':
	case 'C':
	case 'q':
	case 'Q':
	case 27:
		if (over) {
			console_set_presenter(c, NULL);
			console_pop(c);
			return true;
		}
		if (idle)
			console_confirm(c, "Close this session? Blocks not run stay open; the session "
					   "can be resumed later from the sessions list.",
					answer_close, b);
		return true;
	default:
		return false;
	}
}

static void blocks_destroy(void *st)
{
	free(st);
}

void console_blocks_push(struct console *c)
{
	struct blocks *b = xcalloc(1, sizeof *b);
	struct console_screen s = {
		.title = "blocks",
		.keys = blocks_keys,
		.nkeys = sizeof blocks_keys / sizeof blocks_keys[0],
		.draw = blocks_draw,
		.key = blocks_key,
		.tick = blocks_tick,
		.destroy = blocks_destroy,
		.st = b,
	};
	console_push(c, &s);
}
