/* store_pool — pooling: adding to one database everything another one holds that it lacks.
 *
 * Sessions are keyed by UUID and trials by (session, trial), so pooling needs no renumbering
 * and pooling the same file twice adds nothing. The source is checked first (its kind, its
 * version, PRAGMA quick_check) so a damaged or foreign source is named as such; an older or
 * only-immutably-readable source is read through a migrated temporary copy and never written.
 * Column lists come from the column tables. Called by `tachist pool`. */
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "diag.h"
#include "store_int.h"

/* Runs SQL and adds the number of changed rows to *COUNT (may be NULL). */
static int pool_step(struct store *s, const char *sql, size_t *count, char **err)
{
	sqlite3_stmt *st = store_prep(s, sql, err, "pooling");
	if (!st)
		return -1;
	int rc = sqlite3_step(st);
	if (rc != SQLITE_DONE && rc != SQLITE_ROW) {
		store_db_fail(s, err, "pooling");
		sqlite3_finalize(st);
		return -1;
	}
	sqlite3_finalize(st);
	if (count)
		*count += (size_t)sqlite3_changes(s->db);
	return 0;
}

static int pool_step_owned(struct store *s, char *sql, size_t *count, char **err)
{
	int rc = pool_step(s, sql, count, err);
	free(sql);
	return rc;
}

static int count_query(struct store *s, const char *sql, size_t *out, char **err)
{
	sqlite3_stmt *st = store_prep(s, sql, err, "pooling");
	if (!st)
		return -1;
	int rc = sqlite3_step(st);
	if (rc == SQLITE_ROW)
		*out = (size_t)sqlite3_column_int64(st, 0);
	else
		store_db_fail(s, err, "pooling");
	sqlite3_finalize(st);
	return rc == SQLITE_ROW ? 0 : -1;
}

/* Looks at the source without changing it: ours, not newer, not damaged. *VERSION gets its
 * schema version and *IMMUTABLE whether it could only be read as immutable. */
static int check_source(const char *src, int *version, bool *immutable, char **err)
{
	struct store *peek;
	if (store_open_read(src, &peek, version, immutable, err))
		return -1;
	struct store_kind k;
	int rc = store_kind_read(peek, &k, err);
	if (!rc && (k.empty || !k.ours)) {
		store_set_err(err, "%s: not a tachist database", src);
		rc = -1;
	}
	if (!rc && k.version > STORE_SCHEMA_VERSION) {
		store_set_err(err, "%s: schema version %d is newer than this tachist understands (%d); "
			      "pool with a newer tachist", src, k.version, STORE_SCHEMA_VERSION);
		rc = -1;
	}
	if (!rc) {
		sqlite3_stmt *st = store_prep(peek, "PRAGMA quick_check", err, "checking the source");
		int qc = st ? sqlite3_step(st) : SQLITE_ERROR;
		const char *r = qc == SQLITE_ROW ? store_col_text(st, 0) : NULL;
		if (st && qc != SQLITE_ROW)
			store_db_fail(peek, err, "checking the source");
		else if (st && (!r || strcmp(r, "ok")))
			store_set_err(err, "%s: the database file is damaged (%s)", src,
				      r ? r : "no answer");
		rc = st && r && !strcmp(r, "ok") ? 0 : -1;
		sqlite3_finalize(st);
	}
	store_close(peek);
	return rc;
}

