/* run_block — one run of a block: building its queue of trials (the planned trials not yet stored,
 * or all of them for a repeat of a finished block, then the timing-fault repeats a resume owes),
 * showing one trial at a time, and the bookkeeping after each (stored flags, block figures,
 * repeats of trials with a timing fault, the progress callback, pauses and rest breaks).
 *
 * Data: a struct blockrun lives on run_block's stack for the length of the run; its queue
 * (struct queued) grows when a faulty trial is queued again. Trials are stored through the trial
 * sink (run_sink) in the inter-trial interval, before the next trial's first flip; after that come
 * the progress callback and the texture work of the look-ahead queue, and then the rest of the ITI
 * is flipped. Called through run_block (include/run.h) by run_all, the `run` command and the
 * console's presentation child. Adaptive trials ask app/run/run_adaptive.c for their stimulus. */
#include "run_private.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>

#include "dclock.h"
#include "estimate.h"
#include "preload.h"
#include "trialloop.h"
#include "trigger.h"

/* A trial queued in this block run: a planned trial, or a repeat of one with a timing fault. */
struct queued {
	size_t plan_index;
	int repeat_of;          /* -1 or the session trial number it repeats */
	uint64_t id;            /* preload id */
};

/* What a block run keeps while it goes. */
struct blockrun {
	struct run_session *s;
	size_t block;
	run_progress_fn progress;
	void *ctx;
	struct run_block_summary sum;
	double *rts;
	size_t nrts;
	struct run_trial_brief last[RUN_LAST_TRIALS];
	size_t nlast;
	size_t total;            /* trials this run will show (grows with repeats) */
	int64_t t0;
	enum run_state state;
	bool paused_by_observer;
	bool pause_taken;        /* the watcher answered PAUSE during the observer's pause */
	enum run_cmd last_cmd;

	/* The queue: Q[0..NQ) of capacity CAPQ; QI is the trial shown next, REQUESTED the first not
	 * yet handed to the preloader. */
	struct queued *q;
	size_t nq, capq, qi, requested;
	size_t rested_at;        /* trial count at the last rest break */
	bool repeat_run;         /* every planned trial was stored: the block is shown again */
};

static double median_of(double *v, size_t n)
{
	if (!n)
		return NAN;
	gsl_sort(v, 1, n);
	return gsl_stats_median_from_sorted_data(v, 1, n);
}

static void fill_snapshot(struct blockrun *br, struct run_snapshot *sn)
{
	struct run_session *s = br->s;
	memset(sn, 0, sizeof *sn);
	sn->state = br->state;
	sn->paused_by_observer = br->paused_by_observer;
	sn->block = (int)br->block;
	sn->block_name = run_pblock(s, br->block)->name;
	sn->practice = run_pblock(s, br->block)->practice;
	sn->trial_n = br->sum.trials;
	sn->trial_total = br->total;
	for (size_t k = 0; k < s->plan.ntrials; k++)
		sn->session_done += s->stored[k];
	sn->session_total = s->plan.ntrials;
	sn->elapsed_s = (double)(dclock_monotonic_ns() - br->t0) / 1e9;
	double per = estimate_per_trial(s->plan.blocks[br->block].trial_seconds, sn->elapsed_s,
					br->sum.trials);
	sn->remaining_s = per * (double)(br->total - br->sum.trials);
	sn->answered = br->sum.answered;
	sn->correct = br->sum.correct;
	sn->accuracy = br->sum.answered ? (double)br->sum.correct / (double)br->sum.answered : NAN;
	double tmp[4096];
	size_t n = br->nrts < 4096 ? br->nrts : 4096;
	memcpy(tmp, br->rts + (br->nrts - n), n * sizeof *tmp);
	sn->median_rt_ms = median_of(tmp, n);
	sn->refresh_hz = s->refresh_hz;
	sn->refresh_nominal_hz = s->rig.refresh_hz;
	sn->dropped_frames = br->sum.dropped_frames;
	sn->flagged_trials = br->sum.faults;
	memcpy(sn->last, br->last, sizeof sn->last);
	sn->nlast = br->nlast;
	sn->timing_mode = s->ss.timing_mode;
	sn->session_id = s->ss.id;
}

static enum run_cmd call_progress(struct blockrun *br, enum run_state st)
{
	if (!br->progress)
		return RUN_CMD_CONTINUE;
	br->state = st;
	struct run_snapshot sn;
	fill_snapshot(br, &sn);
	br->last_cmd = br->progress(&sn, br->ctx);
	return br->last_cmd;
}

