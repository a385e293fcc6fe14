/* trialloop — the frame-locked trial: every epoch counted in flips of the display clock, the
 * stimulus on screen for exactly its planned frames, responses polled after every flip.
 *
 * One call of trialloop_run shows one trial from its first fixation flip through the first flip of
 * the inter-trial interval (ITI) and fills a trial_record; the caller then stores it (the trial
 * sink) and does its ITI work, and trialloop_iti_finish flips out the rest of the ITI so that the
 * next trial's first flip comes when the ITI is over, however long that work took. Nothing in
 * trialloop_run touches files, the database or the console.
 *
 * Decisions the issue left open, made here:
 *  - Responses count from the stimulus onset flip (RT is measured from it); a choice key before the
 *    onset is an anticipation (recorded, the trial goes on). The response epoch is the time the
 *    observer still has after the mask; a response during the stimulus or mask does not shorten
 *    them. Keys that are not choice keys, and choice keys after the first answer, are ignored and
 *    logged (trialloop_ignored).
 *  - The stimulus epochs whose timing the timing-ok flag vouches for are the stimulus and the mask
 *    that follows it (the stimulus-onset asynchrony and the mask's duration matter for masking):
 *    timing_ok is false when the stimulus was not shown for exactly its planned frames or when
 *    any frame interval from the stimulus onset to the end of the mask exceeded 1.5 periods.
 *  - The blank epoch shows the background only; fixation shows the fixation mark; the response
 *    epoch and the ITI show the background; feedback (when on) a tick or a cross at fixation, the
 *    cross also for a missing answer.
 *  - Escape or a stop request abandons the trial at once (status TRIALLOOP_PAUSE/STOP); an abandoned
 *    trial is not stored and is shown again when the block goes on. */
#ifndef TACHIST_TRIALLOOP_H
#define TACHIST_TRIALLOOP_H

#include <signal.h>
#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "epoch.h"
#include "trial.h"

struct display;
struct dclock;
struct responder;
struct SDL_Texture;

struct trialloop_config {
	struct display *disp;
	struct dclock *clock;
	struct responder *resp;
	int epoch_frames[EPOCH_COUNT];   /* EPOCH_RESPONSE 0 = wait without limit */
	int64_t period_ns;               /* refresh period used for frame counts and drops */
	int stim_px;                     /* stimulus longer side */
	int fixation_px;                 /* 0 = no fixation mark */
	int marker_corner, marker_px;    /* photodiode patch (rig_corner; 0 = none) */
	int nchoices;
	struct SDL_Texture *mask;        /* drawn in the mask epoch; NULL = background */
	volatile sig_atomic_t *stop;     /* set asynchronously to abandon the trial; may be NULL */
	/* The key legend, drawn in the response epoch only (never with the stimulus or the mask),
	 * lines centred with the first line's top at LEGEND_Y px. NLEGEND 0 = none. */
	const char *const *legend;
	size_t nlegend;
	int legend_y;
	/* Debug and tests: called after a frame is drawn and before its flip. May be NULL. */
	void (*on_frame)(void *ctx, enum epoch e, int frame, bool stimulus_frame);
	void *frame_ctx;
	/* Benchmarks: called once per frame with the ns the loop itself spent on that frame (polling,
	 * bookkeeping), excluding drawing, the on_frame hook and the flip. May be NULL. */
	void (*on_work)(void *ctx, int64_t ns);
	void *work_ctx;
	/* Trigger codes (trigger.h), NULL = no port: onset_codes[truth] (nchoices entries; 0 = none)
	 * is written right after the onset flip returns, and the time the write returned becomes
	 * the record's trigger_ns; response_code (0 = none) when an answer counts. A failed write
	 * abandons the trial (TRIALLOOP_FAULT). */
	struct trigger *trigger;
	const int *onset_codes;
	int response_code;
};

struct trialloop_trial {
	struct SDL_Texture *tex;
	int truth;                       /* true category index */
	bool has_level;
	double level;
	bool feedback;
};

/* FAULT: the response device or the trigger port failed; the trial is abandoned and
 * trialloop_fault says why. */
enum trialloop_status { TRIALLOOP_DONE, TRIALLOOP_PAUSE, TRIALLOOP_STOP, TRIALLOOP_FAULT };

struct trialloop_key {
	char key[24];
	double t_ms;                     /* relative to the stimulus onset (negative before it) */
	bool anticipation;               /* a choice key before the onset */
};

struct trialloop;

struct trialloop *trialloop_new(const struct trialloop_config *c);
void trialloop_destroy(struct trialloop *tl);
/* Changes the period (after a refresh measurement). */
void trialloop_set_period(struct trialloop *tl, int64_t period_ns);

/* Shows one trial. Fills the presentation and response fields of REC (block, trial numbers and
 * stimulus identity are the caller's); REC->flips points into the loop's buffer, valid until the
 * next call. Returns TRIALLOOP_DONE, or PAUSE (Escape) / STOP (stop flag or window closed) with
 * the trial abandoned. */
enum trialloop_status trialloop_run(struct trialloop *tl, const struct trialloop_trial *t,
				    struct trial_record *rec);
/* Why the last trialloop_run returned TRIALLOOP_FAULT ("" otherwise). */
const char *trialloop_fault(const struct trialloop *tl);
/* Keys ignored or anticipated in the last trial. */
const struct trialloop_key *trialloop_ignored(const struct trialloop *tl, size_t *n);

/* Flips the rest of the ITI begun by the last trialloop_run. Returns TRIALLOOP_DONE, or
 * PAUSE/STOP when Escape, a window close or the stop flag came during it, or FAULT when the
 * response device failed at the end of the (complete, storable) trial. */
enum trialloop_status trialloop_iti_finish(struct trialloop *tl);

/* A text screen (LINES) held until one of KEYS is pressed (returns its index), TICK returns
 * non-zero (returns -1; TICK is called about every 50 ms with CTX; may be NULL), the stop flag or
 * a window close (-2), or Escape when ESCAPE_KEY is true (-3). MAX_MS > 0 ends the wait after that
 * long with -4. */
int trialloop_screen(struct trialloop *tl, const char *const *lines, size_t nlines,
		     const char *const *keys, size_t nkeys, bool escape_key,
		     int (*tick)(void *ctx), void *ctx, double max_ms);

/* Flips N frames of background and stores their times in FLIPS (N entries). For the refresh
 * measurement. Returns 0, or -1 when stopped. */
int trialloop_measure(struct trialloop *tl, int64_t *flips, size_t n);

#endif
