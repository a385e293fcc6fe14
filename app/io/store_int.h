/* store_int — private header of the store's files (store.c, store_schema.c, store_write.c,
 * store_read.c, store_pool.c). Nothing outside app/io/store*.c includes it.
 *
 * struct store is one SQLite connection with its cached statements. The helpers below word
 * SQLite failures for people (db_fail), prepare statements and move values between the column
 * tables (store.h) and SQLite statements. */
#ifndef TACHIST_STORE_INT_H
#define TACHIST_STORE_INT_H

#include <stdbool.h>
#include <stddef.h>

#include <sqlite3.h>

#include "store.h"

/* PRAGMA application_id of every tachist database ("tchs" in ASCII). A file with another id,
 * or with tables and neither this id nor an old tachist schema, is not ours and is never
 * written. */
#define STORE_APPLICATION_ID 0x74636873

enum {
	ST_BEGIN, ST_COMMIT, ST_ROLLBACK, ST_TRIAL, ST_FRAMES, ST_META, ST_EVENT, ST_COMPLETE,
	ST_COUNT
};

struct store {
	sqlite3 *db;
	char *path;           /* as given to store_open */
	char *shown;          /* path named in messages (the source, when reading a temporary copy) */
	char *tmp;            /* temporary migrated copy this connection reads, removed on close */
	int busy_ms;
	bool reader;          /* opened by store_open_existing: never writes */
	sqlite3_stmt *st[ST_COUNT];
	char meta_done[37];   /* session whose choices/label names this connection has written */
	char *reserve;        /* slack file beside the database, freed when the disk fills */
};

enum open_mode { OPEN_WRITE, OPEN_READ, OPEN_IMMUTABLE };

/* ---- store.c ---- */
void store_set_err(char **err, const char *fmt, ...) __attribute__((format(printf, 2, 3)));
/* Words the connection's last SQLite failure for people, naming S->shown; returns -1. */
int store_db_fail(struct store *s, char **err, const char *what);
int store_exec(struct store *s, const char *sql, char **err, const char *what);
sqlite3_stmt *store_prep(struct store *s, const char *sql, char **err, const char *what);
/* A cached statement, prepared on first use and reset before each. */
sqlite3_stmt *store_cached(struct store *s, int which, const char *sql, char **err);
void store_bind_text(sqlite3_stmt *st, int i, const char *v);
const char *store_col_text(sqlite3_stmt *st, int i);
void store_utc_now(char out[32]);
void store_this_host(char out[256]);
void store_reserve_release(struct store *s);
/* Opens PATH without touching its schema. */
int store_open_raw(const char *path, enum open_mode mode, struct store **out, char **err);
/* Opens PATH for reading only (immutable in a read-only folder or on a full disk when its WAL
 * is empty); *VERSION gets its schema version; IMMUTABLE (may be NULL) says how it was opened. */
int store_open_read(const char *path, struct store **out, int *version, bool *immutable,
		    char **err);

/* Removes PATH and its -wal and -shm files. */
void store_unlink_db(const char *path);

/* ---- store_schema.c ---- */
/* What a file is before we write to it. */
struct store_kind {
	int version;          /* PRAGMA user_version */
	int app_id;           /* PRAGMA application_id */
	int ntables;
	bool ours;            /* our application id, or an old tachist schema without one */
	bool empty;           /* no tables at all: a new file */
};
int store_kind_read(struct store *s, struct store_kind *k, char **err);
/* Refuses (-1 and *ERR naming SHOWN) a file that is not ours or is newer than this build. */
int store_kind_check(const struct store_kind *k, const char *shown, char **err);
/* Creates or migrates the schema of a file store_kind_check accepted, inside one write
 * transaction that re-reads the version first (another process may have done it already). */
int store_schema_update(struct store *s, char **err);
/* Copies SRC into a new temporary file (in $TMPDIR) brought to the current schema, without
 * writing to SRC. *TMP gets its path (the caller removes it with store_unlink_db). */
int store_migrated_copy(const char *src, char **tmp, char **err);

/* ---- columns and statements ---- */
/* "a, b, c" of TABLE's columns, each after PREFIX (may be ""); malloc'd. JSON columns are
 * included only when WITH_JSON. */
char *store_col_list(const struct store_table *t, const char *prefix, bool with_json);
/* Binds every column of ROW to parameters FIRST, FIRST + 1, ... in table order; JSON columns
 * get JSON (or NULL). */
void store_bind_row(sqlite3_stmt *st, int first, const struct store_table *t, const void *row,
		    const char *json);
/* Reads the columns of ROW from statement columns FIRST, FIRST + 1, ... (as store_col_list
 * with WITH_JSON lists them). Text is borrowed from the statement, or duplicated when DUP. */
void store_read_row(sqlite3_stmt *st, int first, const struct store_table *t, void *row,
		    bool dup);
/* Frees the duplicated text fields of ROW. */
void store_free_row(const struct store_table *t, void *row);
/* Index of column NAME in T, or -1. */
int store_col_index(const struct store_table *t, const char *name);

/* ---- store_read.c ---- */
/* The SELECT list of a session row (read by read_session). */
char *store_session_select(void);
void store_session_read(sqlite3_stmt *st, struct store_session *ss);

#endif
