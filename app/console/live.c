/* live — a block as it runs: trial n of N with a progress bar, elapsed and remaining time, running
 * accuracy and median RT, timing health (refresh, dropped frames, flagged trials) and the last few
 * trials; pause, resume, and end the session (asked twice). When the observer pauses (Escape), the
 * experimenter decides here: go on, skip the rest of the block (asked twice) or end the session. Everything shown comes from the
 * snapshots the presentation child sends from its inter-trial intervals; this screen never talks
 * to the trial loop directly, and drawing it costs the loop nothing. It leaves by itself when the
 * block is over. */
#include "console.h"

#include <curses.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "diag.h"
#include "run.h"

struct live {
	bool pause_sent;
	bool end_sent;
};

static const struct console_key live_keys[] = {
	{"p", "pause/resume"},
	{"g", "go on"},
	{"s", "skip block"},
	{"e", "end session"},
};

static void clock_text(char *buf, size_t len, double s)
{
	if (!(s >= 0) || !isfinite(s)) {
		snprintf(buf, len, "-");
		return;
	}
	long t = lround(s);
	snprintf(buf, len, "%ld:%02ld", t / 60, t % 60);
}

static const char *state_word(int state)
{
	switch (state) {
	case RUN_STATE_PAUSED: return "PAUSED";
	case RUN_STATE_BREAK: return "rest break";
	case RUN_STATE_MEASURING: return "measuring the refresh";
	default: return "running";
	}
}

static void live_draw(struct console *c, void *sv)
{
	struct live *l = sv;
	struct console_pres *p = console_presenter(c);
	if (!p)
		return;
	const struct console_pres_state *st = console_pres_state(p);
	int y = console_body_top(), w = COLS - 4;
	int bi = st->running_block;
	const char *bname = bi >= 0 && (size_t)bi < st->nblocks ? st->blocks[bi].name : "";
	if (!st->has_snap) {
		console_putf(c, y, 2, w, CONSOLE_HEAD, "Block %d of %zu: %s", bi + 1, st->nblocks, bname);
		console_put(c, y + 2, 2, w, CONSOLE_WARN,
			    "Starting: measuring the refresh and showing the block's first screen ...");
		return;
	}
	const struct console_snap *s = &st->snap;
	console_putf(c, y, 2, w, CONSOLE_HEAD, "Block %d of %zu: %s%s", s->block + 1, st->nblocks,
		     s->block_name, s->practice ? "  (a practice block)" : "");
	const char *word = l->end_sent ? "ending"
			 : s->paused_by_observer ? "PAUSED by the observer" : state_word(s->state);
	console_put(c, y, COLS - 2 - (int)strlen(word), (int)strlen(word),
		    s->state == RUN_STATE_PAUSED || l->end_sent ? CONSOLE_WARN : CONSOLE_OK, word);
	y += 2;
	if (s->paused_by_observer && !l->end_sent) {
		y += console_wrap(c, y, 2, w, 2, CONSOLE_WARN,
				  "The observer paused (Escape) and waits for you: g goes on, s skips "
				  "the rest of this block, e ends the session.") + 1;
	}
	char tn[64];
	snprintf(tn, sizeof tn, "Trial %zu of %zu", s->trial_n, s->trial_total);
	console_put(c, y, 2, 20, CONSOLE_PLAIN, tn);
	double frac = s->trial_total ? (double)s->trial_n / (double)s->trial_total : 0;
	int bw = COLS - 2 - 24 - 6;
	console_bar(c, y, 24, bw, frac);
	console_putf(c, y, 24 + bw + 1, 5, CONSOLE_PLAIN, "%3.0f%%", 100 * frac);
	y++;
	char el[32], rem[32];
	clock_text(el, sizeof el, s->elapsed_s);
	clock_text(rem, sizeof rem, s->remaining_s);
	char line[300];
	snprintf(line, sizeof line,
		 "Elapsed %s   remaining about %s   session: %zu of %zu planned trials stored", el,
		 rem, s->session_done, s->session_total);
	y += console_wrap(c, y, 2, w, 2, CONSOLE_DIM, line) + 1;
	console_put(c, y, 2, 12, CONSOLE_DIM, "Accuracy");
	if (isfinite(s->accuracy))
		console_putf(c, y, 14, w - 12, CONSOLE_PLAIN, "%.1f%%  (%zu of %zu answered)",
			     100 * s->accuracy, s->correct, s->answered);
	else
		console_put(c, y, 14, w - 12, CONSOLE_DIM, "no answers yet");
	y++;
	console_put(c, y, 2, 12, CONSOLE_DIM, "Median RT");
	if (isfinite(s->median_rt_ms))
		console_putf(c, y, 14, w - 12, CONSOLE_PLAIN, "%.0f ms", s->median_rt_ms);
	else
		console_put(c, y, 14, w - 12, CONSOLE_DIM, "-");
	y++;
	console_put(c, y, 2, 12, CONSOLE_DIM, "Timing");
	bool healthy = s->dropped_frames == 0 && s->flagged_trials == 0;
	char refresh[80] = "refresh not measured yet";
	if (s->refresh_hz > 0)
		snprintf(refresh, sizeof refresh, "refresh %.2f Hz (rig %.2f)", s->refresh_hz,
			 s->refresh_nominal_hz);
	snprintf(line, sizeof line, "%s, %s; %zu dropped frame%s, %zu trial%s flagged",
		 s->timing_mode, refresh, s->dropped_frames, s->dropped_frames == 1 ? "" : "s",
		 s->flagged_trials, s->flagged_trials == 1 ? "" : "s");
	y += console_wrap(c, y, 14, w - 12, 2, healthy ? CONSOLE_OK : CONSOLE_WARN, line) + 1;
	console_put(c, y++, 2, w, CONSOLE_DIM,
		    "  trial  category         answer           correct     RT ms   frames");
	for (size_t i = 0; i < s->nlast && y < LINES - 3; i++, y++) {
		const struct console_brief *t = &s->last[i];
		const char *mark = t->correct == 1 ? (console_utf8(c) ? "\u2713 yes" : "yes")
				 : t->correct == 0 ? (console_utf8(c) ? "\u2717 no" : "no")
				 : t->timed_out ? "timed out" : "none";
		char rt[16] = "-";
		if (isfinite(t->rt_ms))
			snprintf(rt, sizeof rt, "%.0f", t->rt_ms);
		enum console_role role = t->timing_ok ? CONSOLE_PLAIN : CONSOLE_WARN;
		console_putf(c, y, 2, w, role, "  %5d  %-16.16s %-16.16s %-10s %6s   %d/%d%s",
			     t->trial + 1, t->category, t->response[0] ? t->response : "-", mark, rt,
			     t->frames_actual, t->frames_planned, t->timing_ok ? "" : " timing fault");
	}
}

