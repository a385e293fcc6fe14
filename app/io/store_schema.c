/* store_schema — what a database file is, its schema and the migrations between versions.
 *
 * The tables sessions and trials are generated from the column tables (store_columns.c);
 * frames and events are written out here. A file is ours when it carries our application id
 * (PRAGMA application_id, set since schema 4) or, for files written before that, when it has a
 * schema version 1-3 and the sessions and trials tables. Nothing here writes to a file that is
 * not ours.
 *
 * Migrations run in one transaction, each taking the file from version K to K + 1. Version 4
 * rebuilds sessions (its status words changed) and adds the trial columns the table has and the
 * file lacks; version 5 only adds columns (add_missing_columns on both tables). Called by
 * store.c when opening and by store_pool.c for old sources. */
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "diag.h"
#include "store_int.h"

/* ---- column lists ---- */

static const char *sql_type(enum store_type t)
{
	return store_type_sql(t, false);
}

char *store_col_list(const struct store_table *t, const char *prefix, bool with_json)
{
	size_t len = 1;
	for (size_t i = 0; i < t->ncols; i++)
		len += strlen(prefix) + strlen(t->cols[i].name) + 2;
	char *v = xmalloc(len), *q = v;
	*q = '\0';
	for (size_t i = 0; i < t->ncols; i++) {
		if (t->cols[i].type == STORE_JSON && !with_json)
			continue;
		q += sprintf(q, "%s%s%s", q == v ? "" : ", ", prefix, t->cols[i].name);
	}
	return v;
}

int store_col_index(const struct store_table *t, const char *name)
{
	for (size_t i = 0; i < t->ncols; i++)
		if (!strcmp(t->cols[i].name, name))
			return (int)i;
	return -1;
}

/* "CREATE TABLE NAME (...)" of T. Caller frees. */
static char *create_sql(const struct store_table *t, const char *name)
{
	size_t len = 64 + strlen(name) + strlen(t->constraints) + strlen(t->options);
	for (size_t i = 0; i < t->ncols; i++)
		len += strlen(t->cols[i].name) + strlen(t->cols[i].constraint) + 16;
	char *v = xmalloc(len), *q = v;
	q += sprintf(q, "CREATE TABLE %s (", name);
	for (size_t i = 0; i < t->ncols; i++) {
		const struct store_column *c = &t->cols[i];
		q += sprintf(q, "%s%s %s%s%s", i ? ", " : "", c->name, sql_type(c->type),
			     c->constraint[0] ? " " : "", c->constraint);
	}
	sprintf(q, "%s) %s", t->constraints, t->options);
	return v;
}

static const char other_tables[] =
	"CREATE INDEX sessions_subject ON sessions(subject, started_utc);"
	"CREATE TABLE frames ("
	" session_id TEXT NOT NULL, trial INTEGER NOT NULL, n INTEGER NOT NULL, flips BLOB,"
	" PRIMARY KEY (session_id, trial),"
	" FOREIGN KEY (session_id, trial) REFERENCES trials(session_id, trial) ON DELETE CASCADE"
	") WITHOUT ROWID;"
	"CREATE TABLE events ("
	" session_id TEXT NOT NULL REFERENCES sessions(id) ON DELETE CASCADE,"
	" seq INTEGER NOT NULL, mono_ns INTEGER, kind TEXT NOT NULL, detail TEXT,"
	" PRIMARY KEY (session_id, seq)) WITHOUT ROWID;";

static int exec_owned(struct store *s, char *sql, char **err, const char *what)
{
	int rc = store_exec(s, sql, err, what);
	free(sql);
	return rc;
}

static int create_all(struct store *s, char **err)
{
	if (exec_owned(s, create_sql(&store_sessions_table, "sessions"), err, "creating the tables") ||
	    exec_owned(s, create_sql(&store_trials_table, "trials"), err, "creating the tables"))
		return -1;
	return store_exec(s, other_tables, err, "creating the tables");
}

/* ---- what a file is ---- */

int store_kind_read(struct store *s, struct store_kind *k, char **err)
{
	memset(k, 0, sizeof *k);
	/* One statement, so one consistent look even while another process creates the file. */
	sqlite3_stmt *st = store_prep(s, "SELECT (SELECT user_version FROM pragma_user_version),"
				      " (SELECT application_id FROM pragma_application_id),"
				      " (SELECT count(*) FROM sqlite_master WHERE type = 'table'),"
				      " (SELECT count(*) FROM sqlite_master WHERE type = 'table'"
				      " AND name IN ('sessions', 'trials'))", err,
				      "reading the schema");
	if (!st)
		return -1;
	if (sqlite3_step(st) != SQLITE_ROW) {
		store_db_fail(s, err, "reading the schema");
		sqlite3_finalize(st);
		return -1;
	}
	k->version = sqlite3_column_int(st, 0);
	k->app_id = sqlite3_column_int(st, 1);
	k->ntables = sqlite3_column_int(st, 2);
	int ours_tables = sqlite3_column_int(st, 3);
	sqlite3_finalize(st);
	k->empty = k->ntables == 0 && k->version == 0 &&
		   (k->app_id == 0 || k->app_id == STORE_APPLICATION_ID);
	k->ours = k->app_id == STORE_APPLICATION_ID ||
		  (k->app_id == 0 && k->version >= 1 && k->version <= 3 && ours_tables == 2);
	return 0;
}

