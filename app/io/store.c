/* store — the SQLite database behind every session (the only file that includes sqlite3.h).
 *
 * One connection per struct store. Opening sets WAL, synchronous=FULL, foreign keys and a busy
 * timeout, then brings the schema to STORE_SCHEMA_VERSION (PRAGMA user_version): a new file gets
 * the current schema, an older one runs the forward migrations in order inside one transaction,
 * a newer one is refused. Every statement is prepared from constant text; user data only ever
 * travels as bound parameters.
 *
 * Layout (see store.h and README "Database and exported tables"): sessions keyed by UUID text;
 * trials and frames WITHOUT ROWID keyed by (session_id, trial), so export reads each session's
 * trials in order straight from the primary key, and merge needs no id remapping; frames hold a
 * trial's flip times as one blob of little-endian int64 ns; events are numbered per session.
 * Label values travel as a JSON array per trial, their names as a JSON array in the session row
 * (written once, with the session's first trial), so the database reads without the list file.
 *
 * The run layer calls the write side once per trial in the inter-trial interval; commands, the
 * console and report read through the array and iterator functions. */
#include <assert.h>
#include <errno.h>
#include <limits.h>
#include <signal.h>
#include <fcntl.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include <cJSON.h>
#include <sqlite3.h>

#include "diag.h"
#include "protocol.h"
#include "rig.h"
#include "sha256.h"
#include "stimlist.h"
#include "store.h"
#include "version.h"

enum {
	ST_BEGIN, ST_COMMIT, ST_ROLLBACK, ST_TRIAL, ST_FRAMES, ST_META, ST_EVENT, ST_COUNT
};

struct store {
	sqlite3 *db;
	char *path;
	int busy_ms;
	sqlite3_stmt *st[ST_COUNT];
	char meta_done[37];   /* session whose choices/label names this connection has written */
	char *reserve;        /* slack file beside the database, freed when the disk fills */
};

/* Bytes of slack kept beside a database opened for writing: when the disk fills, deleting it
 * leaves room to mark the session aborted (a status update needs a page or two in the WAL and
 * perhaps a larger WAL index). */
enum { RESERVE_BYTES = 128 * 1024 };

static void reserve_make(struct store *s)
{
	char *path = xasprintf("%s-reserve", s->path);
	int fd = open(path, O_WRONLY | O_CREAT | O_EXCL | O_CLOEXEC, 0644);
	if (fd < 0) {
		free(path);   /* exists already (another connection keeps it) or cannot be made */
		return;
	}
	static const char zero[4096];
	size_t done = 0;
	while (done < RESERVE_BYTES) {
		ssize_t w = write(fd, zero, sizeof zero);
		if (w <= 0)
			break;
		done += (size_t)w;
	}
	close(fd);
	if (done < RESERVE_BYTES) {
		unlink(path);
		free(path);
		return;
	}
	s->reserve = path;
}

static void reserve_release(struct store *s)
{
	if (!s->reserve)
		return;
	unlink(s->reserve);
	free(s->reserve);
	s->reserve = NULL;
}

/* ---- errors ---- */

static void set_err(char **err, const char *fmt, ...) __attribute__((format(printf, 2, 3)));
static void set_err(char **err, const char *fmt, ...)
{
	if (!err)
		return;
	va_list ap;
	va_start(ap, fmt);
	char buf[1024];
	vsnprintf(buf, sizeof buf, fmt, ap);
	va_end(ap);
	free(*err);
	*err = xstrdup(buf);
}

/* Words an SQLite failure for the person at the bench. */
static int db_fail(struct store *s, char **err, const char *what)
{
	int rc = sqlite3_extended_errcode(s->db);
	const char *msg = sqlite3_errmsg(s->db);
	switch (rc & 0xff) {
	case SQLITE_FULL:
		reserve_release(s);
		set_err(err, "%s: %s: the disk is full or the database reached its size limit (%s)",
			s->path, what, msg);
		break;
	case SQLITE_READONLY:
		set_err(err, "%s: %s: the database is read-only; check the permissions of the file "
			"and its folder (%s)", s->path, what, msg);
		break;
	case SQLITE_BUSY:
	case SQLITE_LOCKED:
		set_err(err, "%s: %s: the database is locked by another program (waited %d ms)",
			s->path, what, s->busy_ms);
		break;
	case SQLITE_NOTADB:
		set_err(err, "%s: not a database file", s->path);
		break;
	case SQLITE_CORRUPT:
		set_err(err, "%s: %s: the database file is damaged (%s)", s->path, what, msg);
		break;
	case SQLITE_IOERR:
		set_err(err, "%s: %s: input/output error (%s)", s->path, what, msg);
		break;
	case SQLITE_CANTOPEN:
		set_err(err, "%s: cannot open the database (%s)", s->path, msg);
		break;
	default:
		set_err(err, "%s: %s: %s", s->path, what, msg);
	}
	return -1;
}

/* ---- small helpers ---- */

static int exec(struct store *s, const char *sql, char **err, const char *what)
{
	if (sqlite3_exec(s->db, sql, NULL, NULL, NULL) != SQLITE_OK)
		return db_fail(s, err, what);
	return 0;
}

static sqlite3_stmt *prep(struct store *s, const char *sql, char **err, const char *what)
{
	sqlite3_stmt *st = NULL;
	if (sqlite3_prepare_v2(s->db, sql, -1, &st, NULL) != SQLITE_OK) {
		db_fail(s, err, what);
		return NULL;
	}
	return st;
}

/* A cached statement, prepared on first use and reset before each. */
static sqlite3_stmt *cached(struct store *s, int which, const char *sql, char **err)
{
	if (!s->st[which])
		s->st[which] = prep(s, sql, err, "preparing a statement");
	else {
		sqlite3_reset(s->st[which]);
		sqlite3_clear_bindings(s->st[which]);
	}
	return s->st[which];
}

static void bind_text(sqlite3_stmt *st, int i, const char *v)
{
	if (v)
		sqlite3_bind_text(st, i, v, -1, SQLITE_TRANSIENT);
	else
		sqlite3_bind_null(st, i);
}

/* Binds a number, or NULL when it is 0 (the "unknown" of the presentation settings). */
static void bind_pos_double(sqlite3_stmt *st, int i, double v)
{
	if (v > 0)
		sqlite3_bind_double(st, i, v);
	else
		sqlite3_bind_null(st, i);
}

static void bind_pos_int(sqlite3_stmt *st, int i, int v)
{
	if (v > 0)
		sqlite3_bind_int(st, i, v);
	else
		sqlite3_bind_null(st, i);
}

static char *col_dup(sqlite3_stmt *st, int i)
{
	const unsigned char *t = sqlite3_column_text(st, i);
	return t ? xstrdup((const char *)t) : NULL;
}

static const char *col_text(sqlite3_stmt *st, int i)
{
	return (const char *)sqlite3_column_text(st, i);
}

static bool col_null(sqlite3_stmt *st, int i)
{
	return sqlite3_column_type(st, i) == SQLITE_NULL;
}

static int col_int_or(sqlite3_stmt *st, int i, int dflt)
{
	return col_null(st, i) ? dflt : sqlite3_column_int(st, i);
}

static void utc_now(char out[32])
{
	struct timespec ts;
	clock_gettime(CLOCK_REALTIME, &ts);
	struct tm tm;
	gmtime_r(&ts.tv_sec, &tm);
	size_t k = strftime(out, 32, "%Y-%m-%dT%H:%M:%S", &tm);
	snprintf(out + k, 32 - k, ".%03dZ", (int)(ts.tv_nsec / 1000000));
}

static int64_t mono_ns(void)
{
	struct timespec ts;
	clock_gettime(CLOCK_MONOTONIC, &ts);
	return (int64_t)ts.tv_sec * 1000000000 + ts.tv_nsec;
}

/* ---- public small things ---- */

bool store_subject_valid(const char *subject)
{
	if (!subject)
		return false;
	size_t n = 0;
	for (const char *c = subject; *c; c++, n++) {
		bool alnum = (*c >= 'a' && *c <= 'z') || (*c >= 'A' && *c <= 'Z') ||
			     (*c >= '0' && *c <= '9');
		if (!alnum)
			return false;
	}
	return n >= 1 && n <= 64;
}

int store_uuid4(char out[37])
{
	unsigned char b[16];
	int fd = open("/dev/urandom", O_RDONLY | O_CLOEXEC);
	if (fd < 0)
		return -1;
	size_t got = 0;
	while (got < sizeof b) {
		ssize_t r = read(fd, b + got, sizeof b - got);
		if (r < 0 && errno == EINTR)
			continue;
		if (r <= 0) {
			close(fd);
			return -1;
		}
		got += (size_t)r;
	}
	close(fd);
	/* RFC 4122 section 4.4: version 4 in the high nibble of byte 6, variant 10 in byte 8. */
	b[6] = (unsigned char)((b[6] & 0x0f) | 0x40);
	b[8] = (unsigned char)((b[8] & 0x3f) | 0x80);
	snprintf(out, 37,
		 "%02x%02x%02x%02x-%02x%02x-%02x%02x-%02x%02x-%02x%02x%02x%02x%02x%02x",
		 b[0], b[1], b[2], b[3], b[4], b[5], b[6], b[7], b[8], b[9], b[10], b[11], b[12],
		 b[13], b[14], b[15]);
	return 0;
}

