/* trialloop — one frame-locked trial (see trialloop.h for the decisions it implements).
 *
 * Each frame: draw the epoch's picture, (debug hook), flip, append the flip time, then drain the
 * responder. The flip buffer grows to the longest trial seen and is reused; nothing is allocated
 * per frame once it has grown. */
#include "trialloop.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <SDL.h>

#include "dclock.h"
#include "diag.h"
#include "display.h"
#include "frames.h"
#include "responder.h"
#include "trigger.h"

#define MAX_IGNORED 64

struct trialloop {
	struct trialloop_config c;
	int64_t *flips;
	size_t nflips, capflips;
	struct trialloop_key ignored[MAX_IGNORED];
	size_t nignored;
	int64_t iti_start_ns;
	int iti_frames;
	/* state of the trial being shown */
	const struct trialloop_trial *t;
	struct trial_record *rec;
	int64_t onset_ns;
	bool abandoned_pause, abandoned_stop, abandoned_fault;
	char fault[400];               /* why abandoned_fault */
	bool window_open;              /* answers still count */
	enum trialloop_status pending; /* Escape/stop that came with the first ITI flip */
	int64_t prof_mark, prof_work;  /* on_work: start of the current own-work stretch, its sum */
};

struct trialloop *trialloop_new(const struct trialloop_config *c)
{
	struct trialloop *tl = xcalloc(1, sizeof *tl);
	tl->c = *c;
	tl->capflips = 256;
	tl->flips = xmalloc(tl->capflips * sizeof *tl->flips);
	return tl;
}

void trialloop_destroy(struct trialloop *tl)
{
	if (!tl)
		return;
	free(tl->flips);
	free(tl);
}

void trialloop_set_period(struct trialloop *tl, int64_t period_ns)
{
	tl->c.period_ns = period_ns;
}

const struct trialloop_key *trialloop_ignored(const struct trialloop *tl, size_t *n)
{
	*n = tl->nignored;
	return tl->ignored;
}

static void log_key(struct trialloop *tl, const char *key, int64_t t_ns, bool anticipation)
{
	if (tl->nignored == MAX_IGNORED)
		return;
	struct trialloop_key *k = &tl->ignored[tl->nignored++];
	snprintf(k->key, sizeof k->key, "%s", key);
	k->t_ms = tl->onset_ns ? (double)(t_ns - tl->onset_ns) / 1e6 : NAN;
	k->anticipation = anticipation;
}

static bool stopped(const struct trialloop *tl)
{
	return tl->c.stop && *tl->c.stop;
}

/* Draws the picture of epoch E (frame index F). */
static void draw(struct trialloop *tl, enum epoch e)
{
	struct display *d = tl->c.disp;
	if (tl->c.on_work && tl->prof_mark)
		tl->prof_work += dclock_monotonic_ns() - tl->prof_mark;
	display_clear(d);
	bool stim = false;
	switch (e) {
	case EPOCH_FIXATION:
		display_draw_fixation(d, tl->c.fixation_px);
		break;
	case EPOCH_STIMULUS:
		if (tl->t->tex)
			display_draw_texture(d, tl->t->tex, tl->c.stim_px);
		stim = true;
		break;
	case EPOCH_MASK:
		if (tl->c.mask)
			display_draw_texture(d, tl->c.mask, tl->c.stim_px);
		break;
	case EPOCH_RESPONSE:
		if (tl->c.nlegend) {
			int w, h;
			display_size(d, &w, &h);
			display_draw_lines(d, tl->c.legend, tl->c.nlegend, w / 2, tl->c.legend_y, NULL);
		}
		break;
	case EPOCH_FEEDBACK:
		display_draw_feedback(d, tl->rec->correct == 1,
				      tl->c.fixation_px > 0 ? 2 * tl->c.fixation_px : tl->c.stim_px / 8);
		break;
	default:
		break;
	}
	display_draw_marker(d, tl->c.marker_corner, tl->c.marker_px, stim);
	if (tl->c.on_work)
		tl->prof_mark = dclock_monotonic_ns();
}

