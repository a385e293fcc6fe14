/* console — the experimenter's console: an ncurses program of stacked screens that sets up a
 * session, runs and watches its blocks, lists and resumes sessions, shows results and exports.
 *
 * Only app/console includes ncurses. `console_main` is the one entry point for the command layer;
 * the rest of this header is the small screen framework the screen files share (one file per
 * screen in app/console/, each pushing a `struct console_screen` on the stack).
 *
 * Layout of every screen: row 0 is the title bar, the last row the key line (the keys the screen
 * takes), the row above it a message line; the screen draws between. Below 80x24 nothing but a
 * plain "too small" notice is drawn until the terminal grows again.
 *
 * The presentation (SDL window, trial loop, store writes) runs in a child process started by
 * presenter.c, so a crash there cannot leave the experimenter's terminal raw and a slow console
 * can never hold up a frame: the child sends progress over a pipe it never blocks on. */
#ifndef TACHIST_CONSOLE_H
#define TACHIST_CONSOLE_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#define CONSOLE_MIN_COLS 80
#define CONSOLE_MIN_LINES 24

struct console_options {
	const char *db_path;      /* database file; "tachist.db" when NULL */
	const char *rig_path;     /* rig profile in use, resolved by the caller; may be NULL */
	bool rig_is_fallback;     /* the rig is the demo rig because no profile was found */
	const char *protocols_dir;/* folder listed by the protocol chooser; may be NULL */
	const char *self_exe;     /* this program, for the presenter child (argv[0] or /proc) */
	double clock_hz;          /* headless sessions: the virtual clock's rate (0 = the rig's) */
};

/* Runs the console until the experimenter quits or a signal ends it. Always leaves the terminal
 * as it found it. Returns an exit code: 0 after a normal quit, 1 after a signal or a failure to
 * start (no terminal, terminal type unknown). */
int console_main(const struct console_options *o);

/* ---- framework used by the screen files (app/console/ only) ---- */

/* Text roles; each maps to a colour pair, or to plain attributes under NO_COLOR. */
enum console_role {
	CONSOLE_PLAIN, CONSOLE_TITLE, CONSOLE_HEAD, CONSOLE_DIM, CONSOLE_OK, CONSOLE_WARN,
	CONSOLE_BAD, CONSOLE_PICK, CONSOLE_FIELD, CONSOLE_KEY, CONSOLE_ROLE_COUNT
};

struct console;

/* One key a screen takes, for the key line and the help overlay. */
struct console_key {
	const char *key;    /* as shown: "Enter", "q", "Up/Down" */
	const char *what;   /* a few words */
};

/* A screen on the stack. DRAW paints rows 1..LINES-3; KEY returns true when it used the key
 * (false lets the framework try its own keys: ? for help, Ctrl-L to repaint). TICK, when set, runs
 * about ten times a second and returns true when the screen needs a repaint. DESTROY frees ST.
 * A screen that is editing a text field sets EDITING so that '?' and 'q' reach the field. */
struct console_screen {
	const char *title;
	const struct console_key *keys;
	size_t nkeys;
	void (*draw)(struct console *c, void *st);
	bool (*key)(struct console *c, void *st, int ch);
	bool (*tick)(struct console *c, void *st);
	void (*destroy)(void *st);
	void *st;
	bool editing;
};

/* Pushes S (copied) on top of the stack; the framework owns S->st from now on. */
void console_push(struct console *c, const struct console_screen *s);
/* Pops and destroys the top screen; popping the last one quits. */
void console_pop(struct console *c);
/* The top screen (the one calling, from inside its callbacks). */
struct console_screen *console_top(struct console *c);
/* Asks the loop to end after this key. */
void console_quit(struct console *c);
/* Sets the message line (printf-style); ROLE colours it. Cleared on the next key. */
void console_say(struct console *c, enum console_role role, const char *fmt, ...)
	__attribute__((format(printf, 3, 4)));
/* Turns a role's attributes on or off in the standard screen. */
void console_style(struct console *c, enum console_role role, bool on);
/* Prints TEXT at (Y, X) clipped to W columns in ROLE. Returns the columns used. */
int console_put(struct console *c, int y, int x, int w, enum console_role role, const char *text);
/* printf-style console_put. */
int console_putf(struct console *c, int y, int x, int w, enum console_role role, const char *fmt,
		 ...) __attribute__((format(printf, 6, 7)));