int store_kind_check(const struct store_kind *k, const char *shown, char **err)
{
	if (k->empty)
		return 0;
	if (!k->ours) {
		store_set_err(err, "%s: not a tachist database (it was left as it is)", shown);
		return -1;
	}
	if (k->version > STORE_SCHEMA_VERSION) {
		store_set_err(err, "%s: schema version %d is newer than this tachist understands (%d); "
			      "use a newer tachist", shown, k->version, STORE_SCHEMA_VERSION);
		return -1;
	}
	return 0;
}

/* ---- migrations ---- */

/* Version 1 (the first layout) lacked the observer and the presentation settings of a session,
 * and the anticipation, SDL key stamp, requested level and repeat columns of a trial. */
static const char migrate_1_2[] =
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
	"CREATE INDEX IF NOT EXISTS sessions_subject ON sessions(subject, started_utc);";

/* Version 2 lacked the process that runs a session (pid and host name), so recovery could not
 * tell a live run from a crashed one. Sessions from version 2 have no owner. */
static const char migrate_2_3[] =
	"ALTER TABLE sessions ADD COLUMN owner_pid INTEGER;"
	"ALTER TABLE sessions ADD COLUMN owner_host TEXT;";

/* Columns of table NAME in the file, as a malloc'd vector of malloc'd names. */
static int file_columns(struct store *s, const char *name, char ***out, size_t *n, char **err)
{
	*out = NULL;
	*n = 0;
	sqlite3_stmt *st = store_prep(s, "SELECT name FROM pragma_table_info(?1)", err,
				      "reading the schema");
	if (!st)
		return -1;
	store_bind_text(st, 1, name);
	int rc;
	while ((rc = sqlite3_step(st)) == SQLITE_ROW) {
		*out = xrealloc(*out, (*n + 1) * sizeof **out);
		const char *c = store_col_text(st, 0);
		(*out)[(*n)++] = xstrdup(c ? c : "");
	}
	if (rc != SQLITE_DONE) {
		store_db_fail(s, err, "reading the schema");
		sqlite3_finalize(st);
		return -1;
	}
	sqlite3_finalize(st);
	return 0;
}

static bool has_name(char **v, size_t n, const char *name)
{
	for (size_t i = 0; i < n; i++)
		if (!strcmp(v[i], name))
			return true;
	return false;
}

static void free_names(char **v, size_t n)
{
	for (size_t i = 0; i < n; i++)
		free(v[i]);
	free(v);
}

/* ALTER TABLE ... ADD COLUMN for every column of T the file's table lacks. */
static int add_missing_columns(struct store *s, const struct store_table *t, char **err)
{
	char **have;
	size_t nhave;
	if (file_columns(s, t->name, &have, &nhave, err))
		return -1;
	int rc = 0;
	for (size_t i = 0; i < t->ncols && !rc; i++) {
		const struct store_column *c = &t->cols[i];
		if (has_name(have, nhave, c->name))
			continue;
		char *sql = xasprintf("ALTER TABLE %s ADD COLUMN %s %s %s", t->name, c->name,
				      sql_type(c->type), c->constraint);
		rc = exec_owned(s, sql, err, "migrating the schema");
	}
	free_names(have, nhave);
	return rc;
}

/* Rebuilds table T from its descriptor (SQLite cannot change a CHECK constraint in place):
 * a new table, the common columns copied, the old one dropped, the new one renamed. Foreign
 * keys are off during migrations, so dropping the old table deletes no trial. */
static int rebuild_table(struct store *s, const struct store_table *t, char **err)
{
	char **have;
	size_t nhave;
	if (file_columns(s, t->name, &have, &nhave, err))
		return -1;
	size_t len = 1;
	for (size_t i = 0; i < t->ncols; i++)
		len += strlen(t->cols[i].name) + 2;
	char *common = xmalloc(len), *q = common;
	*q = '\0';
	for (size_t i = 0; i < t->ncols; i++)
		if (has_name(have, nhave, t->cols[i].name))
			q += sprintf(q, "%s%s", q == common ? "" : ", ", t->cols[i].name);
	free_names(have, nhave);
	char *tmpname = xasprintf("%s_rebuilt", t->name);
	int rc = exec_owned(s, create_sql(t, tmpname), err, "migrating the schema");
	if (!rc)
		rc = exec_owned(s, xasprintf("INSERT INTO %s (%s) SELECT %s FROM %s", tmpname, common,
					     common, t->name), err, "migrating the schema");
	if (!rc)
		rc = exec_owned(s, xasprintf("DROP TABLE %s", t->name), err, "migrating the schema");
	if (!rc)
		rc = exec_owned(s, xasprintf("ALTER TABLE %s RENAME TO %s", tmpname, t->name), err,
				"migrating the schema");
	free(tmpname);
	free(common);
	return rc;
}

