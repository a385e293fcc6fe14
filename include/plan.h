/* plan — the trial plan of a session: which stimulus on which trial, in which block, built
 * reproducibly from (protocol, stimulus list, rig, seed).
 *
 * The same inputs and seed give the same plan on every machine (GSL's mt19937 seeded with the
 * seed; no other source of randomness), which is what lets a session resume. Epoch durations are
 * planned in whole frames at the rig's refresh (frames.h). Trials of adaptive blocks carry the
 * staircase that will choose their level at run time and stim = -1 until then. */
#ifndef TACHIST_PLAN_H
#define TACHIST_PLAN_H

#include <stddef.h>
#include <stdint.h>

#include "diag.h"
#include "epoch.h"

/* The smallest stimulus drawn (its longer side, in pixels): below this a picture is no longer
 * recognisable, and a size_deg typed wrong (0.01 for 1.0) shows nothing. The issue tracker's
 * rule; common practice, no source. */
#define PLAN_MIN_STIM_PX 8

struct protocol;
struct stimlist;
struct rig;

struct plan_trial {
	int block;        /* index into plan.blocks */
	int block_trial;  /* 0-based within the block */
	int trial;        /* 0-based within the session */
	int stim;         /* index into the stimulus list; -1 when an adaptive rule picks it */
	int choice;       /* category of the trial (index among the protocol's categories) */
	int staircase;    /* adaptive: which staircase of the block picks the level; else -1 */
};

struct plan_block {
	int proto_block;  /* index into protocol.blocks */
	size_t first;     /* index of its first trial in plan.trials */
	size_t ntrials;
	double trial_seconds;     /* planned seconds per trial (estimate.h) */
	double est_seconds;       /* planned seconds of the block, refresh measurement included */
};

struct plan {
	uint64_t seed;
	struct plan_trial *trials;
	size_t ntrials;
	struct plan_block *blocks;
	size_t nblocks;
	int epoch_frames[EPOCH_COUNT];
	double epoch_actual_ms[EPOCH_COUNT];
	int stim_px;              /* stimulus longer side in pixels on this rig */
	double stim_deg_actual;   /* what stim_px subtends */
	double est_seconds;       /* planned session length: the sum of the blocks' (estimate.h) */
	char hash[65];            /* SHA-256 of the plan's trial sequence, for resume checks */
};

/* Builds the plan. Problems (a block whose filter selects nothing, a run limit that cannot be
 * met) go to D. Returns 0 or -1. */
int plan_build(const struct protocol *p, const struct stimlist *l, const struct rig *r,
	       uint64_t seed, struct plan *out, struct diag_list *d);
void plan_clear(struct plan *pl);
/* Only the block filters: a column the list lacks, or a filter that selects nothing, goes to D
 * (plan_build reports the same). Needs no rig, so `check` runs it whatever the rig's state.
 * Returns 0 or -1. */
int plan_check_blocks(const struct protocol *p, const struct stimlist *l, struct diag_list *d);

struct adapt_item;
/* The stimuli adaptive block PROTO_BLOCK of P may show: the list rows its filter selects, each
 * with its category and level (NaN when it has none). The plan and the run layer both build the
 * block's adaptive state from this list. Returns a malloc'd array and *N (NULL when none). */
struct adapt_item *plan_adaptive_items(const struct protocol *p, const struct stimlist *l,
				       int proto_block, size_t *n);

#endif
