/* store — the SQLite database that holds every session and trial (app/io/store.c is the only file
 * that includes sqlite3.h).
 *
 * WAL, synchronous=FULL, foreign keys on, a busy timeout, schema version in user_version with
 * forward migrations. One transaction per trial. Errors come back as -1 with a malloc'd sentence
 * in *ERR (the caller frees it; ERR may be NULL); nothing here prints.
 *
 * This header is the contract the run layer, the console, report, export and merge use. The store
 * module owns it and may extend it; the write side below is what the trial loop needs.
 *
 * Tables (README "Database and exported tables" documents every column):
 *   sessions (id UUID text, subject, protocol and rig text, hashes, seed, status, ...)
 *   trials   (one row per trial, keyed by (session_id, trial); text columns copied from the
 *             protocol and list so the database stands alone)
 *   frames   (one row per trial: every flip time as a little-endian int64 ns blob)
 *   events   (session_id, seq, mono_ns, kind, detail) */
#ifndef TACHIST_STORE_H
#define TACHIST_STORE_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "trial.h"

struct store;
struct protocol;
struct stimlist;
struct rig;

/* Schema version this build writes (PRAGMA user_version). Older files are migrated on open;
 * newer ones are refused. */
#define STORE_SCHEMA_VERSION 3

enum store_status { STORE_RUNNING, STORE_COMPLETE, STORE_ABORTED, STORE_INTERRUPTED };

/* A session as stored. Strings are owned by the struct (store_session_clear). */
struct store_session {
	char id[37];               /* UUID v4, lower-case */
	char *subject;             /* pseudonymous ID: letters and digits only */
	char *protocol_name;
	char *protocol_path;
	char *protocol_text;
	char protocol_sha256[65];
	char *stimuli_path;
	char stimuli_sha256[65];
	char *rig_text;
	uint64_t seed;
	char *version;             /* software version; NULL = this build's TACHIST_VERSION */
	char *timing_mode;         /* "vsync" or "simulated" */
	double refresh_hz;         /* measured before the first block; 0 = not measured */
	char *observer;            /* "keyboard" or the model observer's spec */
	char *started_utc, *ended_utc;   /* ISO 8601, ended NULL while running */
	enum store_status status;
	size_t ntrials;            /* trials stored (filled when read back) */
	/* Presentation settings (0 = unknown), for the BIDS sidecar and reports. */
	double screen_width_cm, screen_height_cm;
	int screen_width_px, screen_height_px;
	double distance_cm;
	double nominal_hz;         /* the rig's nominal refresh */
	double stim_deg;           /* stimulus size asked for, degrees */
};

/* Opens or creates PATH and brings its schema up to date. Returns 0 and *OUT, or -1 and *ERR
 * (a file that is not a database, a schema newer than this build, a read-only file that needs a
 * migration). A read-only file opens for reading; writes then fail with a clear message. */
int store_open(const char *path, struct store **out, char **err);
/* As store_open for a file that must exist already (readers: report, export, sessions): a
 * missing PATH is refused with "no database at PATH" and nothing is created. */
int store_open_existing(const char *path, struct store **out, char **err);
void store_close(struct store *s);
/* Path as given to store_open. */
const char *store_path(const struct store *s);

/* Letters and digits only, 1..64 characters (BIDS labels). */
bool store_subject_valid(const char *subject);
/* Fills a fresh UUID v4 (RFC 4122 section 4.4) from /dev/urandom. Returns 0 or -1. */
int store_uuid4(char out[37]);

/* Copies into SS what the protocol, list and rig say (names, paths, texts, the SHA-256 of the
 * protocol text, the list's hash, screen geometry). Any argument may be NULL. Strings are
 * duplicated; SS owns them. Seed, subject, timing mode and observer stay the caller's to set. */
void store_session_describe(struct store_session *ss, const struct protocol *p,
			    const struct stimlist *l, const struct rig *r);

/* Creates a session row with status running; fills S->id (a new UUID) and S->started_utc.
 * The row records this process as its owner (pid and host name). Refuses an invalid subject. */
int store_session_begin(struct store *s, struct store_session *ss, char **err);
/* Stores one finished trial of SESSION in one transaction (trial row and its frames). The text
 * columns (image, category, level, source, labels, response category, block name, practice) are
 * taken from L and P so the database stands alone without the list; T->block indexes P->blocks.
 * P and L may be NULL (the text columns are then left empty). On error nothing of this trial is
 * stored and every earlier trial stays. */
int store_trial_put(struct store *s, const char *session_id, const struct trial_record *t,
		    const struct protocol *p, const struct stimlist *l, char **err);
/* Appends an event (pause, resume, abort, note, block_start, block_end, skip...) to SESSION. */
int store_event(struct store *s, const char *session_id, const char *kind, const char *detail,
		char **err);
/* Records the measured refresh for SESSION. */
int store_session_refresh(struct store *s, const char *session_id, double hz, char **err);
/* Sets STATUS and the end time. */
int store_session_end(struct store *s, const char *session_id, enum store_status status,
		      char **err);
/* Marks sessions left running by a crash as interrupted; *N gets how many. A running session
 * is marked when its owner is on this host and gone (kill(pid, 0) fails with ESRCH) or when it
 * records no owner (written before schema version 3). Sessions owned on other hosts are never
 * touched: their processes cannot be checked from here. */
int store_recover(struct store *s, int *n, char **err);
/* Sets SESSION running again (ended time cleared) and owned by PID on HOST (NULL = this
 * host). For a resume, and for tests that need a session owned by some other process. */
int store_session_own(struct store *s, const char *session_id, long pid, const char *host,
		      char **err);