/* Version 3 lacked the application id, the ended-early status, the planned trial count of a
 * session and the response clock of a trial (every earlier response was read after a flip). */
static int migrate_3_4(struct store *s, char **err)
{
	if (rebuild_table(s, &store_sessions_table, err) ||
	    store_exec(s, "CREATE INDEX IF NOT EXISTS sessions_subject"
		       " ON sessions(subject, started_utc)", err, "migrating the schema") ||
	    add_missing_columns(s, &store_trials_table, err))
		return -1;
	return store_exec(s, "UPDATE trials SET rt_clock = 'frame' WHERE rt_clock IS NULL", err,
			  "migrating the schema");
}

/* Version 4 lacked the columns added since (the observer's design position and key mapping,
 * the response device and trigger codes, the display's luminance): every one is a plain added
 * column, so the step adds what the file lacks to both tables. A column added later in this
 * wave needs no new version as long as no file of version 5 has been written by a release. */
static int migrate_4_5(struct store *s, char **err)
{
	return add_missing_columns(s, &store_sessions_table, err) ||
	       add_missing_columns(s, &store_trials_table, err) ? -1 : 0;
}

static int migrate_step(struct store *s, int from, char **err)
{
	switch (from) {
	case 1:
		return store_exec(s, migrate_1_2, err, "migrating the schema");
	case 2:
		return store_exec(s, migrate_2_3, err, "migrating the schema");
	case 3:
		return migrate_3_4(s, err);
	case 4:
		return migrate_4_5(s, err);
	default:
		store_set_err(err, "%s: no migration from schema version %d", store_path(s), from);
		return -1;
	}
}

int store_schema_update(struct store *s, char **err)
{
	/* The write lock first, then the version: two processes creating one new file both
	 * wait here, and the second finds the work done. */
	if (store_exec(s, "BEGIN IMMEDIATE", err, "starting the schema update"))
		return -1;
	struct store_kind k;
	if (store_kind_read(s, &k, err) || store_kind_check(&k, store_path(s), err))
		goto fail;
	if (k.version == STORE_SCHEMA_VERSION && k.app_id == STORE_APPLICATION_ID)
		return store_exec(s, "COMMIT", err, "finishing the schema update");
	if (k.empty) {
		if (create_all(s, err))
			goto fail;
	} else {
		for (int v = k.version; v < STORE_SCHEMA_VERSION; v++)
			if (migrate_step(s, v, err))
				goto fail;
	}
	char pragma[96];
	snprintf(pragma, sizeof pragma, "PRAGMA application_id = %d; PRAGMA user_version = %d;",
		 STORE_APPLICATION_ID, STORE_SCHEMA_VERSION);
	if (store_exec(s, pragma, err, "finishing the schema update") ||
	    store_exec(s, "COMMIT", err, "finishing the schema update"))
		goto fail;
	return 0;
fail:
	sqlite3_exec(s->db, "ROLLBACK", NULL, NULL, NULL);
	return -1;
}

/* ---- migrated copies ---- */

int store_migrated_copy(const char *src, char **tmp, char **err)
{
	const char *dir = getenv("TMPDIR");
	char *path = xasprintf("%s/tachist-copy-XXXXXX", dir && *dir ? dir : "/tmp");
	int fd = mkstemp(path);
	if (fd < 0) {
		store_set_err(err, "cannot make a temporary copy of %s: %s", src, strerror(errno));
		free(path);
		return -1;
	}
	close(fd);
	struct store *from = NULL, *to = NULL;
	int ret = -1;
	int v;
	if (store_open_read(src, &from, &v, NULL, err) ||
	    store_open_raw(path, OPEN_WRITE, &to, err))
		goto done;
	sqlite3_backup *b = sqlite3_backup_init(to->db, "main", from->db, "main");
	if (!b) {
		store_db_fail(to, err, "copying the source");
		goto done;
	}
	int rc = sqlite3_backup_step(b, -1);
	sqlite3_backup_finish(b);
	if (rc != SQLITE_DONE) {
		store_db_fail(from, err, "copying the source");
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
		store_unlink_db(path);
		free(path);
	} else {
		*tmp = path;
	}
	return ret;
}
