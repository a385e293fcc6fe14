/* run — a session from start to end: loads protocol, rig and list, builds the plan, opens the store,
 * runs blocks through the presenter with the chosen responder, stores every trial, and reports
 * progress to whoever watches (the `run` command's line printer or the console).
 *
 * Stepwise control, for the console:
 *
 *     struct run_session *s = run_open(&opt, &diags, &err);   new session, or opt.resume_id
 *     run_measure_refresh(s, &m, &err);                         optional; run_block does it too
 *     for (i = 0; i < run_block_count(s); i++) {
 *             run_block_info(s, i, &bi);                        name, trials, practice, done, ...
 *             run_block(s, i, progress, ctx, &sum, &err);       or run_block_skip(s, i, &err)
 *     }
 *     run_close(s, &err);                                       marks complete / aborted / ...
 *
 * run_all() does the loop above for the `run` command. A block may be run again (a repeat): its
 * planned trials are shown again and stored with fresh session trial numbers.
 *
 * The progress callback runs on the presenter's thread, only OUTSIDE stimulus epochs: once in every
 * inter-trial interval (after the trial has been stored), and about every 50 ms while the session
 * is paused or waiting on a break screen. It must return quickly (draw and poll input without
 * blocking; a few ms is fine, the ITI absorbs it): the presenter never waits for the console. What
 * it returns is obeyed at once: RUN_CMD_PAUSE shows the pause screen to the observer and keeps
 * calling back (snapshot.state = RUN_STATE_PAUSED) until it returns RUN_CMD_CONTINUE or RUN_CMD_END.
 * On a break screen (RUN_STATE_BREAK, a keyboard observer's "press space" screen) only RUN_CMD_END
 * has an effect: the observer goes on with Space. The observer's own pause (Escape;
 * paused_by_observer) is left only by the experimenter: RUN_CMD_GO_ON, RUN_CMD_SKIP (the rest of
 * the block) or RUN_CMD_END, or PAUSE followed by CONTINUE (the console's pause key pressed twice),
 * or a chord on the observer's keyboard (Ctrl+Alt+G, S or E), which no screen shows.
 *
 * Signals: run_open installs SIGINT/SIGTERM/SIGHUP handlers (unless opt.no_signal_handlers) that
 * only set a flag; the current trial is then finished or discarded, the session marked
 * `interrupted` and run_block returns RUN_BLOCK_INTERRUPTED. A caller with its own handlers calls run_request_stop()
 * from them (async-signal-safe).
 *
 * Adaptive blocks: trials with plan_trial.staircase >= 0 get their stimulus from the adaptive
 * module right before the trial and report the outcome right after it; see the two marked hooks in
 * app/run/run_adaptive.c (run_adaptive_pick / run_adaptive_update). */
#ifndef TACHIST_RUN_H
#define TACHIST_RUN_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "diag.h"

struct protocol;
struct plan;

struct run_options {
	const char *protocol_path;
	const char *subject;
	const char *db_path;         /* default "tachist.db" */
	const char *rig_path;        /* resolved by the caller (cmd_rig_path) */
	const char *observer;        /* "keyboard" (default) or "model:KEY=VALUE,..." */
	bool headless;               /* virtual display clock, offscreen/dummy SDL driver */
	bool pace;                   /* headless: keep real time */
	double inject_drops;         /* headless: rate of dropped frames to inject (seeded) */
	double inject_jitter_ms;     /* headless: SD of flip-time jitter to inject (seeded) */
	bool window;                 /* windowed instead of full screen */
	bool has_seed;
	uint64_t seed;               /* plan seed; a new one from /dev/urandom when !has_seed */
	const char *resume_id;       /* continue this session (refused when protocol/list changed) */
	bool no_signal_handlers;     /* the caller owns SIGINT/SIGTERM/SIGHUP and calls run_request_stop */
	bool no_observer_screens;    /* keyboard: leave out the "press space" screens before blocks and
				      * at rest breaks (the model observer never gets them) */
	const char *screenshot_dir;  /* debug: save PNGs of the first trial's frames here */
	bool accept_rig_mismatch;    /* run although the display does not match the rig (an event) */
	double clock_hz;             /* headless: the virtual clock's rate (0 = the rig's) */
	size_t counterbalance;       /* the subject's position in the design; 0 = from the database */
};

/* What the callback tells the session to do next. GO_ON and SKIP are the experimenter's answers to
 * the observer's pause (go on, skip the rest of the block); elsewhere they mean CONTINUE. */
enum run_cmd { RUN_CMD_CONTINUE, RUN_CMD_PAUSE, RUN_CMD_END, RUN_CMD_GO_ON, RUN_CMD_SKIP };

enum run_state {
	RUN_STATE_ITI,        /* between trials (just stored one) */
	RUN_STATE_PAUSED,     /* paused by the console or the observer's Escape */
	RUN_STATE_BREAK,      /* rest break inside a block or before a block */
	RUN_STATE_MEASURING   /* refresh measurement before the block */
};

/* One recent trial, as the console lists it. */
struct run_trial_brief {
	int trial;               /* session trial number, 0-based */
	int block_trial;
	char category[32];       /* true category */
	char response[32];       /* chosen category, "" when none */
	int correct;             /* 1, 0, -1 no response */
	bool timed_out;
	double rt_ms;            /* NaN when none */
	int frames_actual, frames_planned;
	bool timing_ok;
};

#define RUN_LAST_TRIALS 8

/* The live state handed to the progress callback (values for the current block unless named
 * session_*). Valid only during the call. */
