/* store — the SQLite database that holds every session and trial (the app/io/store*.c files are
 * the only ones that include sqlite3.h; app/io/store_int.h is their private header).
 *
 * WAL, synchronous=FULL, foreign keys on, a busy timeout, schema version in user_version with
 * forward migrations. One transaction per trial. Errors come back as -1 with a malloc'd sentence
 * in *ERR (the caller frees it; ERR may be NULL); nothing here prints.
 *
 * This header is the contract the run layer, the console, report, export and pool use. The store
 * module owns it and may extend it; the write side below is what the trial loop needs.
 *
 * Tables (docs/storage.md documents every column):
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
#define STORE_SCHEMA_VERSION 5

/* Session states (docs/storage-states.md): running while a run owns it; complete once every
 * planned trial is stored; ended-early when the experimenter ended it before that; interrupted
 * when its process died or was stopped by a signal; aborted when storing failed. */
enum store_status {
	STORE_RUNNING, STORE_COMPLETE, STORE_ABORTED, STORE_INTERRUPTED, STORE_ENDED_EARLY
};
#define STORE_NSTATUS 5

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
	int planned_trials;        /* trials in the plan; 0 = unknown (sessions before schema 4) */
	int owner_pid;             /* process running it (store_session_begin and _own fill it) */
	char *owner_host;
	/* The rig's luminance calibration, grey channel (has_lum false: the rig had none). */
	bool has_lum;
	char *lum_measured;        /* YYYY-MM-DD of the measurement, NULL when unknown */
	double lum_gamma, lum_min_cd, lum_max_cd;
	bool has_background_cd;
	double background_cd;      /* the background's light through the calibration, cd/m² */
	bool linearized;           /* images went through the inverse of the display's curve */
	int design_position;       /* counterbalancing: the subject's position, 0 = none */
	char *block_order, *key_mapping;   /* what the design gave (NULL without one) */
	char *response_device;     /* the response keyboard's name; NULL = SDL keys */
	char *response_usb;        /* its USB "vvvv:pppp", NULL when unknown */
	char *trigger_port;        /* serial port of the trigger codes, NULL = none */
};

/* Opens or creates PATH and brings its schema up to date. Returns 0 and *OUT, or -1 and *ERR
 * (a file that is not a tachist database, a schema newer than this build, a read-only file that
 * needs a migration). A file that is not ours is refused before anything is written to it. Two
 * processes creating the same new file at once both succeed. A read-only file opens for
 * reading; writes then fail with a clear message. */
int store_open(const char *path, struct store **out, char **err);
/* Opens a file that must exist already, for reading only (readers: report, export, sessions):
 * a missing PATH is refused with "no database at PATH" and nothing is created. The file is never
 * written, so readers work on a full disk and in read-only folders; an older schema is read
 * through a migrated temporary copy (removed by store_close). */
int store_open_existing(const char *path, struct store **out, char **err);
/* As store_open_existing, reading schema SCHEMA (NULL: tachist) when PATH is a PostgreSQL server;
 * SCHEMA must be NULL for a file. */
int store_open_reader(const char *path, const char *schema, struct store **out, char **err);
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
/* Deletes SESSION (its events with it) only while it has no trials and is not running. Returns
 * 0, or -1 with *ERR saying why (trials stored, running, no such session). A note on a session
 * is an event of kind "note" (store_event). */
int store_session_delete_empty(struct store *s, const char *session_id, char **err);
/* Sets STATUS and the end time. */
int store_session_end(struct store *s, const char *session_id, enum store_status status,
		      char **err);
/* Marks sessions left running by a crash as interrupted; *N gets how many. A running session
 * is marked when its owner is on this host and gone (kill(pid, 0) fails with ESRCH) or when it
 * records no owner (written before schema version 3). Sessions owned on other hosts are never
 * touched: their processes cannot be checked from here. */
int store_recover(struct store *s, int *n, char **err);
/* True when SS is running but its process is gone: owned on this host by a pid that no longer
 * exists, or with no owner recorded. store_recover marks exactly these; readers that must not
 * write show them as interrupted with this. */
bool store_session_orphaned(const struct store_session *ss);
/* Sets SESSION running again (ended time cleared) and owned by PID on HOST (NULL = this
 * host). For a resume, and for tests that need a session owned by some other process. */
int store_session_own(struct store *s, const char *session_id, long pid, const char *host,
		      char **err);
/* Reads one session by ID (a unique prefix of 8 or more characters is accepted). */
int store_session_get(struct store *s, const char *id, struct store_session *out, char **err);
void store_session_clear(struct store_session *ss);
const char *store_status_name(enum store_status st);
/* Parses "running", "complete", "aborted", "interrupted", "ended-early"; returns 0 or -1. */
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
	const char *rt_clock;       /* what stamped the response: "frame" (SDL, after a flip),
				     * "kernel" (the input device) or "model" */
	int64_t trigger_ns;         /* onset trigger written, 0 = none */
#ifdef TACHIST_TEST_COLUMN
	int test_column;            /* a column that exists only in the column-table test build */
#endif
};