static int tick_break(void *ctx)
{
	struct blockrun *br = ctx;
	return call_progress(br, RUN_STATE_BREAK) == RUN_CMD_END;
}

/* The observer's pause is left by the experimenter only: RUN_CMD_GO_ON, RUN_CMD_SKIP or
 * RUN_CMD_END from the watcher, or the console's pause taken and released (PAUSE, then CONTINUE). */
static int tick_observer_pause(void *ctx)
{
	struct blockrun *br = ctx;
	enum run_cmd c = call_progress(br, RUN_STATE_PAUSED);
	if (c == RUN_CMD_PAUSE)
		br->pause_taken = true;
	if (c == RUN_CMD_CONTINUE && br->pause_taken)
		br->last_cmd = RUN_CMD_GO_ON;
	return br->last_cmd == RUN_CMD_GO_ON || c == RUN_CMD_SKIP || c == RUN_CMD_END;
}

static int tick_console_pause(void *ctx)
{
	struct blockrun *br = ctx;
	return call_progress(br, RUN_STATE_PAUSED) != RUN_CMD_PAUSE;
}

enum flow { FLOW_ON, FLOW_SKIP, FLOW_END, FLOW_STOP };

static enum flow event(struct run_session *s, const char *kind, const char *detail, char **err)
{
	if (store_event(s->store, s->ss.id, kind, detail, err)) {
		s->failed = true;
		return FLOW_END;
	}
	return FLOW_ON;
}

/* The response device or the trigger port failed during a trial (trialloop_fault): an event in
 * the session, and the block stops with the reason; every stored trial is kept. */
static enum flow run_fault(struct run_session *s, char **err)
{
	const char *why = trialloop_fault(s->tl);
	char *ignored = NULL;
	store_event(s->store, s->ss.id, "fault", why, &ignored);
	free(ignored);
	*err = xasprintf("%s; the block stopped, every stored trial is kept", why);
	s->failed = true;
	return FLOW_END;
}

/* Writes a block's trigger CODE (0: none). A failing port stops the block with the reason. */
static enum flow block_code(struct run_session *s, int code, char **err)
{
	if (!s->trig || code <= 0)
		return FLOW_ON;
	char e[400];
	if (!trigger_send(s->trig, code, NULL, e, sizeof e))
		return FLOW_ON;
	char *ignored = NULL;
	store_event(s->store, s->ss.id, "fault", e, &ignored);
	free(ignored);
	*err = xasprintf("%s; the block stopped, every stored trial is kept", e);
	s->failed = true;
	return FLOW_END;
}

/* The observer's chords: keys the experimenter presses on the observer's keyboard, never shown on
 * the observer's screen (Ctrl+Alt held with G go on, S skip the block, E end the session). */
static const char *const chord_keys[] = {"ctrl+alt+g", "ctrl+alt+s", "ctrl+alt+e"};

/* The observer pressed Escape: the pause screen, until the experimenter decides (the watcher, or a
 * chord on the observer's keyboard). */
static enum flow observer_pause(struct blockrun *br, char **err)
{
	struct run_session *s = br->s;
	if (event(s, "pause", "observer", err) != FLOW_ON)
		return FLOW_END;
	struct run_text t = {0};
	run_screen_pause(&t);
	run_screen_shot(s, "pause", &t);
	br->paused_by_observer = true;
	br->pause_taken = false;
	br->last_cmd = RUN_CMD_CONTINUE;
	int k = trialloop_screen(s->tl, (const char *const *)t.v, t.n, chord_keys, 3, false,
				 tick_observer_pause, br, 0);
	run_text_free(&t);
	br->paused_by_observer = false;
	if (k == -1)
		k = br->last_cmd == RUN_CMD_GO_ON ? 0 : br->last_cmd == RUN_CMD_SKIP ? 1 : 2;
	switch (k) {
	case 0: return event(s, "resume", "experimenter", err);
	case 1: return event(s, "skip", run_pblock(s, br->block)->name, err) == FLOW_ON ? FLOW_SKIP : FLOW_END;
	case 2: event(s, "end", "experimenter", err); return FLOW_END;
	default: return FLOW_STOP;
	}
}