/* Wraps TEXT into lines of at most W columns starting at (Y, X), at most MAXROWS rows; returns
 * the rows used. */
int console_wrap(struct console *c, int y, int x, int w, int maxrows, enum console_role role,
		 const char *text);
/* console_wrap with rows after the first INDENT columns further in, the first SKIP rows passed
 * over (a page scrolled into the middle of TEXT); returns the rows drawn. */
int console_wrap_from(struct console *c, int y, int x, int w, int indent, int skip, int maxrows,
		      enum console_role role, const char *text);
/* The rows console_wrap_from needs for all of TEXT at width W and INDENT. */
int console_wrap_count(int w, int indent, const char *text);
/* A horizontal bar of W cells, FRAC filled (0..1), in block characters when the terminal speaks
 * UTF-8 and '#' otherwise. */
void console_bar(struct console *c, int y, int x, int w, double frac);
/* A shade for a proportion 0..1: one of five glyphs from blank to full (or ASCII " .:*#"). */
const char *console_shade(const struct console *c, double frac);
/* True when the terminal takes UTF-8 (the locale's codeset). */
bool console_utf8(const struct console *c);
/* Puts the terminal cursor at (Y, X) after painting (a field being edited calls it). */
void console_cursor(struct console *c, int y, int x);
/* Rows available to the screen body: from row 2 to LINES-3 inclusive. */
int console_body_top(void);
int console_body_rows(void);

/* A yes/no question shown over the top screen; the answer goes to ANSWER(C, UD, yes). */
void console_confirm(struct console *c, const char *question,
		     void (*answer)(struct console *c, void *ud, bool yes), void *ud);

/* ---- text fields with validation messages shown in place ---- */

#define CONSOLE_FIELD_MAX 512

/* What a field accepts. */
enum console_field_kind {
	CONSOLE_TEXT,      /* any printable text */
	CONSOLE_ID,        /* letters and digits (pseudonymous subject IDs) */
	CONSOLE_NUMBER,    /* a decimal number (digits, one '.', leading '-' when allowed) */
	CONSOLE_INTEGER,   /* whole number >= 0 */
	CONSOLE_FILE,      /* path to an existing readable file */
	CONSOLE_OUTPATH    /* path to write: its folder must exist */
};

struct console_field {
	const char *label;
	enum console_field_kind kind;
	size_t maxlen;               /* characters allowed; at most CONSOLE_FIELD_MAX - 1 */
	double min, max;             /* NUMBER/INTEGER range (ignored when min >= max) */
	char text[CONSOLE_FIELD_MAX];
	size_t len, cur;             /* bytes, cursor position in bytes */
	char msg[200];               /* validation message shown beside the field; "" when fine */
	bool editing;
	bool refused;                /* MSG says why a typed character was refused: it stays up
				      * while typing goes on, so a fast typist still sees it */
	char saved[CONSOLE_FIELD_MAX];   /* text before editing began, restored by Esc */
};

enum console_field_result { CONSOLE_FIELD_GOING, CONSOLE_FIELD_DONE, CONSOLE_FIELD_CANCELLED };

void console_field_init(struct console_field *f, const char *label, enum console_field_kind kind,
			size_t maxlen, const char *initial);
void console_field_set(struct console_field *f, const char *text);
void console_field_begin(struct console_field *f);
/* Feeds one key to a field being edited. Refused characters leave the text as it was and set
 * f->msg; Enter validates the whole text and returns DONE only when it passes (else GOING with
 * f->msg set); Esc restores the text from before editing and returns CANCELLED. */
enum console_field_result console_field_key(struct console_field *f, int ch);
/* Moves *ROW of a form of N rows for Up (and Shift-Tab), Down and Tab, wrapping around; true when
 * CH was one of those keys. */
bool console_form_move(int *row, int n, int ch);
/* Validates TEXT for F's kind and range; returns 0, or -1 with a sentence in MSG. */
int console_field_check(const struct console_field *f, const char *text, char *msg, size_t len);
/* Draws the field's value at (Y, X) in W columns (with the cursor when editing) and its message,
 * if any, on row Y + 1 from column X. */
void console_field_draw(struct console *c, const struct console_field *f, int y, int x, int w,
			bool focused);

/* ---- the presentation child (presenter.c) ---- */