static const char *const status_names[] = {"running", "complete", "aborted", "interrupted"};

const char *store_status_name(enum store_status st)
{
	return (unsigned)st < 4 ? status_names[st] : "?";
}

int store_status_parse(const char *name, enum store_status *out)
{
	for (int i = 0; i < 4; i++)
		if (name && !strcmp(name, status_names[i])) {
			*out = (enum store_status)i;
			return 0;
		}
	return -1;
}

const char *store_path(const struct store *s)
{
	return s->path;
}

/* ---- schema ---- */

/* The current schema, created whole in a new file. */
static const char schema_v3[] =
	"CREATE TABLE sessions ("
	" id TEXT PRIMARY KEY NOT NULL,"
	" subject TEXT NOT NULL,"
	" protocol_name TEXT, protocol_path TEXT, protocol_text TEXT, protocol_sha256 TEXT,"
	" stimuli_path TEXT, stimuli_sha256 TEXT, rig_text TEXT,"
	" seed INTEGER NOT NULL,"
	" version TEXT, timing_mode TEXT, refresh_hz REAL,"
	" started_utc TEXT NOT NULL, ended_utc TEXT,"
	" status TEXT NOT NULL CHECK (status IN ('running','complete','aborted','interrupted')),"
	" choices TEXT, label_names TEXT,"
	" observer TEXT,"
	" screen_width_cm REAL, screen_height_cm REAL, screen_width_px INTEGER,"
	" screen_height_px INTEGER, distance_cm REAL, nominal_hz REAL, stim_deg REAL,"
	" owner_pid INTEGER, owner_host TEXT);"
	"CREATE INDEX sessions_subject ON sessions(subject, started_utc);"
	"CREATE TABLE trials ("
	" session_id TEXT NOT NULL REFERENCES sessions(id) ON DELETE CASCADE,"
	" trial INTEGER NOT NULL,"
	" block INTEGER NOT NULL, block_name TEXT, block_trial INTEGER NOT NULL,"
	" practice INTEGER NOT NULL DEFAULT 0,"
	" stim INTEGER, image TEXT, category TEXT, choice INTEGER, level REAL, source TEXT,"
	" labels TEXT,"
	" response_key TEXT, response INTEGER, response_category TEXT, correct INTEGER,"
	" rt_ms REAL, timed_out INTEGER NOT NULL DEFAULT 0,"
	" frames_planned INTEGER, frames_actual INTEGER, dropped_frames INTEGER,"
	" timing_ok INTEGER, onset_ns INTEGER, offset_ns INTEGER, start_ns INTEGER,"
	" staircase INTEGER,"
	" anticipation INTEGER NOT NULL DEFAULT 0, key_sdl_ms INTEGER, level_requested REAL,"
	" repeat_of INTEGER,"
	" PRIMARY KEY (session_id, trial)) WITHOUT ROWID;"
	"CREATE TABLE frames ("
	" session_id TEXT NOT NULL, trial INTEGER NOT NULL, n INTEGER NOT NULL, flips BLOB,"
	" PRIMARY KEY (session_id, trial),"
	" FOREIGN KEY (session_id, trial) REFERENCES trials(session_id, trial) ON DELETE CASCADE"
	") WITHOUT ROWID;"
	"CREATE TABLE events ("
	" session_id TEXT NOT NULL REFERENCES sessions(id) ON DELETE CASCADE,"
	" seq INTEGER NOT NULL, mono_ns INTEGER, kind TEXT NOT NULL, detail TEXT,"
	" PRIMARY KEY (session_id, seq)) WITHOUT ROWID;"
	"PRAGMA user_version = 3;";

/* Version 2 lacked the owner of a session (owner_pid, owner_host).
 * Version 1 (the first layout) lacked the observer and the presentation settings of a session,
 * and the anticipation, SDL key stamp, requested level and repeat columns of a trial. Each step
 * takes the file from version K to K + 1; migrations[K - 1] is that step. */
static const char *const migrations[] = {
	/* 1 -> 2 */
	"ALTER TABLE sessions ADD COLUMN observer TEXT;"
	"ALTER TABLE sessions ADD COLUMN screen_width_cm REAL;"
	"ALTER TABLE sessions ADD COLUMN screen_height_cm REAL;"
	"ALTER TABLE sessions ADD COLUMN screen_width_px INTEGER;"
	"ALTER TABLE sessions ADD COLUMN screen_height_px INTEGER;"
	"ALTER TABLE sessions ADD COLUMN distance_cm REAL;"
	"ALTER TABLE sessions ADD COLUMN nominal_hz REAL;"
	"ALTER TABLE sessions ADD COLUMN stim_deg REAL;"
	"ALTER TABLE trials ADD COLUMN anticipation INTEGER NOT NULL DEFAULT 0;"
	"ALTER TABLE trials ADD COLUMN key_sdl_ms INTEGER;"
	"ALTER TABLE trials ADD COLUMN level_requested REAL;"
	"ALTER TABLE trials ADD COLUMN repeat_of INTEGER;"
	"CREATE INDEX IF NOT EXISTS sessions_subject ON sessions(subject, started_utc);"
	"PRAGMA user_version = 2;",
	/* 2 -> 3: the process that runs a session (pid and host name), so recovery marks only
	 * sessions whose process is gone. Sessions from version 2 have no owner. */
	"ALTER TABLE sessions ADD COLUMN owner_pid INTEGER;"
	"ALTER TABLE sessions ADD COLUMN owner_host TEXT;"
	"PRAGMA user_version = 3;",
};

static int user_version(struct store *s, int *v, char **err)
{
	sqlite3_stmt *st = prep(s, "PRAGMA user_version", err, "reading the schema version");
	if (!st)
		return -1;
	int rc = sqlite3_step(st);
	if (rc != SQLITE_ROW) {
		sqlite3_finalize(st);
		return db_fail(s, err, "reading the schema version");
	}
	*v = sqlite3_column_int(st, 0);
	sqlite3_finalize(st);
	return 0;
}

static int table_count(struct store *s, int *n, char **err)
{
	sqlite3_stmt *st = prep(s, "SELECT count(*) FROM sqlite_master WHERE type = 'table'", err,
				"reading the schema");
	if (!st)
		return -1;
	if (sqlite3_step(st) != SQLITE_ROW) {
		sqlite3_finalize(st);
		return db_fail(s, err, "reading the schema");
	}
	*n = sqlite3_column_int(st, 0);
	sqlite3_finalize(st);
	return 0;
}

static int migrate(struct store *s, char **err)
{
	int v, ntables;
	if (user_version(s, &v, err) || table_count(s, &ntables, err))
		return -1;
	if (v == STORE_SCHEMA_VERSION)
		return 0;
	if (v > STORE_SCHEMA_VERSION) {
		set_err(err, "%s: schema version %d is newer than this tachist understands (%d); "
			"use a newer tachist", s->path, v, STORE_SCHEMA_VERSION);
		return -1;
	}
	if (v == 0 && ntables > 0) {
		set_err(err, "%s: not a tachist database (it has tables but no schema version)",
			s->path);
		return -1;
	}
	if (sqlite3_db_readonly(s->db, "main") == 1) {
		set_err(err, "%s: the database has schema version %d and needs migrating to %d, but "
			"the file is read-only", s->path, v, STORE_SCHEMA_VERSION);
		return -1;
	}
	if (exec(s, "BEGIN IMMEDIATE", err, "starting the schema update"))
		return -1;
	if (v == 0) {
		if (exec(s, schema_v3, err, "creating the tables"))
			goto fail;
	} else {
		for (int k = v; k < STORE_SCHEMA_VERSION; k++)
			if (exec(s, migrations[k - 1], err, "migrating the schema"))
				goto fail;
	}
	if (exec(s, "COMMIT", err, "finishing the schema update"))
		goto fail;
	return 0;
fail:
	sqlite3_exec(s->db, "ROLLBACK", NULL, NULL, NULL);
	return -1;
}

enum open_mode { OPEN_WRITE, OPEN_READ, OPEN_IMMUTABLE };

/* "file:" URI of PATH with immutable=1, every byte outside [A-Za-z0-9/._~-] percent-encoded
 * (RFC 3986 section 2.1). */
static char *immutable_uri(const char *path)
{
	char *u = xmalloc(strlen(path) * 3 + 32), *q = u;
	q += sprintf(q, "file:");
	for (const unsigned char *c = (const unsigned char *)path; *c; c++) {
		if ((*c >= 'a' && *c <= 'z') || (*c >= 'A' && *c <= 'Z') || (*c >= '0' && *c <= '9') ||
		    strchr("/._~-", *c))
			*q++ = (char)*c;
		else
			q += sprintf(q, "%%%02X", *c);
	}
	sprintf(q, "?immutable=1");
	return u;
}

/* Opens PATH without touching its schema. */
static int open_raw(const char *path, enum open_mode mode, struct store **out, char **err)
{
	struct store *s = xcalloc(1, sizeof *s);
	s->path = xstrdup(path);
	s->busy_ms = 5000;
	int flags = mode == OPEN_WRITE ? SQLITE_OPEN_READWRITE | SQLITE_OPEN_CREATE
				       : SQLITE_OPEN_READONLY;
	char *uri = NULL;
	if (mode == OPEN_IMMUTABLE) {
		uri = immutable_uri(path);
		flags |= SQLITE_OPEN_URI;
	}
	int rc = sqlite3_open_v2(uri ? uri : path, &s->db, flags | SQLITE_OPEN_NOMUTEX, NULL);
	free(uri);
	if (rc != SQLITE_OK) {
		if (s->db)
			db_fail(s, err, "opening");
		else
			set_err(err, "%s: cannot open the database (out of memory)", path);
		store_close(s);
		return -1;
	}
	sqlite3_extended_result_codes(s->db, 1);
	sqlite3_busy_timeout(s->db, s->busy_ms);
	*out = s;
	return 0;
}

