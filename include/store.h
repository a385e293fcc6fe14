/* store — the SQLite database that holds every session and trial (app/io/store.c is the only file
 * that includes sqlite3.h).
 *
 * WAL, synchronous=FULL, foreign keys on, a busy timeout, schema version in user_version with
 * forward migrations. One transaction per trial. Errors come back as -1 with a malloc'd sentence
 * in *ERR (the caller frees it); nothing here prints.
 *
 * This header is the contract the run layer, the console, report, export and merge use. The store
 * module owns it and may extend it; the write side below is what the trial loop needs. */
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
	char *version;             /* software version */
	char *timing_mode;         /* "vsync" or "simulated" */
	double refresh_hz;         /* measured before the first block; 0 = not measured */
	char *observer;            /* "keyboard" or the model observer's spec */
	char *started_utc, *ended_utc;   /* ISO 8601, ended NULL while running */
	enum store_status status;
	size_t ntrials;            /* trials stored (filled when read back) */
};

/* Opens or creates PATH and brings its schema up to date. Returns 0 and *OUT, or -1 and *ERR. */
int store_open(const char *path, struct store **out, char **err);
void store_close(struct store *s);

/* Letters and digits only, 1..64 characters (BIDS labels). */
bool store_subject_valid(const char *subject);

/* Creates a session row with status running; fills S->id (a new UUID) and S->started_utc. */
int store_session_begin(struct store *s, struct store_session *ss, char **err);
/* Stores one finished trial of SESSION in one transaction (trial row and its frames). The text
 * columns (image, category, level, source, labels, response category) are taken from L and P so
 * the database stands alone without the list. */
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
/* Marks every session left running (by a crash) as interrupted; *N gets how many. */
int store_recover(struct store *s, int *n, char **err);
/* Reads one session by ID (a unique prefix of 8 or more characters is accepted). */
int store_session_get(struct store *s, const char *id, struct store_session *out, char **err);
void store_session_clear(struct store_session *ss);
const char *store_status_name(enum store_status st);

#endif