/* Reads one session by ID (a unique prefix of 8 or more characters is accepted). */
int store_session_get(struct store *s, const char *id, struct store_session *out, char **err);
void store_session_clear(struct store_session *ss);
const char *store_status_name(enum store_status st);
/* Parses "running", "complete", "aborted", "interrupted"; returns 0 or -1. */
int store_status_parse(const char *name, enum store_status *out);

/* ---- reading ---- */

/* Every session (SUBJECT NULL) or those of SUBJECT, ordered by start time, with ntrials filled.
 * *OUT is an array of *N sessions; free with store_sessions_free. */
int store_sessions_list(struct store *s, const char *subject, struct store_session **out,
			size_t *n, char **err);
void store_sessions_free(struct store_session *v, size_t n);

/* Trials stored for SESSION (exact id) and the index the next trial gets (one past the largest
 * stored; 0 when none). For resume. */
int store_trial_count(struct store *s, const char *session_id, size_t *count, int *next,
		      char **err);

/* One trial as stored, with every exported column. Missing values: has_* false, NULL strings,
 * -1 indices. In an array from store_trials_load the row owns its strings; from the iterator the
 * strings are borrowed and valid until the next store_iter_next. */
struct store_trial {
	char session_id[37];
	const char *subject;
	int block;
	const char *block_name;
	int block_trial;
	int trial;
	bool practice;
	int stim;                   /* index into the session's stimulus list, -1 when unknown */
	const char *image;
	const char *category;
	int choice;                 /* index of the true category among the choices */
	bool has_level;
	double level;
	const char *source;
	size_t nlabels;             /* label name/value pairs, in the list's column order */
	const char *const *label_names;
	const char *const *label_values;
	const char *response_key;   /* NULL when no key */
	int response;               /* chosen category index, -1 when none */
	const char *response_category;
	int correct;                /* 1, 0, or -1 when no response */
	bool has_rt;
	double rt_ms;
	bool timed_out;
	bool anticipation;
	int64_t key_sdl_ms;
	int frames_planned, frames_actual, dropped_frames;
	bool timing_ok;
	int64_t onset_ns, offset_ns, start_ns;
	int staircase;              /* -1 when not adaptive */
	bool has_level_requested;
	double level_requested;
	int repeat_of;              /* -1, or the trial this one repeats */
};

/* Every trial of SESSION (exact id) in trial order, as an array the caller frees with
 * store_trials_free. */
int store_trials_load(struct store *s, const char *session_id, struct store_trial **out,
		      size_t *n, char **err);
void store_trials_free(struct store_trial *v, size_t n);

/* Flip times (ns) of trial TRIAL of SESSION; *FLIPS malloc'd (NULL and *N = 0 when none). */
int store_frames_load(struct store *s, const char *session_id, int trial, int64_t **flips,
		      size_t *n, char **err);

struct store_event_row {
	int seq;                    /* 0-based order within the session */
	int64_t mono_ns;            /* CLOCK_MONOTONIC when stored */
	char *kind;
	char *detail;
};
/* Events of SESSION in order; free with store_events_free. */
int store_events_load(struct store *s, const char *session_id, struct store_event_row **out,
		      size_t *n, char **err);
void store_events_free(struct store_event_row *v, size_t n);

/* Streaming read of trials for export: sessions by start time, trials in order. SESSION (a
 * unique prefix of 8+ characters) or SUBJECT select; both NULL = all. Memory stays constant
 * whatever the row count. */
struct store_iter;
int store_iter_open(struct store *s, const char *session, const char *subject,
		    struct store_iter **out, char **err);
/* 1 and *ROW (valid until the next call), 0 at the end, -1 and *ERR on error. *SS is the row's
 * session (borrowed, valid until the iterator moves to another session); SS may be NULL. */
int store_iter_next(struct store_iter *it, const struct store_trial **row,
		    const struct store_session **ss, char **err);
void store_iter_close(struct store_iter *it);
/* The sessions the iterator will visit (borrowed until close), and the union of their label
 * names in order of first appearance (for table headers). */
const struct store_session *store_iter_sessions(const struct store_iter *it, size_t *n);
const char *const *store_iter_label_names(const struct store_iter *it, size_t *n);
/* Category names (the protocol's categories, in order) of a session, as stored with its first
 * trial; borrowed until close. */
const char *const *store_iter_choices(const struct store_iter *it, size_t session_index,
				      size_t *n);

/* ---- merge and limits ---- */

struct store_merge_stats {
	size_t sessions_added, sessions_updated, trials_added, events_added;
	size_t trials_conflicting;  /* same (session, trial) with different content: kept ours */
	int source_version;         /* schema version the source had */
};
/* Adds to S everything in the database at SRC_PATH that S lacks, keyed by session UUID and
 * trial index, in one transaction. Merging the same file twice adds nothing. A source with an
 * older schema is migrated in a temporary copy (the file itself is not written); a newer one is
 * refused. Returns 0 or -1. */
int store_merge_from(struct store *s, const char *src_path, struct store_merge_stats *st,
		     char **err);

/* Caps the database at MAX_PAGES pages (PRAGMA max_page_count) for this connection, to test a
 * full disk or enforce a quota. Returns 0 or -1. */
int store_limit_pages(struct store *s, long max_pages, char **err);
/* Busy timeout in ms (default 5000): how long a write waits for another writer. */
int store_busy_timeout(struct store *s, int ms, char **err);
/* PRAGMA integrity_check; 0 when "ok", -1 with the first complaint in *ERR. */
int store_integrity_check(struct store *s, char **err);

#endif