/* True when a database we cannot write also cannot be read normally because its WAL index
 * cannot be made (a read-only folder) and nothing waits in its WAL: it is then safe to read it
 * as immutable. */
static bool immutable_ok(struct store *s)
{
	int code = sqlite3_extended_errcode(s->db) & 0xff;
	if (code != SQLITE_READONLY && code != SQLITE_CANTOPEN)
		return false;
	if (access(s->path, W_OK) == 0)
		return false;
	char *wal = xasprintf("%s-wal", s->path);
	struct stat st;
	bool empty = stat(wal, &st) != 0 || st.st_size == 0;
	free(wal);
	return empty;
}

/* Opens PATH for reading only, falling back to immutable reading in a read-only folder. */
static int open_read(const char *path, struct store **out, int *version, bool *immutable,
		     char **err)
{
	struct store *s;
	if (immutable)
		*immutable = false;
	if (open_raw(path, OPEN_READ, &s, err))
		return -1;
	char *first = NULL;
	if (user_version(s, version, &first)) {
		if (!immutable_ok(s)) {
			if (err) {
				free(*err);
				*err = first;
			} else {
				free(first);
			}
			store_close(s);
			return -1;
		}
		free(first);
		store_close(s);
		if (open_raw(path, OPEN_IMMUTABLE, &s, err))
			return -1;
		if (user_version(s, version, err)) {
			store_close(s);
			return -1;
		}
		if (immutable)
			*immutable = true;
	}
	*out = s;
	return 0;
}

int store_open(const char *path, struct store **out, char **err)
{
	assert(path && out);
	*out = NULL;
	struct store *s;
	if (open_raw(path, OPEN_WRITE, &s, err))
		return -1;
	int v;
	/* Reading the version first finds a file that is not a database. */
	char *first = NULL;
	if (user_version(s, &v, &first)) {
		if (!immutable_ok(s)) {
			if (err) {
				free(*err);
				*err = first;
			} else {
				free(first);
			}
			goto fail;
		}
		free(first);
		store_close(s);
		if (open_read(path, &s, &v, NULL, err))
			return -1;
	}
	if (exec(s, "PRAGMA foreign_keys = ON", err, "setting up"))
		goto fail;
	if (sqlite3_db_readonly(s->db, "main") != 1) {
		sqlite3_stmt *st = prep(s, "PRAGMA journal_mode = WAL", err, "setting up");
		if (!st)
			goto fail;
		int rc = sqlite3_step(st);
		sqlite3_finalize(st);
		if (rc != SQLITE_ROW) {
			db_fail(s, err, "switching to write-ahead logging");
			goto fail;
		}
		if (exec(s, "PRAGMA synchronous = FULL", err, "setting up"))
			goto fail;
	}
	if (migrate(s, err))
		goto fail;
	if (sqlite3_db_readonly(s->db, "main") != 1)
		reserve_make(s);
	*out = s;
	return 0;
fail:
	store_close(s);
	return -1;
}

int store_open_existing(const char *path, struct store **out, char **err)
{
	assert(path && out);
	*out = NULL;
	struct stat st;
	if (stat(path, &st) != 0) {
		set_err(err, "no database at %s", path);
		return -1;
	}
	return store_open(path, out, err);
}

void store_close(struct store *s)
{
	if (!s)
		return;
	for (int i = 0; i < ST_COUNT; i++)
		sqlite3_finalize(s->st[i]);
	sqlite3_close(s->db);
	reserve_release(s);
	free(s->path);
	free(s);
}

int store_limit_pages(struct store *s, long max_pages, char **err)
{
	/* PRAGMA takes no bound parameters; the text is built from a number, never from user text. */
	char sql[64];
	snprintf(sql, sizeof sql, "PRAGMA max_page_count = %ld", max_pages);
	sqlite3_stmt *st = prep(s, sql, err, "limiting the database size");
	if (!st)
		return -1;
	int rc = sqlite3_step(st);
	sqlite3_finalize(st);
	if (rc != SQLITE_ROW && rc != SQLITE_DONE)
		return db_fail(s, err, "limiting the database size");
	return 0;
}

int store_busy_timeout(struct store *s, int ms, char **err)
{
	if (sqlite3_busy_timeout(s->db, ms) != SQLITE_OK)
		return db_fail(s, err, "setting the busy timeout");
	s->busy_ms = ms;
	return 0;
}

int store_integrity_check(struct store *s, char **err)
{
	sqlite3_stmt *st = prep(s, "PRAGMA integrity_check", err, "checking integrity");
	if (!st)
		return -1;
	int rc = sqlite3_step(st);
	if (rc != SQLITE_ROW) {
		sqlite3_finalize(st);
		return db_fail(s, err, "checking integrity");
	}
	const char *r = col_text(st, 0);
	int ret = 0;
	if (!r || strcmp(r, "ok")) {
		set_err(err, "%s: integrity check: %s", s->path, r ? r : "(no answer)");
		ret = -1;
	}
	sqlite3_finalize(st);
	return ret;
}

/* ---- sessions: write ---- */

static char *dup_or_null(const char *s)
{
	return s ? xstrdup(s) : NULL;
}

void store_session_describe(struct store_session *ss, const struct protocol *p,
			    const struct stimlist *l, const struct rig *r)
{
	if (p) {
		free(ss->protocol_name);
		ss->protocol_name = dup_or_null(p->name);
		free(ss->protocol_path);
		ss->protocol_path = dup_or_null(p->path);
		free(ss->protocol_text);
		ss->protocol_text = dup_or_null(p->text);
		if (p->text)
			sha256_hex(p->text, strlen(p->text), ss->protocol_sha256);
		ss->stim_deg = p->size_deg;
		if (!ss->stimuli_path && p->stimuli)
			ss->stimuli_path = xstrdup(p->stimuli);
	}
	if (l) {
		free(ss->stimuli_path);
		ss->stimuli_path = dup_or_null(l->path);
		memcpy(ss->stimuli_sha256, l->sha256, sizeof ss->stimuli_sha256);
		ss->stimuli_sha256[64] = '\0';
	}
	if (r) {
		free(ss->rig_text);
		ss->rig_text = dup_or_null(r->text);
		ss->screen_width_cm = r->width_cm;
		ss->screen_height_cm = r->height_cm;
		ss->screen_width_px = r->width_px;
		ss->screen_height_px = r->height_px;
		ss->distance_cm = r->distance_cm;
		ss->nominal_hz = r->refresh_hz;
	}
}

/* This machine's host name (gethostname(2)), "" when unknown. */
static void this_host(char out[256])
{
	if (gethostname(out, 256) != 0)
		out[0] = '\0';
	out[255] = '\0';
}

int store_session_begin(struct store *s, struct store_session *ss, char **err)
{
	if (!store_subject_valid(ss->subject)) {
		set_err(err, "subject ID '%s' is not valid: use 1 to 64 letters and digits only "
			"(a pseudonym, never a name)", ss->subject ? ss->subject : "");
		return -1;
	}
	if (store_uuid4(ss->id)) {
		set_err(err, "cannot read /dev/urandom for a session ID: %s", strerror(errno));
		return -1;
	}
	char now[32];
	utc_now(now);
	free(ss->started_utc);
	ss->started_utc = xstrdup(now);
	free(ss->ended_utc);
	ss->ended_utc = NULL;
	ss->status = STORE_RUNNING;
	if (!ss->version)
		ss->version = xstrdup(TACHIST_VERSION);
	sqlite3_stmt *st = prep(s,
		"INSERT INTO sessions (id, subject, protocol_name, protocol_path, protocol_text,"
		" protocol_sha256, stimuli_path, stimuli_sha256, rig_text, seed, version, timing_mode,"
		" refresh_hz, started_utc, status, observer, screen_width_cm, screen_height_cm,"
		" screen_width_px, screen_height_px, distance_cm, nominal_hz, stim_deg, owner_pid,"
		" owner_host)"
		" VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9, ?10, ?11, ?12, ?13, ?14, 'running',"
		" ?15, ?16, ?17, ?18, ?19, ?20, ?21, ?22, ?23, ?24)", err, "creating the session");
	if (!st)
		return -1;
	bind_text(st, 1, ss->id);
	bind_text(st, 2, ss->subject);
	bind_text(st, 3, ss->protocol_name);
	bind_text(st, 4, ss->protocol_path);
	bind_text(st, 5, ss->protocol_text);
	bind_text(st, 6, ss->protocol_sha256[0] ? ss->protocol_sha256 : NULL);
	bind_text(st, 7, ss->stimuli_path);
	bind_text(st, 8, ss->stimuli_sha256[0] ? ss->stimuli_sha256 : NULL);
	bind_text(st, 9, ss->rig_text);
	/* The seed is an unsigned 64-bit number kept in SQLite's signed integer (same bits). */
	sqlite3_bind_int64(st, 10, (sqlite3_int64)ss->seed);
	bind_text(st, 11, ss->version);
	bind_text(st, 12, ss->timing_mode);
	bind_pos_double(st, 13, ss->refresh_hz);
	bind_text(st, 14, ss->started_utc);
	bind_text(st, 15, ss->observer);
	bind_pos_double(st, 16, ss->screen_width_cm);
	bind_pos_double(st, 17, ss->screen_height_cm);
	bind_pos_int(st, 18, ss->screen_width_px);
	bind_pos_int(st, 19, ss->screen_height_px);
	bind_pos_double(st, 20, ss->distance_cm);
	bind_pos_double(st, 21, ss->nominal_hz);
	bind_pos_double(st, 22, ss->stim_deg);
	char host[256];
	this_host(host);
	sqlite3_bind_int64(st, 23, (sqlite3_int64)getpid());
	bind_text(st, 24, host);
	int rc = sqlite3_step(st);
	sqlite3_finalize(st);
	if (rc != SQLITE_DONE)
		return db_fail(s, err, "creating the session");
	return 0;
}

