/* run_private — what the files of the run layer share (app/run/run.c: open, resume, refresh, close;
 * app/run/run_block.c: one block run, trial by trial; app/run/run_adaptive.c: the adaptive
 * bookkeeping). Not a public header: only app/run/ includes it.
 *
 * A run_session owns the loaded inputs (protocol, rig, stimulus list, plan), the store and the
 * session row, and the presenter's parts (display, display clock, responder, trial loop, preload
 * queue). It keeps one flag per planned trial (stored or not), which is what a resume fills from
 * the database and what run_block walks. */
#ifndef TACHIST_RUN_PRIVATE_H
#define TACHIST_RUN_PRIVATE_H

#include <signal.h>
#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "epoch.h"
#include "frames.h"
#include "plan.h"
#include "protocol.h"
#include "rig.h"
#include "run.h"
#include "stimlist.h"
#include "store.h"

#define RUN_LOOKAHEAD 8

struct adapt_block;
struct display;
struct dclock;
struct responder;
struct trialloop;
struct preload;
struct SDL_Texture;
struct trial_record;
struct trialloop_config;

/* Lines of text for the observer's screens (run_screens.c): malloc'd UTF-8 lines. */
struct run_text {
	char **v;
	size_t n;
};

struct run_session {
	struct protocol proto;
	struct rig rig;
	struct stimlist list;
	struct plan plan;
	bool have_proto, have_rig, have_list, have_plan;
	struct store *store;
	struct store_session ss;
	char observer_text[160];
	bool keyboard, paced;
	char *response_device, *response_usb;   /* the [input] device opened, NULL = SDL keys */

	struct display *disp;
	struct dclock *clock;
	struct responder *resp;
	struct trialloop *tl;
	struct trigger *trig;      /* the rig's [trigger] port, NULL = none */
	struct preload *pre;
	struct SDL_Texture *mask;
	bool linearize;          /* images pass through LIN (the rig's calibration) when decoded */
	uint8_t lin[3][256];

	bool *stored;            /* per planned trial */
	/* Resume: timing-fault repeats the interrupted run owed (a stored fault in a block that
	 * repeats faults, with no stored repeat); shown at their block's end, dropped once stored. */
	struct pending_repeat {
		size_t block, plan_index;
		int repeat_of;
	} *pend;
	size_t npend;
	int *next_bt;            /* per block: next free block_trial number for repeats */
	int *runs;               /* per block */
	bool *skipped;           /* per block: skipped by the experimenter or the observer */
	int next_trial;          /* session trial number of the next trial shown */
	uint64_t serial;         /* preload ids */
	double refresh_hz;
	struct run_refresh refresh;
	struct frames_measure premeasured;   /* rig_match's, taken by the first refresh measurement */
	bool have_premeasured;
	bool failed, ended, interrupted;
	bool live;               /* the session row is ours to end (run_open succeeded) */
	char *recover_err;       /* why store_recover could not mark orphans, or NULL */
	const char *screenshot_dir;
	bool shots_done;
	char **shot_names;       /* text screens already saved (run_screen_shot) */
	size_t nshot_names;
	struct run_text legend;  /* the response window's key legend; empty when off */
	bool instructed;         /* the session's instructions were shown in this process */
	int shot_epoch_seen[EPOCH_COUNT];
	struct sigaction old_int, old_term, old_hup;
	bool handlers;

	/* Adaptive blocks: the rule's state per plan block, built on the block's first pick (from
	 * the stored trials on a resume); the pick of the current trial is kept until its update so
	 * a trial shown again after a pause asks the rule only once. */
	struct adapt_block **adapt;
	int *adapt_run;          /* per block: s->runs[] when its state was built */
	bool adapt_pending;
	size_t adapt_pending_index;
	int adapt_pending_stim;
	double adapt_pending_req;
};

/* The protocol block of plan block I. */
static inline const struct protocol_block *run_pblock(const struct run_session *s, size_t i)
{
	return &s->proto.blocks[s->plan.blocks[i].proto_block];
}

/* run.c */
/* Repeats still owed in block B (resume). */
size_t run_pending_in(const struct run_session *s, size_t b);
/* Drops the owed repeat of session trial TRIAL (it has been stored). */
void run_pending_done(struct run_session *s, int trial);

/* run_screens.c */
void run_text_add(struct run_text *t, const char *line);
void run_text_free(struct run_text *t);
/* The display's font and text size from [screens], and the response window's legend in TC (a
 * warning in D when it does not fit below the stimulus). Returns 0 or -1 with *ERR. */
int run_screens_setup(struct run_session *s, struct trialloop_config *tc, struct diag_list *d,
		      char **err);
/* The start screen of BLOCK (the session's instructions first when FIRST), with the keys. */
void run_screen_instructions(struct run_session *s, size_t block, bool first, struct run_text *t);
/* A rest break: progress in the block, the accuracy when the block is practice or the protocol
 * asks (break_accuracy). */
void run_screen_break(struct run_session *s, size_t block, size_t done, size_t total,
		      size_t correct, size_t answered, struct run_text *t);
void run_screen_pause(struct run_text *t);
void run_screen_end(struct run_text *t);
/* With --screenshots: saves T as DIR/screen-NAME.png, once per NAME. */
void run_screen_shot(struct run_session *s, const char *name, const struct run_text *t);

/* run_adaptive.c */
/* Resume: marks planned trials of finished staircases as done. Returns 0 or -1 with *ERR. */
int run_adaptive_mark_finished(struct run_session *s, char **err);
/* Before a trial whose plan_trial.staircase >= 0: picks REC->stim and REC->level_requested.
 * Returns 0, 1 when the staircase has finished (the trial is skipped), or -1 with *ERR. */
int run_adaptive_pick(struct run_session *s, const struct plan_trial *pt, struct trial_record *rec,
		      char **err);
/* After an adaptive trial has been stored: its staircase takes the outcome. */
void run_adaptive_update(struct run_session *s, const struct trial_record *rec);
/* Frees the adaptive state of every block. */
void run_adaptive_free(struct run_session *s);

#endif