/* Leaves when the block is over (the blocks screen shows its summary). */
static bool live_tick(struct console *c, void *sv)
{
	(void)sv;
	struct console_pres *p = console_presenter(c);
	if (!p || console_pres_state(p)->phase != CONSOLE_PRES_RUNNING) {
		console_pop(c);
		return true;
	}
	return false;
}

static void answer_end(struct console *c, void *ud, bool yes)
{
	struct live *l = ud;
	if (!yes)
		return;
	if (console_pres_end(console_presenter(c)) == 0) {
		l->end_sent = true;
		console_say(c, CONSOLE_WARN, "ending after the current trial; stored trials are kept");
	}
}

static void answer_skip(struct console *c, void *ud, bool yes)
{
	(void)ud;
	if (yes && console_pres_answer(console_presenter(c), true) == 0)
		console_say(c, CONSOLE_WARN, "skipping the rest of the block; stored trials are kept");
}

static bool observer_paused(struct console_pres *p)
{
	const struct console_pres_state *st = console_pres_state(p);
	return st->has_snap && st->snap.paused_by_observer;
}

static bool live_key(struct console *c, void *sv, int ch)
{
	struct live *l = sv;
	struct console_pres *p = console_presenter(c);
	if (!p)
		return false;
	switch (ch) {
	case 'p':
	case 'P':
	case ' ':
		l->pause_sent = !l->pause_sent;
		console_pres_pause(p, l->pause_sent);
		console_say(c, CONSOLE_WARN, l->pause_sent ? "pausing after the current trial"
							   : "resuming");
		return true;
	case 'g':
	case 'G':
		if (!observer_paused(p))
			console_say(c, CONSOLE_DIM, "g answers the observer's pause; p pauses the block");
		else if (console_pres_answer(p, false) == 0)
			console_say(c, CONSOLE_OK, "going on");
		return true;
	case 's':
	case 'S':
		if (!observer_paused(p))
			console_say(c, CONSOLE_DIM, "s answers the observer's pause; p pauses the block");
		else
			console_confirm(c, "Skip the rest of this block? Its stored trials are kept.",
					answer_skip, l);
		return true;
	case 'e':
	case 'E':
		console_confirm(c, "End the session now? Every stored trial is kept and the session "
				   "can be resumed later.", answer_end, l);
		return true;
	case 'q':
	case 'Q':
	case 27:
		console_say(c, CONSOLE_WARN, "a block is running: p pauses it, e ends the session");
		return true;
	default:
		return false;
	}
}

void console_live_push(struct console *c)
{
	struct live *l = xcalloc(1, sizeof *l);
	struct console_screen s = {
		.title = "block running",
		.keys = live_keys,
		.nkeys = sizeof live_keys / sizeof live_keys[0],
		.draw = live_draw,
		.key = live_key,
		.tick = live_tick,
		.destroy = free,
		.st = l,
	};
	console_push(c, &s);
}