/* ---- the column tables ----
 *
 * Every column of the sessions and trials tables is one row of a descriptor table
 * (app/io/store_columns.c). The schema, the migration that adds new columns, the insert, the
 * reads, the pool and every export writer (CSV, TSV, JSON, BIDS and its sidecar) are generated
 * from them. Adding a trial column: one descriptor row, a field in struct store_trial and its
 * value in store_trial_from_record (see DEVELOPERS.md). A session column: one row and a field
 * in struct store_session, set by whoever knows the fact before store_session_begin. */

/* How a value is kept: SQLite type / C field / PostgreSQL type. */
enum store_type {
	STORE_TEXT,    /* TEXT / char * (NULL = missing) / text */
	STORE_INT,     /* INTEGER / int / integer */
	STORE_INT64,   /* INTEGER / int64_t (nanoseconds of CLOCK_MONOTONIC, or a count) / bigint */
	STORE_REAL,    /* REAL / double / double precision */
	STORE_BOOL,    /* INTEGER 0 or 1 / bool / boolean */
	STORE_TIME,    /* TEXT, ISO 8601 UTC / char * / timestamptz */
	STORE_UUID,    /* TEXT / char[37] / uuid */
	STORE_HASH,    /* TEXT, hex SHA-256 / char[65] ("" = missing) / text */
	STORE_SEED,    /* INTEGER, the same 64 bits / uint64_t / bigint */
	STORE_STATUS,  /* TEXT status word / enum store_status / text */
	STORE_JSON,    /* TEXT holding JSON, written and read by the store itself, no field / jsonb */
};

/* The column type of T in SQLite ("INTEGER", "REAL", "TEXT") or, when POSTGRES, in PostgreSQL
 * ("integer", "bigint", "double precision", "boolean", "timestamptz", "uuid", "text", "jsonb"),
 * for the schema of a pooled PostgreSQL database generated from the same tables. */
const char *store_type_sql(enum store_type t, bool postgres);

/* When a field holds no value. */
enum store_missing {
	STORE_ALWAYS,      /* always has one */
	STORE_IF_NEG,      /* an int below 0 */
	STORE_IF_ZERO,     /* 0 (or, for reals, not above 0) */
	STORE_IF_UNFLAGGED /* the bool at has_off is false */
};

enum {
	STORE_COL_ONE_BASED = 1,    /* an index kept from 0, exported from 1 as the screens count */
	STORE_COL_LABELS_AFTER = 2, /* the stimulus list's label columns follow this one */
	STORE_COL_ROW = 4,          /* session column repeated on every exported trial row */
	STORE_COL_META = 8,         /* session column in the JSON export and the BIDS sidecar */
};

#define STORE_NO_FIELD ((size_t)-1)

struct store_column {
	const char *name;           /* SQL column */
	const char *export_name;    /* exported header; NULL = kept in the database only */
	enum store_type type;
	enum store_missing missing;
	unsigned flags;
	const char *constraint;     /* SQL after the type ("NOT NULL DEFAULT 0"), or "" */
	size_t off, has_off;        /* field offsets in the row struct (STORE_NO_FIELD) */
	const char *description;    /* one sentence, for the BIDS sidecar and docs */
	const char *units;          /* NULL when none */
};

struct store_table {
	const char *name;
	const struct store_column *cols;
	size_t ncols;
	const char *constraints;    /* table constraints after the columns, or "" */
	const char *options;        /* after the closing parenthesis ("WITHOUT ROWID"), or "" */
};

/* sessions rows are struct store_session, trials rows struct store_trial. */
extern const struct store_table store_sessions_table, store_trials_table;

/* A column's value in ROW (a struct store_session or store_trial), typed by its column: I for
 * integer kinds and bools, R for reals, S for text kinds (borrowed from ROW). */
struct store_value {
	bool missing;
	int64_t i;
	double r;
	const char *s;
};
void store_column_value(const struct store_column *c, const void *row, struct store_value *v);

/* Fills OUT (zeroed first) with what store_trial_put stores for T: the record's fields and the
 * text columns taken from P and L (borrowed from them; NULLs when they are NULL). Label values
 * are borrowed from L's item; OUT->nlabels is L's label count. */
void store_trial_from_record(struct store_trial *out, const char *session_id,
			     const struct trial_record *t, const struct protocol *p,
			     const struct stimlist *l);

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

/* ---- pooling and limits ---- */

struct store_pool_stats {
	size_t sessions_added, sessions_updated, trials_added, events_added;
	size_t trials_conflicting;  /* same (session, trial) with different content: kept ours */
	int source_version;         /* schema version the source had */
};
/* Adds to S everything in the database at SRC_PATH that S lacks, keyed by session UUID and
 * trial index, in one transaction. Pooling the same file twice adds nothing. The source is
 * never written: an older schema is migrated in a temporary copy; a newer one, a file that is
 * not a tachist database and a damaged one are refused with a message naming SRC_PATH.
 * Returns 0 or -1. */
int store_pool_from(struct store *s, const char *src_path, struct store_pool_stats *st,
		    char **err);

/* Caps the database at MAX_PAGES pages (PRAGMA max_page_count) for this connection, to test a
 * full disk or enforce a quota. Returns 0 or -1. */
int store_limit_pages(struct store *s, long max_pages, char **err);
/* Busy timeout in ms (default 5000): how long a write waits for another writer. */
int store_busy_timeout(struct store *s, int ms, char **err);
/* PRAGMA integrity_check; 0 when "ok", -1 with the first complaint in *ERR. */
int store_integrity_check(struct store *s, char **err);

#endif