static int64_t flip(struct trialloop *tl, enum epoch e, int frame)
{
	if (tl->c.on_work) {
		tl->prof_work += dclock_monotonic_ns() - tl->prof_mark;
		tl->c.on_work(tl->c.work_ctx, tl->prof_work);
		tl->prof_work = 0;
	}
	if (tl->c.on_frame)
		tl->c.on_frame(tl->c.frame_ctx, e, frame, e == EPOCH_STIMULUS);
	int64_t t = dclock_flip(tl->c.clock);
	if (tl->c.on_work)
		tl->prof_mark = dclock_monotonic_ns();
	if (tl->nflips == tl->capflips) {
		tl->capflips *= 2;
		tl->flips = xrealloc(tl->flips, tl->capflips * sizeof *tl->flips);
	}
	tl->flips[tl->nflips++] = t;
	return t;
}

/* Writes trigger CODE (0: nothing) and the time the write returned to *T_NS (may be NULL).
 * Returns false, with the trial marked as failed, when the port fails. */
static bool send_code(struct trialloop *tl, int code, int64_t *t_ns)
{
	if (!tl->c.trigger || code <= 0)
		return true;
	if (!trigger_send(tl->c.trigger, code, t_ns, tl->fault, sizeof tl->fault))
		return true;
	tl->abandoned_fault = true;
	return false;
}

/* Drains the responder after a flip. Returns false when the trial must be abandoned. */
static bool poll_all(struct trialloop *tl)
{
	struct trial_record *rec = tl->rec;
	struct responder_event ev;
	int64_t now = dclock_now(tl->c.clock);
	while (responder_poll(tl->c.resp, now, &ev)) {
		if (ev.kind == RESP_ESCAPE) {
			tl->abandoned_pause = true;
			return false;
		}
		if (ev.kind == RESP_QUIT) {
			tl->abandoned_stop = true;
			return false;
		}
		if (ev.kind == RESP_LOST) {
			tl->abandoned_fault = true;
			snprintf(tl->fault, sizeof tl->fault, "the response device stopped: %s",
				 responder_error(tl->c.resp));
			return false;
		}
		if (ev.kind != RESP_KEY)
			continue;
		bool before = !tl->onset_ns || ev.t_ns < tl->onset_ns;
		if (ev.choice >= 0 && before) {
			rec->anticipation = true;
			log_key(tl, ev.key, ev.t_ns, true);
		} else if (ev.choice >= 0 && rec->response < 0 && tl->window_open) {
			rec->response = ev.choice;
			snprintf(rec->response_key, sizeof rec->response_key, "%s", ev.key);
			rec->has_rt = true;
			rec->rt_ms = (double)(ev.t_ns - tl->onset_ns) / 1e6;
			rec->key_sdl_ms = ev.sdl_ms;
			rec->correct = ev.choice == tl->t->truth;
			if (!send_code(tl, tl->c.response_code, NULL))
				return false;
		} else {
			log_key(tl, ev.key, ev.t_ns, false);
		}
	}
	if (stopped(tl)) {
		tl->abandoned_stop = true;
		return false;
	}
	return true;
}

static enum trialloop_status abandon(struct trialloop *tl)
{
	if (tl->abandoned_fault)
		return TRIALLOOP_FAULT;
	return tl->abandoned_stop ? TRIALLOOP_STOP : TRIALLOOP_PAUSE;
}

const char *trialloop_fault(const struct trialloop *tl)
{
	return tl->abandoned_fault ? tl->fault : "";
}