/* Runs an UPDATE with ?1 = session id; fails when it touched no row. */
static int update_session(struct store *s, sqlite3_stmt *st, const char *id, char **err,
			  const char *what)
{
	int rc = sqlite3_step(st);
	sqlite3_finalize(st);
	if (rc != SQLITE_DONE)
		return db_fail(s, err, what);
	if (sqlite3_changes(s->db) == 0) {
		set_err(err, "%s: no session %s", s->path, id);
		return -1;
	}
	return 0;
}

int store_session_refresh(struct store *s, const char *session_id, double hz, char **err)
{
	sqlite3_stmt *st = prep(s, "UPDATE sessions SET refresh_hz = ?2 WHERE id = ?1", err,
				"recording the refresh");
	if (!st)
		return -1;
	bind_text(st, 1, session_id);
	bind_pos_double(st, 2, hz);
	return update_session(s, st, session_id, err, "recording the refresh");
}

int store_session_end(struct store *s, const char *session_id, enum store_status status,
		      char **err)
{
	char now[32];
	utc_now(now);
	sqlite3_stmt *st = prep(s, "UPDATE sessions SET status = ?2, ended_utc = ?3 WHERE id = ?1",
				err, "ending the session");
	if (!st)
		return -1;
	bind_text(st, 1, session_id);
	bind_text(st, 2, store_status_name(status));
	bind_text(st, 3, status == STORE_RUNNING ? NULL : now);
	return update_session(s, st, session_id, err, "ending the session");
}

int store_session_own(struct store *s, const char *session_id, long pid, const char *host,
		      char **err)
{
	char here[256];
	if (!host) {
		this_host(here);
		host = here;
	}
	sqlite3_stmt *st = prep(s, "UPDATE sessions SET status = 'running', ended_utc = NULL,"
				" owner_pid = ?2, owner_host = ?3 WHERE id = ?1", err,
				"taking over the session");
	if (!st)
		return -1;
	bind_text(st, 1, session_id);
	sqlite3_bind_int64(st, 2, (sqlite3_int64)pid);
	bind_text(st, 3, host);
	return update_session(s, st, session_id, err, "taking over the session");
}

/* True when the process PID on this host is gone (kill(2) with signal 0 says ESRCH). A process
 * we may not signal (EPERM) is alive. */
static bool owner_gone(long pid)
{
	if (pid <= 0 || pid > INT_MAX)
		return true;
	return kill((pid_t)pid, 0) == -1 && errno == ESRCH;
}

int store_recover(struct store *s, int *n, char **err)
{
	if (n)
		*n = 0;
	char host[256];
	this_host(host);
	/* The running sessions that may be orphans: no owner recorded (written before schema
	 * version 3) or owned on this host. Other hosts' sessions are left alone. */
	sqlite3_stmt *st = prep(s, "SELECT id, owner_pid FROM sessions WHERE status = 'running'"
				" AND (owner_host IS NULL OR owner_host = ?1)", err,
				"recovering sessions");
	if (!st)
		return -1;
	bind_text(st, 1, host);
	size_t cap = 0, k = 0;
	char (*ids)[37] = NULL;
	int rc;
	while ((rc = sqlite3_step(st)) == SQLITE_ROW) {
		bool owned = sqlite3_column_type(st, 1) != SQLITE_NULL;
		if (owned && !owner_gone((long)sqlite3_column_int64(st, 1)))
			continue;
		if (k == cap) {
			cap = cap ? 2 * cap : 8;
			ids = xrealloc(ids, cap * sizeof *ids);
		}
		snprintf(ids[k++], 37, "%s", col_text(st, 0) ? col_text(st, 0) : "");
	}
	sqlite3_finalize(st);
	if (rc != SQLITE_DONE) {
		free(ids);
		return db_fail(s, err, "recovering sessions");
	}
	int done = 0;
	for (size_t i = 0; i < k; i++) {
		st = prep(s, "UPDATE sessions SET status = 'interrupted' WHERE id = ?1"
			  " AND status = 'running'", err, "recovering sessions");
		if (!st) {
			free(ids);
			return -1;
		}
		bind_text(st, 1, ids[i]);
		rc = sqlite3_step(st);
		sqlite3_finalize(st);
		if (rc != SQLITE_DONE) {
			free(ids);
			return db_fail(s, err, "marking crashed sessions interrupted");
		}
		done += sqlite3_changes(s->db);
	}
	free(ids);
	if (n)
		*n = done;
	return 0;
}

int store_event(struct store *s, const char *session_id, const char *kind, const char *detail,
		char **err)
{
	sqlite3_stmt *st = cached(s, ST_EVENT,
		"INSERT INTO events (session_id, seq, mono_ns, kind, detail) VALUES (?1,"
		" (SELECT coalesce(max(seq) + 1, 0) FROM events WHERE session_id = ?1), ?2, ?3, ?4)",
		err);
	if (!st)
		return -1;
	bind_text(st, 1, session_id);
	sqlite3_bind_int64(st, 2, mono_ns());
	bind_text(st, 3, kind);
	bind_text(st, 4, detail);
	int rc = sqlite3_step(st);
	sqlite3_reset(st);
	if (rc != SQLITE_DONE) {
		if ((sqlite3_extended_errcode(s->db) & 0xff) == SQLITE_CONSTRAINT) {
			set_err(err, "%s: no session %s", s->path, session_id);
			return -1;
		}
		return db_fail(s, err, "storing an event");
	}
	return 0;
}

/* ---- trials: write ---- */

/* JSON text of the protocol's categories: [{"category": C, "key": K}, ...]. Caller frees. */
static char *choices_json(const struct protocol *p)
{
	cJSON *a = cJSON_CreateArray();
	for (size_t i = 0; p && i < p->nchoices; i++) {
		cJSON *o = cJSON_CreateObject();
		cJSON_AddStringToObject(o, "category", p->choices[i].category ? p->choices[i].category : "");
		cJSON_AddStringToObject(o, "key", p->choices[i].key ? p->choices[i].key : "");
		cJSON_AddItemToArray(a, o);
	}
	char *t = cJSON_PrintUnformatted(a);
	cJSON_Delete(a);
	return t;
}

static char *strings_json(char *const *v, size_t n)
{
	cJSON *a = cJSON_CreateArray();
	for (size_t i = 0; i < n; i++)
		cJSON_AddItemToArray(a, cJSON_CreateString(v[i] ? v[i] : ""));
	char *t = cJSON_PrintUnformatted(a);
	cJSON_Delete(a);
	return t;
}

/* Writes the session's choices and label names once (they do not change within a session). */
static int put_meta(struct store *s, const char *session_id, const struct protocol *p,
		    const struct stimlist *l, char **err)
{
	if (!strcmp(s->meta_done, session_id) || (!p && !l))
		return 0;
	sqlite3_stmt *st = cached(s, ST_META,
		"UPDATE sessions SET choices = coalesce(choices, ?2),"
		" label_names = coalesce(label_names, ?3) WHERE id = ?1", err);
	if (!st)
		return -1;
	char *cj = p ? choices_json(p) : NULL;
	char *lj = l ? strings_json(l->label_names, l->nlabels) : NULL;
	bind_text(st, 1, session_id);
	bind_text(st, 2, cj);
	bind_text(st, 3, lj);
	int rc = sqlite3_step(st);
	sqlite3_reset(st);
	cJSON_free(cj);
	cJSON_free(lj);
	if (rc != SQLITE_DONE)
		return db_fail(s, err, "storing the session's categories");
	snprintf(s->meta_done, sizeof s->meta_done, "%s", session_id);
	return 0;
}