struct run_snapshot {
	enum run_state state;
	bool paused_by_observer;      /* PAUSED: the observer pressed Escape and waits for the
				       * experimenter (GO_ON, SKIP or END; see above) */
	int block;                    /* plan block index */
	const char *block_name;
	bool practice;
	size_t trial_n, trial_total;  /* trials done in this block run, and its planned total (grows
				       * when timing-fault repeats are appended) */
	size_t session_done, session_total;  /* planned trials stored in the session / planned */
	double elapsed_s;             /* since the block started (pauses included) */
	double remaining_s;           /* estimate for the rest of the block */
	size_t answered, correct;     /* this block */
	double accuracy;              /* correct / answered, NaN before the first answer */
	double median_rt_ms;          /* correct and wrong answers, NaN when none */
	double refresh_hz;            /* measured before the block; 0 if not measured */
	double refresh_nominal_hz;
	size_t dropped_frames;        /* this block */
	size_t flagged_trials;        /* this block: timing_ok false */
	struct run_trial_brief last[RUN_LAST_TRIALS];   /* most recent first */
	size_t nlast;
	const char *timing_mode;      /* "vsync" or "simulated" */
	const char *session_id;
};

typedef enum run_cmd (*run_progress_fn)(const struct run_snapshot *snap, void *ctx);

struct run_block_info {
	const char *name;
	int proto_block;          /* index into protocol.blocks */
	size_t ntrials;           /* planned */
	size_t stored;            /* planned trials of this block already stored (resume) */
	bool practice;
	bool adaptive;
	double trial_seconds;     /* planned seconds per trial (estimate.h) */
	double est_seconds;       /* planned seconds of the block (estimate.h) */
	int runs;                 /* how often it was run (or skipped) in this process */
};

struct run_refresh {
	double median_ms, mad_ms, min_ms, max_ms;
	double rate_hz, nominal_hz;
	double off_percent;       /* (rate - nominal) / nominal · 100 */
	bool mismatch;            /* |off_percent| > 1 */
	size_t nflips, dropped;
};

enum run_block_result {
	RUN_BLOCK_DONE,           /* every trial shown and stored */
	RUN_BLOCK_SKIPPED,        /* the observer chose "skip block" in the pause screen */
	RUN_BLOCK_ENDED,          /* the callback or the observer ended the session (data kept) */
	RUN_BLOCK_INTERRUPTED,    /* SIGINT/SIGTERM/SIGHUP */
	RUN_BLOCK_FAILED          /* storage or display error: *err says why; session aborted */
};

struct run_block_summary {
	int block;
	const char *name;
	size_t trials, answered, correct, timeouts, faults, repeats, dropped_frames;
	double accuracy;          /* NaN when nothing answered */
	double median_rt_ms;      /* NaN when none */
	struct run_refresh refresh;
	enum run_block_result result;
};

struct run_session;

/* Loads protocol, rig, list and images through the loader `check` uses (inputs.h), builds the
 * plan, opens the store and the display, and begins a new session or reopens opt->resume_id.
 * Anything check would call an error refuses the session before it begins. Problems with the
 * user's files go to D (FILE:LINE); other failures come back as NULL with a malloc'd sentence in
 * *ERR. A resume is refused (NULL) when the
 * protocol or the stimulus list changed since the session began. */
struct run_session *run_open(const struct run_options *opt, struct diag_list *d, char **err);

/* The session's UUID, timing mode ("vsync"/"simulated") and seed. */
const char *run_session_id(const struct run_session *s);
const char *run_timing_mode(const struct run_session *s);
uint64_t run_seed(const struct run_session *s);
/* The loaded inputs (borrowed), for the console's set-up screens. */
const struct protocol *run_protocol(const struct run_session *s);
const struct plan *run_plan(const struct run_session *s);

/* Measures the refresh from at least 120 flips (median, spread) and records it in the session.
 * Returns 0 or -1 with *ERR. */
int run_measure_refresh(struct run_session *s, struct run_refresh *out, char **err);

size_t run_block_count(const struct run_session *s);
int run_block_info(const struct run_session *s, size_t i, struct run_block_info *out);
/* Index of the first block, not skipped, with planned trials not yet stored, or run_block_count()
 * when none. */
size_t run_next_block(const struct run_session *s);

/* Runs block I: measures the refresh, shows the block's start screen, then its trials not yet
 * stored (on a resume) or all of them (a repeat of a finished block), then the timing-fault repeats
 * when the protocol asks. Every trial is stored before the next one's first flip. PROGRESS may be
 * NULL. SUM (may be NULL) gets the block's figures. */
enum run_block_result run_block(struct run_session *s, size_t i, run_progress_fn progress,
				void *ctx, struct run_block_summary *sum, char **err);
/* Records that block I was skipped by the experimenter (an event; no trials). */
int run_block_skip(struct run_session *s, size_t i, char **err);

/* Runs every block not yet complete, in order, with break screens between them. ON_BLOCK (may be
 * NULL) is called after each block with its summary (the `run` command prints one line). Returns
 * the result of the last block run (RUN_BLOCK_DONE when all completed). */
enum run_block_result run_all(struct run_session *s, run_progress_fn progress, void *ctx,
			      void (*on_block)(const struct run_block_summary *, void *),
			      char **err);

/* Marks the session complete (every planned trial stored, blocks skipped in this process
 * excepted), interrupted (a stop request) or aborted (ended early or failed), as fits what happened, closes display and store and frees S. Returns 0, or -1 with *ERR when the final store
 * write failed. S may be NULL. */
int run_close(struct run_session *s, char **err);

/* Asks a running session to stop as if SIGINT had arrived. Async-signal-safe. */
void run_request_stop(void);
/* True once a stop was requested (signal or run_request_stop). */
bool run_stop_requested(void);

#endif