/* The console asked for a pause. */
static enum flow console_pause(struct blockrun *br, char **err)
{
	struct run_session *s = br->s;
	if (event(s, "pause", "experimenter", err) != FLOW_ON)
		return FLOW_END;
	static const char *const lines[] = {"Paused", "", "Please wait for the experimenter"};
	int k = trialloop_screen(s->tl, lines, 3, NULL, 0, false, tick_console_pause, br, 0);
	if (k == -1 && br->last_cmd != RUN_CMD_END)
		return event(s, "resume", "experimenter", err);
	if (k == -1) {
		event(s, "end", "experimenter", err);
		return FLOW_END;
	}
	return FLOW_STOP;
}

/* A start, rest or ready screen (LINES). The keyboard observer goes on with space; the model goes
 * on at once. The screen is saved as NAME with --screenshots. */
static enum flow break_screen(struct blockrun *br, const char *name, struct run_text *t, char **err)
{
	struct run_session *s = br->s;
	if (!s->paced) {
		run_text_free(t);
		return call_progress(br, RUN_STATE_BREAK) == RUN_CMD_END
			       ? (event(s, "end", "experimenter", err), FLOW_END) : FLOW_ON;
	}
	run_screen_shot(s, name, t);
	static const char *const keys[] = {"space"};
	int k = trialloop_screen(s->tl, (const char *const *)t->v, t->n, keys, 1, true, tick_break,
				 br, 0);
	run_text_free(t);
	if (k == 0)
		return FLOW_ON;
	if (k == -3)
		return observer_pause(br, err);
	if (k == -1) {
		event(s, "end", "experimenter", err);
		return FLOW_END;
	}
	return FLOW_STOP;
}

/* The screen after a pause. */
static enum flow ready_screen(struct blockrun *br, char **err)
{
	struct run_text t = {0};
	run_text_add(&t, "Ready?");
	run_text_add(&t, "");
	run_text_add(&t, "Press SPACE to go on");
	return break_screen(br, "ready", &t, err);
}

static void remember(struct blockrun *br, const struct trial_record *r)
{
	struct run_session *s = br->s;
	memmove(&br->last[1], &br->last[0], (RUN_LAST_TRIALS - 1) * sizeof br->last[0]);
	struct run_trial_brief *b = &br->last[0];
	memset(b, 0, sizeof *b);
	b->trial = r->trial;
	b->block_trial = r->block_trial;
	snprintf(b->category, sizeof b->category, "%s", s->proto.choices[r->choice].category);
	if (r->response >= 0)
		snprintf(b->response, sizeof b->response, "%s", s->proto.choices[r->response].category);
	b->correct = r->correct;
	b->timed_out = r->timed_out;
	b->rt_ms = r->has_rt ? r->rt_ms : NAN;
	b->frames_actual = r->frames_actual;
	b->frames_planned = r->frames_planned;
	b->timing_ok = r->timing_ok;
	if (br->nlast < RUN_LAST_TRIALS)
		br->nlast++;
}

/* The trial sink: stores REC and logs its ignored keys. Returns 0 or -1 with *ERR. */
static int run_sink(struct run_session *s, const struct trial_record *rec, char **err)
{
	if (store_trial_put(s->store, s->ss.id, rec, &s->proto, &s->list, err))
		return -1;
	size_t n;
	const struct trialloop_key *k = trialloop_ignored(s->tl, &n);
	for (size_t i = 0; i < n; i++) {
		char *d = isnan(k[i].t_ms) ? xasprintf("trial %d key %s", rec->trial, k[i].key)
					   : xasprintf("trial %d key %s at %+.1f ms", rec->trial,
						       k[i].key, k[i].t_ms);
		int rc = store_event(s->store, s->ss.id, k[i].anticipation ? "anticipation" : "key_ignored",
				     d, err);
		free(d);
		if (rc)
			return -1;
	}
	return 0;
}

/* Builds the block's queue: its planned trials not yet stored (all of them when every one is
 * stored and no repeat is owed: the block is run again), then the repeats a resume owes. */
static void queue_build(struct blockrun *br)
{
	struct run_session *s = br->s;
	const struct plan_block *pb = &s->plan.blocks[br->block];
	size_t owed = run_pending_in(s, br->block);
	br->capq = pb->ntrials * 2 + 16;
	br->nq = 0;
	br->q = xmalloc(br->capq * sizeof *br->q);
	br->repeat_run = owed == 0;
	for (size_t k = 0; k < pb->ntrials; k++)
		if (!s->stored[pb->first + k])
			br->repeat_run = false;
	for (size_t k = 0; k < pb->ntrials; k++)
		if (br->repeat_run || !s->stored[pb->first + k])
			br->q[br->nq++] = (struct queued){pb->first + k, -1, 0};
	/* A resumed block first finishes its planned trials, then shows the repeats it owes. */
	if (br->nq + owed > br->capq) {
		br->capq = br->nq + owed + 16;
		br->q = xrealloc(br->q, br->capq * sizeof *br->q);
	}
	for (size_t i = 0; i < s->npend && !br->repeat_run; i++)
		if (s->pend[i].block == br->block)
			br->q[br->nq++] = (struct queued){s->pend[i].plan_index, s->pend[i].repeat_of, 0};
	br->total = br->nq;
	br->rts = xmalloc(br->capq * sizeof *br->rts);   /* at most one RT per queued trial */
}