/* The statements of one pooling, in order, against the attached source "src". */
static int pool_tables(struct store *s, struct store_pool_stats *st, char **err)
{
	char *scols = store_col_list(&store_sessions_table, "", true);
	char *tcols = store_col_list(&store_trials_table, "", true);
	int rc = -1;
	/* Sessions the target lacks. */
	if (pool_step_owned(s, xasprintf("INSERT INTO main.sessions (%s) SELECT %s FROM "
					 "src.sessions WHERE id NOT IN (SELECT id FROM "
					 "main.sessions)", scols, scols), &st->sessions_added, err))
		goto done;
	/* Sessions both have: a finished state in the source wins over running or interrupted. */
	if (pool_step(s, "UPDATE main.sessions AS m SET status = x.status, ended_utc = x.ended_utc,"
		      " refresh_hz = coalesce(m.refresh_hz, x.refresh_hz),"
		      " choices = coalesce(m.choices, x.choices),"
		      " label_names = coalesce(m.label_names, x.label_names)"
		      " FROM src.sessions AS x WHERE x.id = m.id"
		      " AND m.status IN ('running', 'interrupted')"
		      " AND x.status IN ('complete', 'aborted', 'ended-early')",
		      &st->sessions_updated, err))
		goto done;
	/* Trials both hold with different content stay as the target has them; count them. */
	if (count_query(s, "SELECT count(*) FROM src.trials x JOIN main.trials m"
			" ON m.session_id = x.session_id AND m.trial = x.trial"
			" WHERE m.image IS NOT x.image OR m.response IS NOT x.response"
			" OR m.rt_ms IS NOT x.rt_ms OR m.onset_ns IS NOT x.onset_ns",
			&st->trials_conflicting, err))
		goto done;
	if (pool_step_owned(s, xasprintf("INSERT OR IGNORE INTO main.trials (%s) SELECT %s FROM "
					 "src.trials", tcols, tcols), &st->trials_added, err))
		goto done;
	if (pool_step(s, "INSERT OR IGNORE INTO main.frames (session_id, trial, n, flips)"
		      " SELECT session_id, trial, n, flips FROM src.frames", NULL, err))
		goto done;
	if (pool_step(s, "INSERT OR IGNORE INTO main.events (session_id, seq, mono_ns, kind,"
		      " detail) SELECT session_id, seq, mono_ns, kind, detail FROM src.events",
		      &st->events_added, err))
		goto done;
	rc = 0;
done:
	free(scols);
	free(tcols);
	return rc;
}

static int attach(struct store *s, const char *path, char **err)
{
	sqlite3_stmt *at = store_prep(s, "ATTACH DATABASE ?1 AS src", err, "opening the source");
	if (!at)
		return -1;
	store_bind_text(at, 1, path);
	int rc = sqlite3_step(at);
	if (rc != SQLITE_DONE)
		store_db_fail(s, err, "opening the source");
	sqlite3_finalize(at);
	return rc == SQLITE_DONE ? 0 : -1;
}

int store_pool_from(struct store *s, const char *src_path, struct store_pool_stats *out,
		    char **err)
{
	struct store_pool_stats st = {0};
	struct stat a, b;
	if (stat(src_path, &b)) {
		store_set_err(err, "%s: %s", src_path, strerror(errno));
		return -1;
	}
	if (!stat(s->path, &a) && a.st_dev == b.st_dev && a.st_ino == b.st_ino) {
		store_set_err(err, "%s: is the database being pooled into", src_path);
		return -1;
	}
	int v = 0;
	bool imm = false;
	if (check_source(src_path, &v, &imm, err))
		return -1;
	st.source_version = v;
	char *tmp = NULL;
	const char *attach_path = src_path;
	/* An old schema, or a file only readable as immutable (ATTACH could not read it), is read
	 * through a private copy. */
	if (v < STORE_SCHEMA_VERSION || imm) {
		if (store_migrated_copy(src_path, &tmp, err))
			return -1;
		attach_path = tmp;
	}
	int ret = -1;
	bool attached = false, in_tx = false;
	if (attach(s, attach_path, err))
		goto done;
	attached = true;
	if (store_exec(s, "BEGIN IMMEDIATE", err, "pooling"))
		goto done;
	in_tx = true;
	if (pool_tables(s, &st, err))
		goto done;
	if (store_exec(s, "COMMIT", err, "finishing the pooling"))
		goto done;
	in_tx = false;
	ret = 0;
done:
	if (in_tx)
		sqlite3_exec(s->db, "ROLLBACK", NULL, NULL, NULL);
	if (attached)
		sqlite3_exec(s->db, "DETACH DATABASE src", NULL, NULL, NULL);
	if (tmp) {
		store_unlink_db(tmp);
		free(tmp);
	}
	if (out)
		*out = st;
	return ret;
}
