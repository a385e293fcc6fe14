/* store — opening and closing the SQLite database behind every session, and the helpers the
 * other store files share (app/io/store_int.h). The app/io/store*.c files are the only ones that
 * include sqlite3.h.
 *
 * One connection per struct store. A writer (store_open) first looks at what the file is
 * without writing to it: our application id, or an old tachist schema, or an empty file; any
 * other file is refused untouched. Then, inside one write transaction, it creates or migrates the
 * schema (store_schema.c), and only then switches to WAL with synchronous=FULL, foreign keys on
 * and a busy timeout. A reader (store_open_existing) opens the file read-only and never writes
 * to it: an old schema is read through a migrated temporary copy.
 *
 * The files of the module: store.c (this), store_columns.c (the column tables),
 * store_schema.c (schema and migrations), store_write.c (sessions, trials, events),
 * store_read.c (reads and the streaming iterator), store_pool.c (pooling databases). Every
 * statement is prepared from constant or generated text; user data only travels as bound
 * parameters. */
#include <assert.h>
#include <errno.h>
#include <fcntl.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <time.h>
#include <unistd.h>

#include "diag.h"
#include "store_int.h"
#include "store_pg.h"

/* Bytes of slack kept beside a database opened for writing: when the disk fills, deleting it
 * leaves room to mark the session ended (a status update needs a page or two in the WAL and
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

void store_reserve_release(struct store *s)
{
	if (!s->reserve)
		return;
	unlink(s->reserve);
	free(s->reserve);
	s->reserve = NULL;
}

/* ---- errors ---- */

void store_set_err(char **err, const char *fmt, ...)
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

int store_db_fail(struct store *s, char **err, const char *what)
{
	int rc = sqlite3_extended_errcode(s->db);
	const char *msg = sqlite3_errmsg(s->db);
	const char *name = s->shown ? s->shown : s->path;
	switch (rc & 0xff) {
	case SQLITE_FULL:
		store_reserve_release(s);
		store_set_err(err, "%s: %s: the disk is full or the database reached its size limit "
			      "(%s)", name, what, msg);
		break;
	case SQLITE_READONLY:
		store_set_err(err, "%s: %s: the database is read-only; check the permissions of the "
			      "file and its folder (%s)", name, what, msg);
		break;
	case SQLITE_BUSY:
	case SQLITE_LOCKED:
		store_set_err(err, "%s: %s: the database is locked by another program (waited %d ms)",
			      name, what, s->busy_ms);
		break;
	case SQLITE_NOTADB:
		store_set_err(err, "%s: not a database file", name);
		break;
	case SQLITE_CORRUPT:
		store_set_err(err, "%s: %s: the database file is damaged (%s)", name, what, msg);
		break;
	case SQLITE_IOERR:
		store_set_err(err, "%s: %s: input/output error (%s)", name, what, msg);
		break;
	case SQLITE_CANTOPEN:
		store_set_err(err, "%s: cannot open the database (%s)", name, msg);
		break;
	default:
		store_set_err(err, "%s: %s: %s", name, what, msg);
	}
	return -1;
}

/* ---- small helpers ---- */

int store_exec(struct store *s, const char *sql, char **err, const char *what)
{
	if (sqlite3_exec(s->db, sql, NULL, NULL, NULL) != SQLITE_OK)
		return store_db_fail(s, err, what);
	return 0;
}

sqlite3_stmt *store_prep(struct store *s, const char *sql, char **err, const char *what)
{
	sqlite3_stmt *st = NULL;
	if (sqlite3_prepare_v2(s->db, sql, -1, &st, NULL) != SQLITE_OK) {
		store_db_fail(s, err, what);
		return NULL;
	}
	return st;
}

sqlite3_stmt *store_cached(struct store *s, int which, const char *sql, char **err)
{
	if (!s->st[which])
		s->st[which] = store_prep(s, sql, err, "preparing a statement");
	else {
		sqlite3_reset(s->st[which]);
		sqlite3_clear_bindings(s->st[which]);
	}
	return s->st[which];
}

void store_bind_text(sqlite3_stmt *st, int i, const char *v)
{
	if (v)
		sqlite3_bind_text(st, i, v, -1, SQLITE_TRANSIENT);
	else
		sqlite3_bind_null(st, i);
}

const char *store_col_text(sqlite3_stmt *st, int i)
{
	return (const char *)sqlite3_column_text(st, i);
}

void store_utc_now(char out[32])
{
	struct timespec ts;
	clock_gettime(CLOCK_REALTIME, &ts);
	struct tm tm;
	gmtime_r(&ts.tv_sec, &tm);
	size_t k = strftime(out, 32, "%Y-%m-%dT%H:%M:%S", &tm);
	snprintf(out + k, 32 - k, ".%03dZ", (int)(ts.tv_nsec / 1000000));
}