#define CONSOLE_MAX_BLOCKS 64
#define CONSOLE_PRES_LINES 12
#define CONSOLE_LAST_TRIALS 8

struct run_options;

/* A block as the run layer describes it (run_block_info), copied into plain arrays. */
struct console_block {
	char name[64];
	size_t ntrials, stored;
	bool practice, adaptive;
	double trial_seconds;      /* planned seconds per trial (estimate.h) */
	double est_seconds;        /* planned seconds of the block */
	int runs;
};

/* One recent trial (a copy of run_trial_brief). */
struct console_brief {
	int trial, block_trial;
	char category[32], response[32];
	int correct;
	bool timed_out;
	double rt_ms;
	int frames_actual, frames_planned;
	bool timing_ok;
};

/* The live state of a running block (a copy of run_snapshot). */
struct console_snap {
	int state;                 /* enum run_state */
	bool paused_by_observer;   /* PAUSED by the observer's Escape: the experimenter decides */
	int block;
	char block_name[64];
	bool practice;
	size_t trial_n, trial_total, session_done, session_total;
	double elapsed_s, remaining_s;
	size_t answered, correct;
	double accuracy, median_rt_ms, refresh_hz, refresh_nominal_hz;
	size_t dropped_frames, flagged_trials;
	struct console_brief last[CONSOLE_LAST_TRIALS];
	size_t nlast;
	char timing_mode[16];
	long snaps_dropped;        /* snapshots the child dropped because the pipe was full */
};

/* A finished block (a copy of run_block_summary). */
struct console_summary {
	int block;
	char name[64];
	size_t trials, answered, correct, timeouts, faults, repeats, dropped_frames;
	double accuracy, median_rt_ms, refresh_hz, refresh_nominal_hz;
	bool refresh_mismatch;
	int result;                /* enum run_block_result */
	char error[400];
};

enum console_pres_phase {
	CONSOLE_PRES_OPENING,      /* the child is loading files and opening the display */
	CONSOLE_PRES_IDLE,         /* open, between blocks */
	CONSOLE_PRES_RUNNING,      /* a block runs */
	CONSOLE_PRES_CLOSING,      /* asked to close */
	CONSOLE_PRES_CLOSED,       /* closed cleanly */
	CONSOLE_PRES_FAILED,       /* ended without a clean close (could not open, storage error) */
	CONSOLE_PRES_CRASHED       /* killed by a signal */
};

struct console_pres_state {
	enum console_pres_phase phase;
	char session_id[37];
	char timing_mode[16];
	uint64_t seed;
	size_t nblocks;
	struct console_block blocks[CONSOLE_MAX_BLOCKS];
	int running_block;
	bool has_snap;
	struct console_snap snap;
	long nsnaps;
	bool has_summary;
	struct console_summary summary;        /* the last block that ended */
	long nsummaries;
	double measured_s;                     /* trials run in this session so far: their time */
	size_t measured_trials;                /* and their number (estimate_per_trial) */
	bool block_has_result[CONSOLE_MAX_BLOCKS];
	struct console_summary block_result[CONSOLE_MAX_BLOCKS];
	char error[1024];                      /* last error the child reported */
	bool rig_mismatch;                     /* refused: the display does not match the rig */
	char diags[CONSOLE_PRES_LINES][200];   /* FILE:LINE problems from run_open */
	int ndiags;
	char log[CONSOLE_PRES_LINES][200];     /* last lines the child printed */
	int nlog;
	bool closed_msg;
	int exit_code, term_signal;
};

struct console_pres;

/* Starts the child that opens the session described by OPT (copied into the child by fork;
 * OPT's strings need live only for this call). Returns NULL with ERR when it cannot start. */
struct console_pres *console_pres_start(const struct run_options *opt, char *err, size_t errlen);
/* Reads whatever the child sent and notices its end. Returns true when anything changed. */
bool console_pres_poll(struct console_pres *p);
const struct console_pres_state *console_pres_state(const struct console_pres *p);
/* Commands; each returns 0, or -1 when the child is not in a state to take it. */
int console_pres_run_block(struct console_pres *p, int block);
int console_pres_skip_block(struct console_pres *p, int block);
int console_pres_pause(struct console_pres *p, bool pause);
/* A new presentation with P's options, accepting a display that does not match the rig
 * (run_options.accept_rig_mismatch, stored as an event). NULL with ERR on failure. */