enum trialloop_status trialloop_run(struct trialloop *tl, const struct trialloop_trial *t,
				    struct trial_record *rec)
{
	const int *ef = tl->c.epoch_frames;
	tl->t = t;
	tl->rec = rec;
	tl->nflips = 0;
	tl->nignored = 0;
	tl->onset_ns = 0;
	tl->abandoned_pause = tl->abandoned_stop = tl->abandoned_fault = false;
	tl->fault[0] = '\0';
	tl->window_open = true;
	tl->pending = TRIALLOOP_DONE;
	tl->prof_mark = tl->prof_work = 0;   /* per-trial set-up is not per-frame work */
	rec->response = -1;
	rec->response_key[0] = '\0';
	rec->correct = -1;
	rec->timed_out = false;
	rec->anticipation = false;
	rec->has_rt = false;
	rec->rt_ms = NAN;
	rec->key_sdl_ms = 0;
	rec->rt_clock = tl->c.resp->rt_clock;
	rec->frames_planned = ef[EPOCH_STIMULUS];
	rec->onset_ns = rec->offset_ns = 0;
	rec->trigger_ns = 0;

	struct responder_trial rt = {tl->c.nchoices, t->truth, t->has_level, t->level};
	responder_begin(tl->c.resp, &rt);

	static const enum epoch pre[] = {EPOCH_FIXATION, EPOCH_BLANK};
	for (size_t k = 0; k < 2; k++)
		for (int f = 0; f < ef[pre[k]]; f++) {
			draw(tl, pre[k]);
			flip(tl, pre[k], f);
			if (!poll_all(tl))
				return abandon(tl);
		}

	size_t i_on = tl->nflips;
	for (int f = 0; f < ef[EPOCH_STIMULUS]; f++) {
		draw(tl, EPOCH_STIMULUS);
		int64_t ts = flip(tl, EPOCH_STIMULUS, f);
		if (f == 0) {
			/* The onset code goes out right after the flip returns, never before it. */
			int code = tl->c.onset_codes && t->truth >= 0 && t->truth < tl->c.nchoices
					   ? tl->c.onset_codes[t->truth] : 0;
			if (!send_code(tl, code, &rec->trigger_ns))
				return abandon(tl);
			tl->onset_ns = ts;
			responder_onset(tl->c.resp, ts);
		}
		if (!poll_all(tl))
			return abandon(tl);
	}
	size_t i_off = tl->nflips;     /* index of the offset flip (the next one to come) */
	for (int f = 0; f < ef[EPOCH_MASK]; f++) {
		draw(tl, EPOCH_MASK);
		flip(tl, EPOCH_MASK, f);
		if (!poll_all(tl))
			return abandon(tl);
	}
	size_t i_mask_end = tl->nflips;
	int rframes = ef[EPOCH_RESPONSE];
	for (int f = 0; rec->response < 0 && (rframes == 0 || f < rframes); f++) {
		draw(tl, EPOCH_RESPONSE);
		flip(tl, EPOCH_RESPONSE, f);
		if (!poll_all(tl))
			return abandon(tl);
	}
	tl->window_open = false;
	if (rec->response < 0)
		rec->timed_out = true;
	if (t->feedback)
		for (int f = 0; f < ef[EPOCH_FEEDBACK]; f++) {
			draw(tl, EPOCH_FEEDBACK);
			flip(tl, EPOCH_FEEDBACK, f);
			if (!poll_all(tl))
				return abandon(tl);
		}
	/* First ITI flip: it also ends the stimulus when no other epoch followed it. */
	draw(tl, EPOCH_ITI);
	tl->iti_start_ns = flip(tl, EPOCH_ITI, 0);
	tl->iti_frames = ef[EPOCH_ITI] > 0 ? ef[EPOCH_ITI] : 1;
	if (!poll_all(tl))   /* the trial is complete: keep it, pause, stop or fail after storing it */
		tl->pending = tl->abandoned_fault ? TRIALLOOP_FAULT
			      : tl->abandoned_stop ? TRIALLOOP_STOP : TRIALLOOP_PAUSE;