/* This machine's host name (gethostname(2)), "" when unknown. */
void store_this_host(char out[256])
{
	if (gethostname(out, 256) != 0)
		out[0] = '\0';
	out[255] = '\0';
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

const char *store_path(const struct store *s)
{
	return s->shown ? s->shown : s->path;
}

/* ---- opening ---- */

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

int store_open_raw(const char *path, enum open_mode mode, struct store **out, char **err)
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
			store_db_fail(s, err, "opening");
		else
			store_set_err(err, "%s: cannot open the database (out of memory)", path);
		store_close(s);
		return -1;
	}
	sqlite3_extended_result_codes(s->db, 1);
	sqlite3_busy_timeout(s->db, s->busy_ms);
	*out = s;
	return 0;
}

/* True when a database we cannot read normally can be read as immutable: its WAL index cannot
 * be made (a read-only folder, or a full disk) and nothing waits in its WAL. */
static bool immutable_ok(struct store *s)
{
	int code = sqlite3_extended_errcode(s->db) & 0xff;
	bool no_write = access(s->path, W_OK) != 0;
	if (!((code == SQLITE_READONLY || code == SQLITE_CANTOPEN) && no_write) &&
	    code != SQLITE_IOERR && code != SQLITE_FULL)
		return false;
	char *wal = xasprintf("%s-wal", s->path);
	struct stat st;
	bool empty = stat(wal, &st) != 0 || st.st_size == 0;
	free(wal);
	return empty;
}

static int read_version(struct store *s, int *v, char **err)
{
	sqlite3_stmt *st = store_prep(s, "PRAGMA user_version", err, "reading the schema version");
	if (!st)
		return -1;
	int rc = sqlite3_step(st);
	if (rc != SQLITE_ROW) {
		store_db_fail(s, err, "reading the schema version");
		sqlite3_finalize(st);
		return -1;
	}
	*v = sqlite3_column_int(st, 0);
	sqlite3_finalize(st);
	return 0;
}

/* Moves *FROM into *ERR (or frees it). */
static void pass_err(char **err, char **from)
{
	if (err) {
		free(*err);
		*err = *from;
	} else {
		free(*from);
	}
	*from = NULL;
}

int store_open_read(const char *path, struct store **out, int *version, bool *immutable,
		    char **err)
{
	struct store *s;
	if (immutable)
		*immutable = false;
	if (store_open_raw(path, OPEN_READ, &s, err))
		return -1;
	char *first = NULL;
	if (read_version(s, version, &first)) {
		if (!immutable_ok(s)) {
			pass_err(err, &first);
			store_close(s);
			return -1;
		}
		free(first);
		store_close(s);
		if (store_open_raw(path, OPEN_IMMUTABLE, &s, err))
			return -1;
		if (read_version(s, version, err)) {
			store_close(s);
			return -1;
		}
		if (immutable)
			*immutable = true;
	}
	*out = s;
	return 0;
}

/* PRAGMA journal_mode = WAL, waiting up to the busy timeout while another connection holds the
 * file (switching the mode needs it alone; a file created a moment ago by another process may
 * still be in its hands). */
static int wal_on(struct store *s, char **err)
{
	for (int waited = 0;; waited += 10) {
		sqlite3_stmt *st = store_prep(s, "PRAGMA journal_mode = WAL", err, "setting up");
		if (!st)
			return -1;
		int rc = sqlite3_step(st);
		if (rc == SQLITE_ROW) {
			sqlite3_finalize(st);
			return 0;
		}
		if ((rc & 0xff) != SQLITE_BUSY || waited >= s->busy_ms) {
			store_db_fail(s, err, "switching to write-ahead logging");
			sqlite3_finalize(st);
			return -1;
		}
		sqlite3_finalize(st);
		struct timespec ts = {0, 10 * 1000 * 1000};
		nanosleep(&ts, NULL);
	}
}

int store_open(const char *path, struct store **out, char **err)
{
	assert(path && out);
	*out = NULL;
	struct store *s;
	if (store_open_raw(path, OPEN_WRITE, &s, err))
		return -1;
	struct store_kind k;
	char *first = NULL;
	/* Look before writing anything: a file that is not ours must stay as it is. */
	if (store_kind_read(s, &k, &first)) {
		if (!immutable_ok(s)) {
			pass_err(err, &first);
			goto fail;
		}
		/* A read-only folder: read it as it is. */
		free(first);
		store_close(s);
		return store_open_existing(path, out, err);
	}
	if (store_kind_check(&k, path, err))
		goto fail;
	bool ro = sqlite3_db_readonly(s->db, "main") == 1;
	if (k.version < STORE_SCHEMA_VERSION) {
		if (ro) {
			store_set_err(err, "%s: the database has schema version %d and needs migrating "
				      "to %d, but the file is read-only", path, k.version,
				      STORE_SCHEMA_VERSION);
			goto fail;
		}
		if (store_schema_update(s, err))
			goto fail;
	}
	if (!ro && (wal_on(s, err) || store_exec(s, "PRAGMA synchronous = FULL", err, "setting up")))
		goto fail;
	if (store_exec(s, "PRAGMA foreign_keys = ON", err, "setting up"))
		goto fail;
	if (!ro)
		reserve_make(s);
	*out = s;
	return 0;
fail:
	store_close(s);
	return -1;
}