struct console_pres *console_pres_reopen_accepting(const struct console_pres *p, char *err,
						   size_t errlen);
/* The experimenter's answer to the observer's pause: go on, or SKIP the rest of the block. */
int console_pres_answer(struct console_pres *p, bool skip);
int console_pres_end(struct console_pres *p);
int console_pres_close(struct console_pres *p);
/* Tells the child a signal stopped the console: it ends the trial under way unstored and closes
 * the session as `interrupted` (not ended early), as a signal to `tachist run` does. */
int console_pres_interrupt(struct console_pres *p);
bool console_pres_alive(const struct console_pres *p);
/* Ends the child cleanly (close; after WAIT_MS a SIGTERM, then a SIGKILL) and frees P. NULL is a
 * no-op. */
void console_pres_destroy(struct console_pres *p, int wait_ms);

/* The session being set up or run, shared by the set-up, blocks and live screens. */
enum console_display { CONSOLE_FULLSCREEN, CONSOLE_WINDOW, CONSOLE_HEADLESS_PACED,
		       CONSOLE_HEADLESS_FAST, CONSOLE_DISPLAY_COUNT };

/* The running session's child, or NULL; the console owns it and ends it on the way out. */
struct console_pres *console_presenter(struct console *c);
/* Hands P to the console (replacing and destroying any earlier one). */
void console_set_presenter(struct console *c, struct console_pres *p);

/* ---- screens (each in its own file) ---- */
void console_welcome_push(struct console *c);
/* The set-up form; RESUME_ID (may be NULL) continues that stored session. */
void console_setup_push(struct console *c, const char *resume_id);
void console_blocks_push(struct console *c);
void console_live_push(struct console *c);
void console_sessions_push(struct console *c);
void console_results_push(struct console *c, const char *session_id);
void console_export_push(struct console *c, const char *session_id);
struct store_trial;
/* The forecast from N stored TRIALS of an M-choice session taken as a pilot (app/console/forecastview.c). */
void console_forecast_push(struct console *c, const struct store_trial *trials, size_t n, int m);
/* The rig editor for the profile at PATH (may be NULL: start empty); SIZE_DEG is the protocol's
 * stimulus size for the worked-out pixels (0: unknown). SAVED gets the written file's path. */
void console_rig_push(struct console *c, const char *path, double size_deg,
		      void (*saved)(struct console *c, void *ud, const char *path), void *ud);
/* The luminance calibration of the rig profile at RIG_PATH (refused, with a message, for the demo
 * rig); HEADLESS picks the no-display choice first. SAVED gets the path once the result is
 * written into the profile. */
void console_calibrate_push(struct console *c, const char *rig_path, bool headless,
			    void (*saved)(struct console *c, void *ud, const char *path), void *ud);
/* A scrollable list of LINES (the screen takes ownership of the array and its strings). */
void console_text_push(struct console *c, const char *title, char **lines, size_t n);

/* ---- shared state the screens read and write ---- */
const struct console_options *console_options(const struct console *c);

/* Sending finished sessions to the rig's [pool] server in a child `tachist pool --follow`
 * (sender.c). Start returns NULL when the rig at RIG_PATH sets no server. Poll reads what the
 * child said without blocking (true when the state changed); STATUS words the state for the
 * screen (*BAD when there is a problem); STOP ends the child and frees S. */
struct console_send;
struct console_send *console_send_start(const char *self_exe, const char *db_path,
					const char *rig_path);
bool console_send_poll(struct console_send *s);
void console_send_status(const struct console_send *s, char *buf, size_t len, bool *bad);
void console_send_stop(struct console_send *s);
/* The console's sender, NULL when none. */
const struct console_send *console_sender(const struct console *c);

/* What the set-up form of a new session held when it was left, kept for the console's life so
 * that going back and coming again never loses what was typed (a saved rig included). After a
 * session opens from it, the subject and seed are cleared (the next session is another one). */
struct console_draft {
	bool set;
	char protocol[CONSOLE_FIELD_MAX], subject[CONSOLE_FIELD_MAX], rig[CONSOLE_FIELD_MAX];
	char seed[CONSOLE_FIELD_MAX], model[CONSOLE_FIELD_MAX];
	int display;
	bool model_on;
};
struct console_draft *console_draft(struct console *c);

#endif