/* Appends a repeat of the plan trial PLAN_INDEX, shown as session trial REPEAT_OF. */
static void queue_repeat(struct blockrun *br, size_t plan_index, int repeat_of)
{
	if (br->nq == br->capq) {
		br->capq *= 2;
		br->q = xrealloc(br->q, br->capq * sizeof *br->q);
		br->rts = xrealloc(br->rts, br->capq * sizeof *br->rts);
	}
	br->q[br->nq++] = (struct queued){plan_index, repeat_of, 0};
	br->total++;
	br->sum.repeats++;
}

/* Keeps the look-ahead queue full (adaptive trials are decoded when picked). */
static void queue_preload(struct blockrun *br)
{
	struct run_session *s = br->s;
	for (; br->requested < br->nq && br->requested < br->qi + RUN_LOOKAHEAD; br->requested++) {
		struct queued *e = &br->q[br->requested];
		const struct plan_trial *pt = &s->plan.trials[e->plan_index];
		if (pt->stim < 0)
			continue;
		e->id = ++s->serial;
		if (preload_request(s->pre, e->id, s->list.items[pt->stim].path) < 0) {
			e->id = 0;
			break;
		}
	}
}

/* The block-start event, the refresh measurement and the start screen. */
static enum flow block_begin(struct blockrun *br, char **err)
{
	struct run_session *s = br->s;
	const struct protocol_block *prb = run_pblock(s, br->block);
	char *detail = xasprintf("%s%s", prb->name, br->repeat_run ? " (again)" : "");
	enum flow fl = event(s, "block_start", detail, err);
	free(detail);
	if (fl == FLOW_ON)
		fl = block_code(s, s->proto.triggers.block_start, err);
	if (fl == FLOW_ON && run_measure_refresh(s, &br->sum.refresh, err)) {
		fl = run_stop_requested() ? FLOW_STOP : FLOW_END;
		if (fl == FLOW_END)
			s->failed = true;
	}
	if (fl == FLOW_ON) {
		struct run_text t = {0};
		run_screen_instructions(s, br->block, !s->instructed, &t);
		s->instructed = true;
		fl = break_screen(br, "instructions", &t, err);
	}
	return fl;
}

/* Fills REC for queue entry CUR (the adaptive rule picks the stimulus of an adaptive trial) and
 * makes sure its texture is requested. Returns 0, 1 when the trial's staircase has finished (the
 * trial is not shown), or -1 with *ERR. */
static int trial_prepare(struct blockrun *br, struct queued *cur, struct trial_record *rec,
			 char **err)
{
	struct run_session *s = br->s;
	size_t bi = br->block;
	const struct plan_trial *pt = &s->plan.trials[cur->plan_index];
	memset(rec, 0, sizeof *rec);
	rec->block = (int)bi;
	rec->block_trial = cur->repeat_of >= 0 || br->repeat_run ? s->next_bt[bi] : pt->block_trial;
	rec->trial = s->next_trial;
	rec->stim = pt->stim;
	rec->choice = pt->choice;
	rec->staircase = pt->staircase;
	rec->level_requested = NAN;
	rec->repeat_of = cur->repeat_of;
	if (pt->staircase >= 0) {
		int pick = run_adaptive_pick(s, pt, rec, err);
		if (pick)
			return pick;
		cur->id = ++s->serial;
		preload_request(s->pre, cur->id, s->list.items[rec->stim].path);
	} else if (!cur->id) {
		cur->id = ++s->serial;
		preload_request(s->pre, cur->id, s->list.items[rec->stim].path);
	}
	const struct stim *st = &s->list.items[rec->stim];
	rec->has_level = st->has_level;
	rec->level = st->level;
	return 0;
}

/* Shows the trial of queue entry CUR, filling REC with what happened. Returns the trial loop's
 * status, or -1 with *ERR when its image cannot be had. */