/* A temporary copy TMP (a migrated file, or a server's schema) opened for a reader, named SHOWN
 * in messages; both are taken over, and TMP is removed on failure as by store_close. */
static int open_temp_reader(char *tmp, char *shown, struct store **out, char **err)
{
	struct store *s;
	if (store_open_raw(tmp, OPEN_READ, &s, err)) {
		store_unlink_db(tmp);
		free(tmp);
		free(shown);
		return -1;
	}
	s->reader = true;
	s->tmp = tmp;
	s->shown = shown;
	*out = s;
	return 0;
}

/* A PostgreSQL server as a reader's database: its schema copied into a temporary file. */
static int open_server_copy(const char *conninfo, const char *schema, struct store **out,
			    char **err)
{
	char *tmp;
	if (store_pg_fetch(conninfo, schema ? schema : STORE_PG_DEFAULT_SCHEMA, &tmp, err))
		return -1;
	struct store *s;
	if (open_temp_reader(tmp, store_pg_shown(conninfo), &s, err))
		return -1;
	if (store_exec(s, "PRAGMA query_only = 1", err, "setting up")) {
		store_close(s);
		return -1;
	}
	*out = s;
	return 0;
}

int store_open_existing(const char *path, struct store **out, char **err)
{
	return store_open_reader(path, NULL, out, err);
}

int store_open_reader(const char *path, const char *schema, struct store **out, char **err)
{
	assert(path && out);
	*out = NULL;
	if (store_pg_is_conninfo(path))
		return open_server_copy(path, schema, out, err);
	assert(!schema);
	struct stat sb;
	if (stat(path, &sb) != 0) {
		store_set_err(err, "no database at %s", path);
		return -1;
	}
	struct store *s;
	int v;
	if (store_open_read(path, &s, &v, NULL, err))
		return -1;
	s->reader = true;
	struct store_kind k;
	if (store_kind_read(s, &k, err) || store_kind_check(&k, path, err)) {
		store_close(s);
		return -1;
	}
	if (k.version < STORE_SCHEMA_VERSION) {
		/* An old schema: read a migrated copy; the file itself is not written. */
		store_close(s);
		char *tmp;
		if (store_migrated_copy(path, &tmp, err) ||
		    open_temp_reader(tmp, xstrdup(path), &s, err))
			return -1;
	}
	if (store_exec(s, "PRAGMA query_only = 1", err, "setting up")) {
		store_close(s);
		return -1;
	}
	*out = s;
	return 0;
}

void store_close(struct store *s)
{
	if (!s)
		return;
	for (int i = 0; i < ST_COUNT; i++)
		sqlite3_finalize(s->st[i]);
	sqlite3_close(s->db);
	store_reserve_release(s);
	if (s->tmp) {
		store_unlink_db(s->tmp);
		free(s->tmp);
	}
	free(s->shown);
	free(s->path);
	free(s);
}

void store_unlink_db(const char *path)
{
	char *w = xasprintf("%s-wal", path), *m = xasprintf("%s-shm", path);
	unlink(path);
	unlink(w);
	unlink(m);
	free(w);
	free(m);
}

int store_limit_pages(struct store *s, long max_pages, char **err)
{
	/* PRAGMA takes no bound parameters; the text is built from a number, never from user text. */
	char sql[64];
	snprintf(sql, sizeof sql, "PRAGMA max_page_count = %ld", max_pages);
	sqlite3_stmt *st = store_prep(s, sql, err, "limiting the database size");
	if (!st)
		return -1;
	int rc = sqlite3_step(st);
	if (rc != SQLITE_ROW && rc != SQLITE_DONE) {
		store_db_fail(s, err, "limiting the database size");
		sqlite3_finalize(st);
		return -1;
	}
	sqlite3_finalize(st);
	return 0;
}

int store_busy_timeout(struct store *s, int ms, char **err)
{
	if (sqlite3_busy_timeout(s->db, ms) != SQLITE_OK)
		return store_db_fail(s, err, "setting the busy timeout");
	s->busy_ms = ms;
	return 0;
}

int store_integrity_check(struct store *s, char **err)
{
	sqlite3_stmt *st = store_prep(s, "PRAGMA integrity_check", err, "checking integrity");
	if (!st)
		return -1;
	int rc = sqlite3_step(st);
	if (rc != SQLITE_ROW) {
		store_db_fail(s, err, "checking integrity");
		sqlite3_finalize(st);
		return -1;
	}
	const char *r = store_col_text(st, 0);
	int ret = 0;
	if (!r || strcmp(r, "ok")) {
		store_set_err(err, "%s: integrity check: %s", store_path(s), r ? r : "(no answer)");
		ret = -1;
	}
	sqlite3_finalize(st);
	return ret;
}
