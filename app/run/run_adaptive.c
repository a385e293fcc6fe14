/* run_adaptive — the adaptive bookkeeping of a session: the adaptive rule's state per plan block,
 * built on the block's first pick (from the stored trials on a resume), the pick before each
 * adaptive trial and the update after it is stored. Called from app/run/run_block.c (pick,
 * update) and app/run/run.c (resume, close); the rules themselves are app/core/adapt.c.
 *
 * Keep every random draw of a block's run-time state inside adapt_block_next: replay calls the
 * same functions in the same order, which is what makes a resumed staircase continue exactly. */
#include "run_private.h"

#include <math.h>
#include <stdlib.h>

#include "adapt.h"
#include "trialloop.h"

/* The adaptive state of plan block BI, built on first use: the staircases of its [adaptive]
 * section over the rows it selects, then (first run of the block) the session's stored trials of
 * the block replayed through them in plan order, so a resumed session continues every staircase
 * where it was. A block run again (every planned trial stored) starts fresh staircases. Returns
 * NULL with *ERR. */
static struct adapt_block *adaptive_state(struct run_session *s, size_t bi, bool again, char **err)
{
	if (!s->adapt) {
		s->adapt = xcalloc(s->plan.nblocks + 1, sizeof *s->adapt);
		s->adapt_run = xcalloc(s->plan.nblocks + 1, sizeof *s->adapt_run);
	}
	if (s->adapt[bi] && s->adapt_run[bi] == s->runs[bi])
		return s->adapt[bi];
	adapt_block_destroy(s->adapt[bi]);
	s->adapt[bi] = NULL;
	const struct plan_block *pb = &s->plan.blocks[bi];
	const struct protocol_block *prb = run_pblock(s, bi);
	const struct adapt_spec *as = adapt_spec_find(s->proto.adaptive, s->proto.nadaptive,
						      prb->adaptive);
	if (!as) {
		*err = xasprintf("block '%s' names no adaptive section", prb->name);
		return NULL;
	}
	size_t ni;
	struct adapt_item *items = plan_adaptive_items(&s->proto, &s->list, pb->proto_block, &ni);
	char why[256];
	struct adapt_block *ab = adapt_block_create(as, s->proto.nchoices, items, ni, s->plan.seed,
						    (int)bi, why, sizeof why);
	free(items);
	if (!ab) {
		*err = xasprintf("block '%s': %s", prb->name, why);
		return NULL;
	}
	if (!again) {
		struct store_trial *rows = NULL;
		size_t n = 0;
		if (store_trials_load(s->store, s->ss.id, &rows, &n, err)) {
			adapt_block_destroy(ab);
			return NULL;
		}
		struct adapt_outcome *done = xmalloc((n ? n : 1) * sizeof *done);
		int *st = xmalloc((pb->ntrials ? pb->ntrials : 1) * sizeof *st);
		int *ch = xmalloc((pb->ntrials ? pb->ntrials : 1) * sizeof *ch);
		size_t nd = 0, at;
		/* First-run trials of this block in plan order (block_trial is the plan index). */
		for (size_t k = 0; k < pb->ntrials; k++) {
			st[k] = s->plan.trials[pb->first + k].staircase;
			ch[k] = s->plan.trials[pb->first + k].choice;
			for (size_t i = 0; i < n; i++)
				if (rows[i].block == (int)bi && rows[i].repeat_of < 0 &&
				    rows[i].block_trial == (int)k)
					done[nd++] = (struct adapt_outcome){rows[i].staircase,
									    rows[i].stim,
									    rows[i].level,
									    rows[i].correct};
		}
		int rc = adapt_block_replay(ab, st, ch, pb->ntrials, done, nd, &at, why, sizeof why);
		store_trials_free(rows, n);
		free(done);
		free(st);
		free(ch);
		if (rc) {
			*err = xasprintf("block '%s': the stored trials do not fit its staircases (%s)",
					 prb->name, why);
			adapt_block_destroy(ab);
			return NULL;
		}
	}
	s->adapt[bi] = ab;
	s->adapt_run[bi] = s->runs[bi];
	s->adapt_pending = false;
	return ab;
}