static int trial_show(struct blockrun *br, const struct queued *cur, struct trial_record *rec,
		      char **err)
{
	struct run_session *s = br->s;
	const struct stim *st = &s->list.items[rec->stim];
	char e[600];
	struct SDL_Texture *tex = preload_take(s->pre, cur->id, e, sizeof e);
	if (!tex) {
		*err = xasprintf("%s:%d: image %s cannot be read now (%s); the block stopped, every "
				 "trial before it is kept", s->list.path, st->line, st->image, e);
		return -1;
	}
	struct trialloop_trial tt = {tex, rec->choice, rec->has_level, rec->level,
				     run_pblock(s, br->block)->feedback &&
					     s->proto.feedback != FEEDBACK_NONE};
	return (int)trialloop_run(s->tl, &tt, rec);
}

/* Bookkeeping after the stored trial REC of queue entry CI: session counters, stored flags, owed
 * repeats, the staircase, the block's figures and the queue of timing-fault repeats. */
static void trial_account(struct blockrun *br, size_t ci, const struct trial_record *rec)
{
	struct run_session *s = br->s;
	size_t bi = br->block;
	const struct protocol_block *prb = run_pblock(s, bi);
	struct queued cur = br->q[ci];
	s->next_trial++;
	if (rec->block_trial >= s->next_bt[bi])
		s->next_bt[bi] = rec->block_trial + 1;
	if (cur.repeat_of < 0 && !br->repeat_run)
		s->stored[cur.plan_index] = true;
	if (cur.repeat_of >= 0)
		run_pending_done(s, cur.repeat_of);
	if (rec->staircase >= 0)
		run_adaptive_update(s, rec);
	br->sum.trials++;
	br->sum.dropped_frames += (size_t)rec->dropped_frames;
	if (rec->response >= 0) {
		br->sum.answered++;
		br->sum.correct += rec->correct == 1;
		br->rts[br->nrts++] = rec->rt_ms;
	}
	br->sum.timeouts += rec->timed_out;
	if (!rec->timing_ok) {
		br->sum.faults++;
		if (prb->repeat_faults && cur.repeat_of < 0 && !prb->adaptive)
			queue_repeat(br, cur.plan_index, rec->trial);
	}
	remember(br, rec);
	preload_release(s->pre, cur.id);
	br->qi++;
}

/* The rest of the inter-trial interval: the progress callback, the next textures, and a pause or
 * the end when asked for. */
static enum flow trial_after(struct blockrun *br, char **err)
{
	struct run_session *s = br->s;
	enum run_cmd cmd = call_progress(br, RUN_STATE_ITI);
	preload_ready(s->pre);
	if (cmd == RUN_CMD_END) {
		event(s, "end", "experimenter", err);
		return FLOW_END;
	}
	if (cmd == RUN_CMD_PAUSE) {
		enum flow fl = console_pause(br, err);
		if (fl == FLOW_ON && s->paced)
			fl = ready_screen(br, err);
		return fl;
	}
	enum trialloop_status is = trialloop_iti_finish(s->tl);
	if (is == TRIALLOOP_FAULT)
		return run_fault(s, err);
	if (is == TRIALLOOP_STOP)
		return FLOW_STOP;
	if (is == TRIALLOOP_PAUSE) {
		enum flow fl = observer_pause(br, err);
		return fl == FLOW_ON && s->paced ? ready_screen(br, err) : fl;
	}
	return FLOW_ON;
}

/* One step of the block: a rest break when due, then the next queued trial shown, stored and
 * accounted for (or skipped when its staircase has finished, or abandoned at a pause and shown
 * again). Returns FLOW_ON to go on. */