static int bind_trial(sqlite3_stmt *st, const char *session_id, const struct trial_record *t,
		      const struct protocol *p, const struct stimlist *l, char **labels_out)
{
	const struct stim *item = (l && t->stim >= 0 && (size_t)t->stim < l->n)
					  ? &l->items[t->stim] : NULL;
	const struct protocol_block *blk = (p && t->block >= 0 && (size_t)t->block < p->nblocks)
						   ? &p->blocks[t->block] : NULL;
	const char *category = item ? item->category : NULL;
	if (!category && p && t->choice >= 0 && (size_t)t->choice < p->nchoices)
		category = p->choices[t->choice].category;
	const char *resp_cat = (p && t->response >= 0 && (size_t)t->response < p->nchoices)
				       ? p->choices[t->response].category : NULL;
	*labels_out = item ? strings_json(item->labels, l->nlabels) : NULL;

	bind_text(st, 1, session_id);
	sqlite3_bind_int(st, 2, t->trial);
	sqlite3_bind_int(st, 3, t->block);
	bind_text(st, 4, blk ? blk->name : NULL);
	sqlite3_bind_int(st, 5, t->block_trial);
	sqlite3_bind_int(st, 6, blk ? blk->practice : 0);
	if (t->stim >= 0)
		sqlite3_bind_int(st, 7, t->stim);
	bind_text(st, 8, item ? item->image : NULL);
	bind_text(st, 9, category);
	if (t->choice >= 0)
		sqlite3_bind_int(st, 10, t->choice);
	if (t->has_level)
		sqlite3_bind_double(st, 11, t->level);
	bind_text(st, 12, item ? item->source : NULL);
	bind_text(st, 13, *labels_out);
	bind_text(st, 14, t->response_key[0] ? t->response_key : NULL);
	if (t->response >= 0)
		sqlite3_bind_int(st, 15, t->response);
	bind_text(st, 16, resp_cat);
	if (t->correct >= 0)
		sqlite3_bind_int(st, 17, t->correct);
	if (t->has_rt)
		sqlite3_bind_double(st, 18, t->rt_ms);
	sqlite3_bind_int(st, 19, t->timed_out);
	sqlite3_bind_int(st, 20, t->frames_planned);
	sqlite3_bind_int(st, 21, t->frames_actual);
	sqlite3_bind_int(st, 22, t->dropped_frames);
	sqlite3_bind_int(st, 23, t->timing_ok);
	sqlite3_bind_int64(st, 24, t->onset_ns);
	sqlite3_bind_int64(st, 25, t->offset_ns);
	sqlite3_bind_int64(st, 26, t->start_ns);
	if (t->staircase >= 0) {
		sqlite3_bind_int(st, 27, t->staircase);
		sqlite3_bind_double(st, 30, t->level_requested);
	}
	sqlite3_bind_int(st, 28, t->anticipation);
	if (t->key_sdl_ms)
		sqlite3_bind_int64(st, 29, t->key_sdl_ms);
	if (t->repeat_of >= 0)
		sqlite3_bind_int(st, 31, t->repeat_of);
	return 0;
}

static const char trial_insert_sql[] =
	"INSERT INTO trials (session_id, trial, block, block_name, block_trial, practice, stim,"
	" image, category, choice, level, source, labels, response_key, response,"
	" response_category, correct, rt_ms, timed_out, frames_planned, frames_actual,"
	" dropped_frames, timing_ok, onset_ns, offset_ns, start_ns, staircase, anticipation,"
	" key_sdl_ms, level_requested, repeat_of) VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7, ?8, ?9,"
	" ?10, ?11, ?12, ?13, ?14, ?15, ?16, ?17, ?18, ?19, ?20, ?21, ?22, ?23, ?24, ?25, ?26,"
	" ?27, ?28, ?29, ?30, ?31)";

/* Flip times as little-endian int64, whatever the host's byte order. Caller frees. */
static unsigned char *flips_blob(const int64_t *flips, size_t n)
{
	unsigned char *b = xmalloc(n * 8 + 1);
	for (size_t i = 0; i < n; i++) {
		uint64_t v = (uint64_t)flips[i];
		for (int k = 0; k < 8; k++)
			b[i * 8 + (size_t)k] = (unsigned char)(v >> (8 * k));
	}
	return b;
}

int store_trial_put(struct store *s, const char *session_id, const struct trial_record *t,
		    const struct protocol *p, const struct stimlist *l, char **err)
{
	assert(s && session_id && t);
	sqlite3_stmt *b = cached(s, ST_BEGIN, "BEGIN IMMEDIATE", err);
	if (!b)
		return -1;
	if (sqlite3_step(b) != SQLITE_DONE)
		return db_fail(s, err, "starting to store a trial");
	char *labels = NULL;
	unsigned char *blob = NULL;
	const char *what = "storing a trial";
	if (put_meta(s, session_id, p, l, err))
		goto fail_quiet;
	sqlite3_stmt *st = cached(s, ST_TRIAL, trial_insert_sql, err);
	if (!st)
		goto fail_quiet;
	bind_trial(st, session_id, t, p, l, &labels);
	int rc = sqlite3_step(st);
	sqlite3_reset(st);
	if (rc != SQLITE_DONE) {
		int ext = sqlite3_extended_errcode(s->db);
		if (ext == SQLITE_CONSTRAINT_PRIMARYKEY) {
			set_err(err, "%s: trial %d of session %s is already stored", s->path,
				t->trial, session_id);
			goto fail_quiet;
		}
		if (ext == SQLITE_CONSTRAINT_FOREIGNKEY) {
			set_err(err, "%s: no session %s", s->path, session_id);
			goto fail_quiet;
		}
		goto fail;
	}
	if (t->nflips > 0) {
		what = "storing a trial's frame times";
		st = cached(s, ST_FRAMES, "INSERT INTO frames (session_id, trial, n, flips)"
			    " VALUES (?1, ?2, ?3, ?4)", err);
		if (!st)
			goto fail_quiet;
		blob = flips_blob(t->flips, t->nflips);
		bind_text(st, 1, session_id);
		sqlite3_bind_int(st, 2, t->trial);
		sqlite3_bind_int64(st, 3, (sqlite3_int64)t->nflips);
		sqlite3_bind_blob(st, 4, blob, (int)(t->nflips * 8), SQLITE_STATIC);
		rc = sqlite3_step(st);
		sqlite3_reset(st);
		sqlite3_clear_bindings(st);
		if (rc != SQLITE_DONE)
			goto fail;
	}
	what = "committing a trial";
	sqlite3_stmt *c = cached(s, ST_COMMIT, "COMMIT", err);
	if (!c)
		goto fail_quiet;
	if (sqlite3_step(c) != SQLITE_DONE)
		goto fail;
	cJSON_free(labels);
	free(blob);
	return 0;
fail:
	db_fail(s, err, what);
fail_quiet:
	cJSON_free(labels);
	free(blob);
	if (!sqlite3_get_autocommit(s->db)) {
		sqlite3_stmt *r = cached(s, ST_ROLLBACK, "ROLLBACK", NULL);
		if (r)
			sqlite3_step(r);
	}
	/* The meta update rolled back with the trial; write it again next time. */
	s->meta_done[0] = '\0';
	return -1;
}

/* ---- sessions: read ---- */

static const char session_cols[] =
	"s.id, s.subject, s.protocol_name, s.protocol_path, s.protocol_text, s.protocol_sha256,"
	" s.stimuli_path, s.stimuli_sha256, s.rig_text, s.seed, s.version, s.timing_mode,"
	" s.refresh_hz, s.observer, s.started_utc, s.ended_utc, s.status,"
	" (SELECT count(*) FROM trials t WHERE t.session_id = s.id),"
	" s.screen_width_cm, s.screen_height_cm, s.screen_width_px, s.screen_height_px,"
	" s.distance_cm, s.nominal_hz, s.stim_deg";

static void copy_hash(char out[65], sqlite3_stmt *st, int i)
{
	const char *t = col_text(st, i);
	snprintf(out, 65, "%s", t ? t : "");
}

static void read_session(sqlite3_stmt *st, struct store_session *ss)
{
	memset(ss, 0, sizeof *ss);
	snprintf(ss->id, sizeof ss->id, "%s", col_text(st, 0) ? col_text(st, 0) : "");
	ss->subject = col_dup(st, 1);
	ss->protocol_name = col_dup(st, 2);
	ss->protocol_path = col_dup(st, 3);
	ss->protocol_text = col_dup(st, 4);
	copy_hash(ss->protocol_sha256, st, 5);
	ss->stimuli_path = col_dup(st, 6);
	copy_hash(ss->stimuli_sha256, st, 7);
	ss->rig_text = col_dup(st, 8);
	ss->seed = (uint64_t)sqlite3_column_int64(st, 9);
	ss->version = col_dup(st, 10);
	ss->timing_mode = col_dup(st, 11);
	ss->refresh_hz = sqlite3_column_double(st, 12);
	ss->observer = col_dup(st, 13);
	ss->started_utc = col_dup(st, 14);
	ss->ended_utc = col_dup(st, 15);
	const char *status = col_text(st, 16);
	ss->status = STORE_INTERRUPTED;
	if (status)
		store_status_parse(status, &ss->status);
	ss->ntrials = (size_t)sqlite3_column_int64(st, 17);
	ss->screen_width_cm = sqlite3_column_double(st, 18);
	ss->screen_height_cm = sqlite3_column_double(st, 19);
	ss->screen_width_px = sqlite3_column_int(st, 20);
	ss->screen_height_px = sqlite3_column_int(st, 21);
	ss->distance_cm = sqlite3_column_double(st, 22);
	ss->nominal_hz = sqlite3_column_double(st, 23);
	ss->stim_deg = sqlite3_column_double(st, 24);
}

