/* store_pg — the lab's PostgreSQL server as a pooled database (app/io/store_pg.c, on libpq).
 *
 * Rigs keep their own SQLite files (timing never waits on a network); `tachist pool --into
 * postgresql://...` copies their sessions into one schema on a server, and the readers
 * (sessions, export, report) accept the same connection text for --db. The server's tables are
 * generated from the store's column tables (store.h) with the PostgreSQL types of
 * store_type_sql; a table schema_version holds the schema version. Each session goes across in
 * one server transaction: a dropped connection leaves nothing of it, and the next pooling sends
 * it again. Nothing here prints; errors are a malloc'd sentence in *ERR (ERR may be NULL). The
 * password comes from libpq's own sources (~/.pgpass, PGPASSWORD), never from us. */
#ifndef TACHIST_STORE_PG_H
#define TACHIST_STORE_PG_H

#include <stdbool.h>
#include <stddef.h>

#define STORE_PG_DEFAULT_SCHEMA "tachist"

struct store_pg;

/* True when TEXT names a PostgreSQL server rather than a file: a URI (postgresql:// or
 * postgres://) or a libpq keyword string ("host=... dbname=..."; a word KEY=VALUE before any
 * '/'). A file whose name has '=' in its first path component is written as ./NAME. */
bool store_pg_is_conninfo(const char *text);
/* TEXT with any password in it masked, for messages. Caller frees. */
char *store_pg_shown(const char *conninfo);
/* True when NAME is a schema name we accept: a letter or '_' then letters, digits, '_', at most
 * 63 characters, lower case (so it needs no quoting). */
bool store_pg_schema_valid(const char *name);

/* Connects to CONNINFO and makes sure SCHEMA holds our tables: created on first use, columns a
 * table lacks added for an older version, refused (-1) when the server's schema version is newer
 * than this build's or a table of another shape is in the way. Returns 0 and *OUT, or -1. */
int store_pg_open(const char *conninfo, const char *schema, struct store_pg **out, char **err);
void store_pg_close(struct store_pg *pg);
/* False once the connection is lost (the caller reconnects with store_pg_open). */
bool store_pg_alive(const struct store_pg *pg);

struct store_pg_stats {
	size_t sessions_added, sessions_updated, sessions_same;
	size_t sessions_running;    /* left for later because they have not ended (ENDED_ONLY) */
	size_t trials_added, events_added;
	size_t sessions_failed;     /* whose transaction failed and rolled back */
	int source_version;         /* schema version of the source file */
};
/* Sends every session of the SQLite database SRC_PATH that the server lacks or holds an older
 * state of (fewer trials or events, or a running/interrupted status the source has moved on
 * from), each in its own transaction; only sessions that are not running when ENDED_ONLY.
 * Trials already on the server stay as they are (keyed by session and trial). The source is only
 * read, inside one read transaction. Returns 0, or -1 with *ERR (the source could not be read,
 * or a session failed: sessions sent before it stay on the server). */
int store_pg_push(struct store_pg *pg, const char *src_path, bool ended_only,
		  struct store_pg_stats *st, char **err);

/* Reads every session of SCHEMA on the server CONNINFO into a new temporary SQLite file (in
 * $TMPDIR) that the store's readers then open; *TMP gets its path (the caller removes it with
 * its -wal and -shm files). Reads only, inside one read-only repeatable-read transaction. */
int store_pg_fetch(const char *conninfo, const char *schema, char **tmp, char **err);

#endif