	int64_t p = tl->c.period_ns;
	rec->start_ns = tl->flips[0];
	rec->onset_ns = tl->flips[i_on];
	rec->offset_ns = tl->flips[i_off];
	rec->frames_actual = (int)llround((double)(rec->offset_ns - rec->onset_ns) / (double)p);
	int dropped = 0;
	bool drop_in_stim = false;
	for (size_t k = 1; k < tl->nflips; k++) {
		int lost = frames_lost(tl->flips[k] - tl->flips[k - 1], p);
		dropped += lost;
		if (lost > 0 && k > i_on && k <= (i_mask_end > i_off ? i_mask_end : i_off))
			drop_in_stim = true;
	}
	rec->dropped_frames = dropped;
	rec->timing_ok = rec->frames_actual == rec->frames_planned && !drop_in_stim;
	rec->flips = tl->flips;
	rec->nflips = tl->nflips;
	return TRIALLOOP_DONE;
}

enum trialloop_status trialloop_iti_finish(struct trialloop *tl)
{
	int64_t p = tl->c.period_ns;
	int64_t target = tl->iti_start_ns + (int64_t)tl->iti_frames * p;
	int64_t last = tl->nflips ? tl->flips[tl->nflips - 1] : tl->iti_start_ns;
	int frame = 1;
	if (tl->pending != TRIALLOOP_DONE)
		return tl->pending;
	while (last + p < target - p / 2) {
		draw(tl, EPOCH_ITI);
		if (tl->c.on_frame)
			tl->c.on_frame(tl->c.frame_ctx, EPOCH_ITI, frame, false);
		last = dclock_flip(tl->c.clock);
		frame++;
		char key[24];
		uint32_t ms;
		int k;
		while ((k = display_poll_key(tl->c.disp, key, sizeof key, &ms)) != 0) {
			if (k == 2)
				return TRIALLOOP_STOP;
			if (!strcmp(key, "escape"))
				return TRIALLOOP_PAUSE;
		}
		if (stopped(tl))
			return TRIALLOOP_STOP;
	}
	return TRIALLOOP_DONE;
}

int trialloop_screen(struct trialloop *tl, const char *const *lines, size_t nlines,
		     const char *const *keys, size_t nkeys, bool escape_key,
		     int (*tick)(void *ctx), void *ctx, double max_ms)
{
	struct display *d = tl->c.disp;
	int64_t t0 = dclock_monotonic_ns(), last_tick = 0;
	for (;;) {
		display_clear(d);
		display_draw_text(d, lines, nlines);
		display_draw_marker(d, tl->c.marker_corner, tl->c.marker_px, false);
		dclock_flip(tl->c.clock);
		if (tl->c.clock->simulated)
			SDL_Delay(5);   /* an unpaced virtual clock would spin */
		char key[24];
		uint32_t ms;
		int k;
		while ((k = display_poll_key(d, key, sizeof key, &ms)) != 0) {
			if (k == 2)
				return -2;
			if (escape_key && !strcmp(key, "escape"))
				return -3;
			for (size_t i = 0; i < nkeys; i++)
				if (!strcmp(key, keys[i]))
					return (int)i;
		}
		if (stopped(tl))
			return -2;
		int64_t now = dclock_monotonic_ns();
		if (tick && now - last_tick >= 50000000) {
			last_tick = now;
			if (tick(ctx))
				return -1;
		}
		if (max_ms > 0 && (double)(now - t0) / 1e6 >= max_ms)
			return -4;
	}
}

int trialloop_measure(struct trialloop *tl, int64_t *flips, size_t n)
{
	for (size_t i = 0; i < n; i++) {
		display_clear(tl->c.disp);
		display_draw_marker(tl->c.disp, tl->c.marker_corner, tl->c.marker_px, false);
		flips[i] = dclock_flip(tl->c.clock);
		char key[24];
		uint32_t ms;
		while (display_poll_key(tl->c.disp, key, sizeof key, &ms) == 2)
			return -1;
		if (stopped(tl))
			return -1;
	}
	return 0;
}