void store_session_clear(struct store_session *ss)
{
	if (!ss)
		return;
	free(ss->subject);
	free(ss->protocol_name);
	free(ss->protocol_path);
	free(ss->protocol_text);
	free(ss->stimuli_path);
	free(ss->rig_text);
	free(ss->version);
	free(ss->timing_mode);
	free(ss->observer);
	free(ss->started_utc);
	free(ss->ended_utc);
	memset(ss, 0, sizeof *ss);
}

/* Finds the one session whose id starts with PREFIX (8+ characters, or the whole id). */
static int find_session(struct store *s, const char *prefix, sqlite3_stmt **row, char **err)
{
	size_t len = prefix ? strlen(prefix) : 0;
	if (len < 8 || len > 36) {
		set_err(err, "session ID '%s' is too short: give at least 8 characters of it",
			prefix ? prefix : "");
		return -1;
	}
	char *sql = xasprintf("SELECT %s FROM sessions s WHERE substr(s.id, 1, ?2) = ?1 LIMIT 2",
			      session_cols);
	sqlite3_stmt *st = prep(s, sql, err, "reading a session");
	free(sql);
	if (!st)
		return -1;
	bind_text(st, 1, prefix);
	sqlite3_bind_int(st, 2, (int)len);
	int rc = sqlite3_step(st);
	if (rc == SQLITE_DONE) {
		sqlite3_finalize(st);
		set_err(err, "%s: no session %s", s->path, prefix);
		return -1;
	}
	if (rc != SQLITE_ROW) {
		sqlite3_finalize(st);
		return db_fail(s, err, "reading a session");
	}
	*row = st;
	return 0;
}

int store_session_get(struct store *s, const char *id, struct store_session *out, char **err)
{
	sqlite3_stmt *st = NULL;
	if (find_session(s, id, &st, err))
		return -1;
	read_session(st, out);
	int rc = sqlite3_step(st);
	sqlite3_finalize(st);
	if (rc == SQLITE_ROW) {
		store_session_clear(out);
		set_err(err, "session ID '%s' matches more than one session: give more of it", id);
		return -1;
	}
	return 0;
}

int store_sessions_list(struct store *s, const char *subject, struct store_session **out,
			size_t *n, char **err)
{
	*out = NULL;
	*n = 0;
	char *sql = xasprintf("SELECT %s FROM sessions s WHERE ?1 IS NULL OR s.subject = ?1"
			      " ORDER BY s.started_utc, s.id", session_cols);
	sqlite3_stmt *st = prep(s, sql, err, "listing sessions");
	free(sql);
	if (!st)
		return -1;
	bind_text(st, 1, subject);
	size_t cap = 0;
	struct store_session *v = NULL;
	int rc;
	while ((rc = sqlite3_step(st)) == SQLITE_ROW) {
		if (*n == cap) {
			cap = cap ? cap * 2 : 8;
			v = xrealloc(v, cap * sizeof *v);
		}
		read_session(st, &v[(*n)++]);
	}
	sqlite3_finalize(st);
	if (rc != SQLITE_DONE) {
		store_sessions_free(v, *n);
		*n = 0;
		return db_fail(s, err, "listing sessions");
	}
	*out = v;
	return 0;
}

void store_sessions_free(struct store_session *v, size_t n)
{
	for (size_t i = 0; i < n; i++)
		store_session_clear(&v[i]);
	free(v);
}

int store_trial_count(struct store *s, const char *session_id, size_t *count, int *next,
		      char **err)
{
	sqlite3_stmt *st = prep(s, "SELECT count(*), coalesce(max(trial) + 1, 0) FROM trials"
				" WHERE session_id = ?1", err, "counting trials");
	if (!st)
		return -1;
	bind_text(st, 1, session_id);
	if (sqlite3_step(st) != SQLITE_ROW) {
		sqlite3_finalize(st);
		return db_fail(s, err, "counting trials");
	}
	if (count)
		*count = (size_t)sqlite3_column_int64(st, 0);
	if (next)
		*next = sqlite3_column_int(st, 1);
	sqlite3_finalize(st);
	return 0;
}

/* ---- trials: read ---- */

static const char trial_cols[] =
	"trial, block, block_name, block_trial, practice, stim, image, category, choice, level,"
	" source, labels, response_key, response, response_category, correct, rt_ms, timed_out,"
	" anticipation, key_sdl_ms, frames_planned, frames_actual, dropped_frames, timing_ok,"
	" onset_ns, offset_ns, start_ns, staircase, level_requested, repeat_of";
enum { TC_LABELS = 11 };

/* Fills T from the current row; strings are borrowed from the statement. Labels are left to
 * the caller (column TC_LABELS). */
static void read_trial(sqlite3_stmt *st, struct store_trial *t)
{
	t->trial = sqlite3_column_int(st, 0);
	t->block = sqlite3_column_int(st, 1);
	t->block_name = col_text(st, 2);
	t->block_trial = sqlite3_column_int(st, 3);
	t->practice = sqlite3_column_int(st, 4) != 0;
	t->stim = col_int_or(st, 5, -1);
	t->image = col_text(st, 6);
	t->category = col_text(st, 7);
	t->choice = col_int_or(st, 8, -1);
	t->has_level = !col_null(st, 9);
	t->level = sqlite3_column_double(st, 9);
	t->source = col_text(st, 10);
	t->response_key = col_text(st, 12);
	t->response = col_int_or(st, 13, -1);
	t->response_category = col_text(st, 14);
	t->correct = col_int_or(st, 15, -1);
	t->has_rt = !col_null(st, 16);
	t->rt_ms = sqlite3_column_double(st, 16);
	t->timed_out = sqlite3_column_int(st, 17) != 0;
	t->anticipation = sqlite3_column_int(st, 18) != 0;
	t->key_sdl_ms = sqlite3_column_int64(st, 19);
	t->frames_planned = sqlite3_column_int(st, 20);
	t->frames_actual = sqlite3_column_int(st, 21);
	t->dropped_frames = sqlite3_column_int(st, 22);
	t->timing_ok = sqlite3_column_int(st, 23) != 0;
	t->onset_ns = sqlite3_column_int64(st, 24);
	t->offset_ns = sqlite3_column_int64(st, 25);
	t->start_ns = sqlite3_column_int64(st, 26);
	t->staircase = col_int_or(st, 27, -1);
	t->has_level_requested = !col_null(st, 28);
	t->level_requested = sqlite3_column_double(st, 28);
	t->repeat_of = col_int_or(st, 29, -1);
}

/* A JSON array of strings parsed into a malloc'd vector of malloc'd strings. */
static char **parse_string_array(const char *json, size_t *n)
{
	*n = 0;
	if (!json)
		return NULL;
	cJSON *a = cJSON_Parse(json);
	if (!cJSON_IsArray(a)) {
		cJSON_Delete(a);
		return NULL;
	}
	size_t k = (size_t)cJSON_GetArraySize(a);
	char **v = xcalloc(k ? k : 1, sizeof *v);
	size_t i = 0;
	for (cJSON *e = a->child; e; e = e->next, i++) {
		const char *sv = cJSON_GetStringValue(e);
		if (!sv) {   /* a choices object: take its category */
			sv = cJSON_GetStringValue(cJSON_GetObjectItemCaseSensitive(e, "category"));
		}
		v[i] = xstrdup(sv ? sv : "");
	}
	cJSON_Delete(a);
	*n = k;
	return v;
}

static void free_strings(char **v, size_t n)
{
	for (size_t i = 0; i < n; i++)
		free(v[i]);
	free(v);
}

static char *sdup(const char *s)
{
	return s ? xstrdup(s) : NULL;
}

static int session_label_names(struct store *s, const char *session_id, char ***names, size_t *n,
			       char **err)
{
	*names = NULL;
	*n = 0;
	sqlite3_stmt *st = prep(s, "SELECT label_names FROM sessions WHERE id = ?1", err,
				"reading label names");
	if (!st)
		return -1;
	bind_text(st, 1, session_id);
	int rc = sqlite3_step(st);
	if (rc == SQLITE_ROW)
		*names = parse_string_array(col_text(st, 0), n);
	sqlite3_finalize(st);
	if (rc != SQLITE_ROW && rc != SQLITE_DONE)
		return db_fail(s, err, "reading label names");
	return 0;
}

int store_trials_load(struct store *s, const char *session_id, struct store_trial **out,
		      size_t *n, char **err)
{
	*out = NULL;
	*n = 0;
	char **names;
	size_t nnames;
	if (session_label_names(s, session_id, &names, &nnames, err))
		return -1;
	char *sql = xasprintf("SELECT %s, (SELECT subject FROM sessions WHERE id = ?1)"
			      " FROM trials WHERE session_id = ?1 ORDER BY trial", trial_cols);
	sqlite3_stmt *st = prep(s, sql, err, "reading trials");
	free(sql);
	if (!st) {
		free_strings(names, nnames);
		return -1;
	}
	bind_text(st, 1, session_id);
	size_t cap = 0;
	struct store_trial *v = NULL;
	int rc;
	while ((rc = sqlite3_step(st)) == SQLITE_ROW) {
		if (*n == cap) {
			cap = cap ? cap * 2 : 64;
			v = xrealloc(v, cap * sizeof *v);
		}
		struct store_trial *t = &v[(*n)++];
		memset(t, 0, sizeof *t);
		read_trial(st, t);
		snprintf(t->session_id, sizeof t->session_id, "%s", session_id);
		t->subject = sdup(col_text(st, 30));
		t->block_name = sdup(t->block_name);
		t->image = sdup(t->image);
		t->category = sdup(t->category);
		t->source = sdup(t->source);
		t->response_key = sdup(t->response_key);
		t->response_category = sdup(t->response_category);
		size_t nv;
		char **vals = parse_string_array(col_text(st, TC_LABELS), &nv);
		char **nm = xcalloc(nnames ? nnames : 1, sizeof *nm);
		char **vv = xcalloc(nnames ? nnames : 1, sizeof *vv);
		for (size_t k = 0; k < nnames; k++) {
			nm[k] = xstrdup(names[k]);
			vv[k] = k < nv ? xstrdup(vals[k]) : NULL;
		}
		free_strings(vals, nv);
		t->nlabels = nnames;
		t->label_names = (const char *const *)nm;
		t->label_values = (const char *const *)vv;
	}
	sqlite3_finalize(st);
	free_strings(names, nnames);
	if (rc != SQLITE_DONE) {
		store_trials_free(v, *n);
		*n = 0;
		return db_fail(s, err, "reading trials");
	}
	*out = v;
	return 0;
}