static enum flow block_step(struct blockrun *br, char **err)
{
	struct run_session *s = br->s;
	if (run_stop_requested())
		return FLOW_STOP;
	queue_preload(br);
	if (s->proto.break_every > 0 && br->sum.trials > 0 && br->sum.trials != br->rested_at &&
	    br->sum.trials % (size_t)s->proto.break_every == 0) {
		br->rested_at = br->sum.trials;
		struct run_text t = {0};
		run_screen_break(s, br->block, br->sum.trials, br->total, br->sum.correct,
				 br->sum.answered, &t);
		enum flow fl = break_screen(br, "break", &t, err);
		if (fl != FLOW_ON)
			return fl;
	}
	size_t ci = br->qi;
	struct trial_record rec;
	int rc = trial_prepare(br, &br->q[ci], &rec, err);
	if (rc == 1) {
		/* The staircase has finished: the planned trial is not shown. */
		if (br->q[ci].repeat_of < 0 && !br->repeat_run)
			s->stored[br->q[ci].plan_index] = true;
		br->q[ci].id = UINT64_MAX;   /* no texture; no second rest break */
		br->total--;
		br->qi++;
		return FLOW_ON;
	}
	if (rc == 0)
		rc = trial_show(br, &br->q[ci], &rec, err);
	if (rc < 0) {
		s->failed = true;
		return FLOW_END;
	}
	if (rc == TRIALLOOP_PAUSE) {
		/* Abandoned: shown again after the pause. */
		enum flow fl = observer_pause(br, err);
		return fl == FLOW_ON ? ready_screen(br, err) : fl;
	}
	if (rc == TRIALLOOP_STOP)
		return FLOW_STOP;
	if (rc == TRIALLOOP_FAULT)
		return run_fault(s, err);
	/* Inter-trial interval from here: store first, then everything else. */
	if (run_sink(s, &rec, err)) {
		char *why = *err;
		*err = xasprintf("%s; the block stopped, every trial before this one is kept", why);
		free(why);
		s->failed = true;
		return FLOW_END;
	}
	trial_account(br, ci, &rec);
	return trial_after(br, err);
}

/* Ends the block run: what FL means as a result, the session's flags and the block-end event. */
static enum run_block_result block_finish(struct blockrun *br, enum flow fl, char **err)
{
	struct run_session *s = br->s;
	enum run_block_result result = RUN_BLOCK_DONE;
	if (run_stop_requested() && fl == FLOW_ON)
		fl = FLOW_STOP;
	switch (fl) {
	case FLOW_ON: result = RUN_BLOCK_DONE; break;
	case FLOW_SKIP: result = RUN_BLOCK_SKIPPED; break;
	case FLOW_END: result = s->failed ? RUN_BLOCK_FAILED : RUN_BLOCK_ENDED; break;
	case FLOW_STOP: result = RUN_BLOCK_INTERRUPTED; break;
	}
	if (!s->failed && block_code(s, s->proto.triggers.block_end, err) != FLOW_ON)
		result = RUN_BLOCK_FAILED;
	if (result == RUN_BLOCK_ENDED)
		s->ended = true;
	if (result == RUN_BLOCK_SKIPPED)
		s->skipped[br->block] = true;
	if (result == RUN_BLOCK_INTERRUPTED)
		s->interrupted = true;
	if (!s->failed) {
		char *ignored = NULL;
		char *d2 = xasprintf("%s: %zu trials, %zu correct of %zu answered, %zu timing faults",
				     run_pblock(s, br->block)->name, br->sum.trials, br->sum.correct,
				     br->sum.answered, br->sum.faults);
		if (store_event(s->store, s->ss.id, "block_end", d2, &ignored)) {
			if (!*err) {
				*err = ignored;
				ignored = NULL;
			}
			s->failed = true;
			result = RUN_BLOCK_FAILED;
		}
		free(ignored);
		free(d2);
	}
	return result;
}

enum run_block_result run_block(struct run_session *s, size_t bi, run_progress_fn progress,
				void *ctx, struct run_block_summary *sumout, char **err)
{
	*err = NULL;
	if (bi >= s->plan.nblocks) {
		*err = xasprintf("no block %zu", bi + 1);
		return RUN_BLOCK_FAILED;
	}
	if (s->failed) {
		*err = xasprintf("the session has stopped after an error");
		return RUN_BLOCK_FAILED;
	}
	struct blockrun br = {.s = s, .block = bi, .progress = progress, .ctx = ctx};
	br.sum.block = (int)bi;
	br.sum.name = run_pblock(s, bi)->name;
	br.t0 = dclock_monotonic_ns();
	queue_build(&br);
	s->runs[bi]++;
	enum flow fl = block_begin(&br, err);
	while (fl == FLOW_ON && br.qi < br.nq)
		fl = block_step(&br, err);
	/* Release whatever the look-ahead still holds. */
	for (size_t k = br.qi; k < br.nq; k++)
		if (br.q[k].id)
			preload_release(s->pre, br.q[k].id);
	enum run_block_result result = block_finish(&br, fl, err);
	br.sum.accuracy = br.sum.answered ? (double)br.sum.correct / (double)br.sum.answered : NAN;
	br.sum.median_rt_ms = median_of(br.rts, br.nrts);
	br.sum.result = result;
	if (sumout)
		*sumout = br.sum;
	free(br.rts);
	free(br.q);
	return result;
}