/* Resume: in adaptive blocks begun before, planned trials of staircases that have already
 * finished will be skipped when their turn comes; mark them done now so a block whose staircases
 * all finished is not entered again. Returns 0 or -1 with *ERR. */
int run_adaptive_mark_finished(struct run_session *s, char **err)
{
	for (size_t bi = 0; bi < s->plan.nblocks; bi++) {
		const struct plan_block *pb = &s->plan.blocks[bi];
		bool begun = false;
		for (size_t k = 0; k < pb->ntrials && !begun; k++)
			begun = s->stored[pb->first + k] &&
				s->plan.trials[pb->first + k].staircase >= 0;
		if (!begun)
			continue;
		struct adapt_block *ab = adaptive_state(s, bi, false, err);
		if (!ab)
			return -1;
		for (size_t k = 0; k < pb->ntrials; k++) {
			int st = s->plan.trials[pb->first + k].staircase;
			if (st >= 0 && (size_t)st < adapt_block_nstairs(ab) &&
			    adapt_stair_done(adapt_block_stair(ab, (size_t)st)))
				s->stored[pb->first + k] = true;
		}
	}
	return 0;
}

/* ADAPTIVE HOOK 1 — before a trial whose plan_trial.staircase >= 0: the adaptive rule picks the
 * stimulus (REC->stim) and records the level it asked for (REC->level_requested); the caller
 * fills the level shown from the stimulus. Returns 0, 1 when the trial's staircase has finished
 * (the trial is skipped, nothing is shown or stored), or -1 with *ERR. */
int run_adaptive_pick(struct run_session *s, const struct plan_trial *pt,
		      struct trial_record *rec, char **err)
{
	size_t bi = (size_t)rec->block;
	bool again = rec->block_trial >= (int)s->plan.blocks[bi].ntrials;
	struct adapt_block *ab = adaptive_state(s, bi, again, err);
	if (!ab)
		return -1;
	size_t index = (size_t)(pt - s->plan.trials);
	if (s->adapt_pending && s->adapt_pending_index == index) {
		rec->stim = s->adapt_pending_stim;
		rec->level_requested = s->adapt_pending_req;
		return 0;
	}
	int stim;
	double req;
	int rc = adapt_block_next(ab, pt->staircase, pt->choice, &stim, &req);
	if (rc < 0) {
		*err = xasprintf("block '%s': category %s has no level for staircase %d",
				 run_pblock(s, bi)->name, s->proto.choices[pt->choice].category,
				 pt->staircase);
		return -1;
	}
	if (rc == 1)
		return 1;
	rec->stim = stim;
	rec->level_requested = req;
	s->adapt_pending = true;
	s->adapt_pending_index = index;
	s->adapt_pending_stim = stim;
	s->adapt_pending_req = req;
	return 0;
}

/* ADAPTIVE HOOK 2 — after a trial of an adaptive staircase has been stored: its staircase takes
 * the outcome (the level shown; no response counts as incorrect; a trial with a timing fault
 * counts as shown, since adaptive blocks do not repeat trials). */
void run_adaptive_update(struct run_session *s, const struct trial_record *rec)
{
	s->adapt_pending = false;
	if (s->adapt && s->adapt[rec->block])
		adapt_block_update(s->adapt[rec->block], rec->staircase, rec->stim, rec->level,
				   rec->correct);
}

void run_adaptive_free(struct run_session *s)
{
	for (size_t b = 0; s->adapt && b < s->plan.nblocks; b++)
		adapt_block_destroy(s->adapt[b]);
	free(s->adapt);
	free(s->adapt_run);
	s->adapt = NULL;
	s->adapt_run = NULL;
}