void store_trials_free(struct store_trial *v, size_t n)
{
	for (size_t i = 0; i < n; i++) {
		struct store_trial *t = &v[i];
		free((char *)t->subject);
		free((char *)t->block_name);
		free((char *)t->image);
		free((char *)t->category);
		free((char *)t->source);
		free((char *)t->response_key);
		free((char *)t->response_category);
		for (size_t k = 0; k < t->nlabels; k++) {
			free((char *)t->label_names[k]);
			free((char *)t->label_values[k]);
		}
		free((void *)t->label_names);
		free((void *)t->label_values);
	}
	free(v);
}

int store_frames_load(struct store *s, const char *session_id, int trial, int64_t **flips,
		      size_t *n, char **err)
{
	*flips = NULL;
	*n = 0;
	sqlite3_stmt *st = prep(s, "SELECT flips FROM frames WHERE session_id = ?1 AND trial = ?2",
				err, "reading frame times");
	if (!st)
		return -1;
	bind_text(st, 1, session_id);
	sqlite3_bind_int(st, 2, trial);
	int rc = sqlite3_step(st);
	if (rc == SQLITE_ROW) {
		const unsigned char *b = sqlite3_column_blob(st, 0);
		size_t k = (size_t)sqlite3_column_bytes(st, 0) / 8;
		if (b && k) {
			int64_t *v = xmalloc(k * sizeof *v);
			for (size_t i = 0; i < k; i++) {
				uint64_t x = 0;
				for (int j = 7; j >= 0; j--)
					x = (x << 8) | b[i * 8 + (size_t)j];
				v[i] = (int64_t)x;
			}
			*flips = v;
			*n = k;
		}
	}
	sqlite3_finalize(st);
	if (rc != SQLITE_ROW && rc != SQLITE_DONE)
		return db_fail(s, err, "reading frame times");
	return 0;
}

int store_events_load(struct store *s, const char *session_id, struct store_event_row **out,
		      size_t *n, char **err)
{
	*out = NULL;
	*n = 0;
	sqlite3_stmt *st = prep(s, "SELECT seq, mono_ns, kind, detail FROM events"
				" WHERE session_id = ?1 ORDER BY seq", err, "reading events");
	if (!st)
		return -1;
	bind_text(st, 1, session_id);
	size_t cap = 0;
	struct store_event_row *v = NULL;
	int rc;
	while ((rc = sqlite3_step(st)) == SQLITE_ROW) {
		if (*n == cap) {
			cap = cap ? cap * 2 : 16;
			v = xrealloc(v, cap * sizeof *v);
		}
		struct store_event_row *e = &v[(*n)++];
		e->seq = sqlite3_column_int(st, 0);
		e->mono_ns = sqlite3_column_int64(st, 1);
		e->kind = col_dup(st, 2);
		e->detail = col_dup(st, 3);
	}
	sqlite3_finalize(st);
	if (rc != SQLITE_DONE) {
		store_events_free(v, *n);
		*n = 0;
		return db_fail(s, err, "reading events");
	}
	*out = v;
	return 0;
}

void store_events_free(struct store_event_row *v, size_t n)
{
	for (size_t i = 0; i < n; i++) {
		free(v[i].kind);
		free(v[i].detail);
	}
	free(v);
}

/* ---- streaming iterator ---- */

struct iter_session {
	char **labels;       /* this session's label names */
	size_t nlabels;
	size_t *map;         /* label k of the session -> index in the union */
	char **choices;
	size_t nchoices;
};

struct store_iter {
	struct store *s;
	struct store_session *sessions;
	size_t nsessions;
	struct iter_session *meta;
	size_t cur;          /* session being read */
	sqlite3_stmt *st;    /* trials of sessions[cur] */
	bool bound;
	char **names;        /* union of label names */
	size_t nnames;
	const char **values; /* per row, borrowed from json */
	cJSON *json;         /* the current row's labels */
	struct store_trial row;
};

static size_t union_add(struct store_iter *it, const char *name)
{
	for (size_t i = 0; i < it->nnames; i++)
		if (!strcmp(it->names[i], name))
			return i;
	it->names = xrealloc(it->names, (it->nnames + 1) * sizeof *it->names);
	it->names[it->nnames] = xstrdup(name);
	return it->nnames++;
}

static int session_meta(struct store *s, const char *id, struct iter_session *m, char **err)
{
	sqlite3_stmt *st = prep(s, "SELECT label_names, choices FROM sessions WHERE id = ?1", err,
				"reading a session");
	if (!st)
		return -1;
	bind_text(st, 1, id);
	int rc = sqlite3_step(st);
	if (rc == SQLITE_ROW) {
		m->labels = parse_string_array(col_text(st, 0), &m->nlabels);
		m->choices = parse_string_array(col_text(st, 1), &m->nchoices);
	}
	sqlite3_finalize(st);
	if (rc != SQLITE_ROW && rc != SQLITE_DONE)
		return db_fail(s, err, "reading a session");
	return 0;
}

int store_iter_open(struct store *s, const char *session, const char *subject,
		    struct store_iter **out, char **err)
{
	*out = NULL;
	struct store_iter *it = xcalloc(1, sizeof *it);
	it->s = s;
	if (session) {
		it->sessions = xcalloc(1, sizeof *it->sessions);
		if (store_session_get(s, session, it->sessions, err)) {
			free(it->sessions);
			free(it);
			return -1;
		}
		it->nsessions = 1;
	} else if (store_sessions_list(s, subject, &it->sessions, &it->nsessions, err)) {
		free(it);
		return -1;
	}
	it->meta = xcalloc(it->nsessions ? it->nsessions : 1, sizeof *it->meta);
	for (size_t i = 0; i < it->nsessions; i++) {
		struct iter_session *m = &it->meta[i];
		if (session_meta(s, it->sessions[i].id, m, err)) {
			store_iter_close(it);
			return -1;
		}
		m->map = xcalloc(m->nlabels ? m->nlabels : 1, sizeof *m->map);
		for (size_t k = 0; k < m->nlabels; k++)
			m->map[k] = union_add(it, m->labels[k]);
	}
	it->values = xcalloc(it->nnames ? it->nnames : 1, sizeof *it->values);
	char *sql = xasprintf("SELECT %s FROM trials WHERE session_id = ?1 ORDER BY trial",
			      trial_cols);
	it->st = prep(s, sql, err, "reading trials");
	free(sql);
	if (!it->st) {
		store_iter_close(it);
		return -1;
	}
	*out = it;
	return 0;
}

int store_iter_next(struct store_iter *it, const struct store_trial **row,
		    const struct store_session **ss, char **err)
{
	cJSON_Delete(it->json);
	it->json = NULL;
	while (it->cur < it->nsessions) {
		const struct store_session *cs = &it->sessions[it->cur];
		if (!it->bound) {
			sqlite3_reset(it->st);
			bind_text(it->st, 1, cs->id);
			it->bound = true;
		}
		int rc = sqlite3_step(it->st);
		if (rc == SQLITE_DONE) {
			it->cur++;
			it->bound = false;
			continue;
		}
		if (rc != SQLITE_ROW)
			return db_fail(it->s, err, "reading trials");
		struct store_trial *t = &it->row;
		memset(t, 0, sizeof *t);
		read_trial(it->st, t);
		memcpy(t->session_id, cs->id, sizeof t->session_id);
		t->subject = cs->subject;
		const struct iter_session *m = &it->meta[it->cur];
		for (size_t k = 0; k < it->nnames; k++)
			it->values[k] = NULL;
		const char *lj = col_text(it->st, TC_LABELS);
		if (lj && m->nlabels) {
			it->json = cJSON_Parse(lj);
			size_t k = 0;
			for (cJSON *e = it->json ? it->json->child : NULL; e && k < m->nlabels;
			     e = e->next, k++)
				it->values[m->map[k]] = cJSON_GetStringValue(e);
		}
		t->nlabels = it->nnames;
		t->label_names = (const char *const *)it->names;
		t->label_values = it->values;
		*row = t;
		if (ss)
			*ss = cs;
		return 1;
	}
	return 0;
}

void store_iter_close(struct store_iter *it)
{
	if (!it)
		return;
	sqlite3_finalize(it->st);
	cJSON_Delete(it->json);
	for (size_t i = 0; it->meta && i < it->nsessions; i++) {
		free_strings(it->meta[i].labels, it->meta[i].nlabels);
		free_strings(it->meta[i].choices, it->meta[i].nchoices);
		free(it->meta[i].map);
	}
	free(it->meta);
	store_sessions_free(it->sessions, it->nsessions);
	free_strings(it->names, it->nnames);
	free(it->values);
	free(it);
}

const struct store_session *store_iter_sessions(const struct store_iter *it, size_t *n)
{
	*n = it->nsessions;
	return it->sessions;
}

const char *const *store_iter_label_names(const struct store_iter *it, size_t *n)
{
	*n = it->nnames;
	return (const char *const *)it->names;
}

const char *const *store_iter_choices(const struct store_iter *it, size_t session_index,
				      size_t *n)
{
	if (session_index >= it->nsessions) {
		*n = 0;
		return NULL;
	}
	*n = it->meta[session_index].nchoices;
	return (const char *const *)it->meta[session_index].choices;
}

/* ---- merge ---- */

static const char merge_session_cols[] =
	"id, subject, protocol_name, protocol_path, protocol_text, protocol_sha256, stimuli_path,"
	" stimuli_sha256, rig_text, seed, version, timing_mode, refresh_hz, started_utc, ended_utc,"
	" status, choices, label_names, observer, screen_width_cm, screen_height_cm,"
	" screen_width_px, screen_height_px, distance_cm, nominal_hz, stim_deg, owner_pid,"
	" owner_host";

static const char merge_trial_cols[] =
	"session_id, trial, block, block_name, block_trial, practice, stim, image, category,"
	" choice, level, source, labels, response_key, response, response_category, correct,"
	" rt_ms, timed_out, frames_planned, frames_actual, dropped_frames, timing_ok, onset_ns,"
	" offset_ns, start_ns, staircase, anticipation, key_sdl_ms, level_requested, repeat_of";

/* Runs SQL (constant text with %s for column lists) and adds the number of changed rows. */
static int merge_step(struct store *s, const char *sql, size_t *count, char **err)
{
	sqlite3_stmt *st = prep(s, sql, err, "merging");
	if (!st)
		return -1;
	int rc = sqlite3_step(st);
	sqlite3_finalize(st);
	if (rc != SQLITE_DONE && rc != SQLITE_ROW)
		return db_fail(s, err, "merging");
	if (count)
		*count += (size_t)sqlite3_changes(s->db);
	return 0;
}

static int count_query(struct store *s, const char *sql, size_t *out, char **err)
{
	sqlite3_stmt *st = prep(s, sql, err, "merging");
	if (!st)
		return -1;
	int rc = sqlite3_step(st);
	if (rc == SQLITE_ROW)
		*out = (size_t)sqlite3_column_int64(st, 0);
	sqlite3_finalize(st);
	if (rc != SQLITE_ROW)
		return db_fail(s, err, "merging");
	return 0;
}

/* Copies SRC (which may be in WAL mode) into a new temporary file with the current schema, so an
 * old or read-only source can be read without writing to it. *TMP gets the file's path (caller unlinks). */
static int migrated_copy(const char *src, char **tmp, char **err)
{
	const char *dir = getenv("TMPDIR");
	char *path = xasprintf("%s/tachist-merge-XXXXXX", dir && *dir ? dir : "/tmp");
	int fd = mkstemp(path);
	if (fd < 0) {
		set_err(err, "cannot make a temporary copy of %s: %s", src, strerror(errno));
		free(path);
		return -1;
	}
	close(fd);
	struct store *from = NULL, *to = NULL;
	int ret = -1;
	int v;
	if (open_read(src, &from, &v, NULL, err) || open_raw(path, OPEN_WRITE, &to, err))
		goto done;
	sqlite3_backup *b = sqlite3_backup_init(to->db, "main", from->db, "main");
	if (!b) {
		db_fail(to, err, "copying the source");
		goto done;
	}
	int rc = sqlite3_backup_step(b, -1);
	sqlite3_backup_finish(b);
	if (rc != SQLITE_DONE) {
		db_fail(from, err, "copying the source");
		goto done;
	}
	store_close(to);
	to = NULL;
	if (store_open(path, &to, err))
		goto done;
	ret = 0;
done:
	store_close(from);
	store_close(to);
	if (ret) {
		unlink(path);
		free(path);
	} else {
		*tmp = path;
	}
	return ret;
}

static void unlink_db(const char *path)
{
	char *w = xasprintf("%s-wal", path), *m = xasprintf("%s-shm", path);
	unlink(path);
	unlink(w);
	unlink(m);
	free(w);
	free(m);
}

int store_merge_from(struct store *s, const char *src_path, struct store_merge_stats *out,
		     char **err)
{
	struct store_merge_stats st = {0};
	struct stat a, b;
	if (stat(src_path, &b)) {
		set_err(err, "%s: %s", src_path, strerror(errno));
		return -1;
	}
	if (!stat(s->path, &a) && a.st_dev == b.st_dev && a.st_ino == b.st_ino) {
		set_err(err, "%s: is the database being merged into", src_path);
		return -1;
	}
	/* Look at the source's schema version without changing the file. */
	struct store *peek;
	int v = 0, ntables = 0;
	bool imm;
	if (open_read(src_path, &peek, &v, &imm, err))
		return -1;
	if (table_count(peek, &ntables, err)) {
		store_close(peek);
		return -1;
	}
	store_close(peek);
	st.source_version = v;
	if (v == 0 || ntables == 0) {
		set_err(err, "%s: not a tachist database", src_path);
		return -1;
	}
	if (v > STORE_SCHEMA_VERSION) {
		set_err(err, "%s: schema version %d is newer than this tachist understands (%d); "
			"merge with a newer tachist", src_path, v, STORE_SCHEMA_VERSION);
		return -1;
	}
	char *tmp = NULL;
	const char *attach_path = src_path;
	/* An old schema, or a file only readable as immutable (ATTACH could not read it), is read
	 * through a private copy. */
	if (v < STORE_SCHEMA_VERSION || imm) {
		if (migrated_copy(src_path, &tmp, err))
			return -1;
		attach_path = tmp;
	}
	int ret = -1;
	bool attached = false, in_tx = false;
	sqlite3_stmt *at = prep(s, "ATTACH DATABASE ?1 AS src", err, "opening the source");
	if (!at)
		goto done;
	bind_text(at, 1, attach_path);
	int rc = sqlite3_step(at);
	sqlite3_finalize(at);
	if (rc != SQLITE_DONE) {
		db_fail(s, err, "opening the source");
		goto done;
	}
	attached = true;
	if (exec(s, "BEGIN IMMEDIATE", err, "merging"))
		goto done;
	in_tx = true;
	char *q;
	/* Sessions the target lacks. */
	q = xasprintf("INSERT INTO main.sessions (%s) SELECT %s FROM src.sessions"
		      " WHERE id NOT IN (SELECT id FROM main.sessions)", merge_session_cols,
		      merge_session_cols);
	rc = merge_step(s, q, &st.sessions_added, err);
	free(q);
	if (rc)
		goto done;
	/* Sessions both have: a finished state in the source wins over running or interrupted. */
	if (merge_step(s, "UPDATE main.sessions AS m SET status = x.status, ended_utc = x.ended_utc,"
		       " refresh_hz = coalesce(m.refresh_hz, x.refresh_hz),"
		       " choices = coalesce(m.choices, x.choices),"
		       " label_names = coalesce(m.label_names, x.label_names)"
		       " FROM src.sessions AS x WHERE x.id = m.id"
		       " AND m.status IN ('running', 'interrupted')"
		       " AND x.status IN ('complete', 'aborted')", &st.sessions_updated, err))
		goto done;
	/* Trials both hold with different content stay as the target has them; count them. */
	if (count_query(s, "SELECT count(*) FROM src.trials x JOIN main.trials m"
			" ON m.session_id = x.session_id AND m.trial = x.trial"
			" WHERE m.image IS NOT x.image OR m.response IS NOT x.response"
			" OR m.rt_ms IS NOT x.rt_ms OR m.onset_ns IS NOT x.onset_ns",
			&st.trials_conflicting, err))
		goto done;
	q = xasprintf("INSERT OR IGNORE INTO main.trials (%s) SELECT %s FROM src.trials",
		      merge_trial_cols, merge_trial_cols);
	rc = merge_step(s, q, &st.trials_added, err);
	free(q);
	if (rc)
		goto done;
	if (merge_step(s, "INSERT OR IGNORE INTO main.frames (session_id, trial, n, flips)"
		       " SELECT session_id, trial, n, flips FROM src.frames", NULL, err))
		goto done;
	if (merge_step(s, "INSERT OR IGNORE INTO main.events (session_id, seq, mono_ns, kind, detail)"
		       " SELECT session_id, seq, mono_ns, kind, detail FROM src.events",
		       &st.events_added, err))
		goto done;
	if (exec(s, "COMMIT", err, "finishing the merge"))
		goto done;
	in_tx = false;
	ret = 0;
done:
	if (in_tx)
		sqlite3_exec(s->db, "ROLLBACK", NULL, NULL, NULL);
	if (attached)
		sqlite3_exec(s->db, "DETACH DATABASE src", NULL, NULL, NULL);
	if (tmp) {
		unlink_db(tmp);
		free(tmp);
	}
	if (out)
		*out = st;
	return ret;
}
