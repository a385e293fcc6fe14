/* store_write — the write side: sessions (begin, refresh, end, owner, recovery), events and one
 * transaction per trial (the trial row from the column table, its frame times, and the
 * session's categories and label names with its first trial).
 *
 * The run layer calls store_trial_put once per trial in the inter-trial interval; the insert
 * statement is generated once per connection from the trials column table and cached. When the
 * stored trials (repeats not counted) reach the session's planned count, the same transaction
 * marks the session complete, so a finished session is complete even if nobody closes it. */
#include <assert.h>
#include <errno.h>
#include <limits.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include <cJSON.h>

#include "diag.h"
#include "lum.h"
#include "protocol.h"
#include "rig.h"
#include "sha256.h"
#include "stimlist.h"
#include "store_int.h"
#include "version.h"

/* ---- rows ---- */

void store_bind_row(sqlite3_stmt *st, int first, const struct store_table *t, const void *row,
		    const char *json)
{
	for (size_t i = 0; i < t->ncols; i++) {
		const struct store_column *c = &t->cols[i];
		int k = first + (int)i;
		if (c->type == STORE_JSON) {
			store_bind_text(st, k, json);
			continue;
		}
		struct store_value v;
		store_column_value(c, row, &v);
		if (v.missing) {
			sqlite3_bind_null(st, k);
			continue;
		}
		switch (c->type) {
		case STORE_INT:
		case STORE_INT64:
		case STORE_BOOL:
		case STORE_SEED:
			sqlite3_bind_int64(st, k, (sqlite3_int64)v.i);
			break;
		case STORE_REAL:
			sqlite3_bind_double(st, k, v.r);
			break;
		default:
			store_bind_text(st, k, v.s);
		}
	}
}

/* "INSERT INTO T (a, b, ...) VALUES (?1, ?2, ...)". Caller frees. */
static char *insert_sql(const struct store_table *t)
{
	char *cols = store_col_list(t, "", true);
	size_t len = strlen(cols) + strlen(t->name) + 48 + t->ncols * 8;
	char *v = xmalloc(len), *q = v;
	q += sprintf(q, "INSERT INTO %s (%s) VALUES (", t->name, cols);
	for (size_t i = 0; i < t->ncols; i++)
		q += sprintf(q, "%s?%zu", i ? ", " : "", i + 1);
	sprintf(q, ")");
	free(cols);
	return v;
}

/* ---- sessions ---- */

static char *dup_or_null(const char *s)
{
	return s ? xstrdup(s) : NULL;
}

/* The rig's calibration (grey channel) and what it says of the protocol's background. */
static void describe_luminance(struct store_session *ss, const struct protocol *p,
			       const struct rig *r)
{
	const struct lum_curve *c = r->lum ? &r->lum->ch[LUM_GREY] : NULL;
	free(ss->lum_measured);
	ss->lum_measured = NULL;
	ss->has_lum = c && c->present;
	ss->has_background_cd = false;
	/* linearize without any calibration never gets this far (the loader refuses it). */
	ss->linearized = p && p->linearize && r->lum;
	if (!ss->has_lum)
		return;
	if (r->lum->measured[0])
		ss->lum_measured = xstrdup(r->lum->measured);
	ss->lum_gamma = c->gamma;
	ss->lum_min_cd = c->l_min;
	ss->lum_max_cd = c->l_max;
	if (p) {
		ss->has_background_cd = true;
		ss->background_cd = p->background_cd >= 0 ? p->background_cd_achieved :
				    lum_curve_eval(c, r->lum->model, p->background);
	}
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
		describe_luminance(ss, p, r);
	}
}

int store_session_begin(struct store *s, struct store_session *ss, char **err)
{
	if (!store_subject_valid(ss->subject)) {
		store_set_err(err, "subject ID '%s' is not valid: use 1 to 64 letters and digits only "
			      "(a pseudonym, never a name)", ss->subject ? ss->subject : "");
		return -1;
	}
	if (store_uuid4(ss->id)) {
		store_set_err(err, "cannot read /dev/urandom for a session ID: %s", strerror(errno));
		return -1;
	}
	char now[32], host[256];
	store_utc_now(now);
	store_this_host(host);
	free(ss->started_utc);
	ss->started_utc = xstrdup(now);
	free(ss->ended_utc);
	ss->ended_utc = NULL;
	ss->status = STORE_RUNNING;
	if (!ss->version)
		ss->version = xstrdup(TACHIST_VERSION);
	ss->owner_pid = (int)getpid();
	free(ss->owner_host);
	ss->owner_host = xstrdup(host);
	char *sql = insert_sql(&store_sessions_table);
	sqlite3_stmt *st = store_prep(s, sql, err, "creating the session");
	free(sql);
	if (!st)
		return -1;
	store_bind_row(st, 1, &store_sessions_table, ss, NULL);
	int rc = sqlite3_step(st);
	if (rc != SQLITE_DONE)
		store_db_fail(s, err, "creating the session");
	sqlite3_finalize(st);
	return rc == SQLITE_DONE ? 0 : -1;
}

/* Runs an UPDATE with ?1 = session id; fails when it touched no row. */
static int update_session(struct store *s, sqlite3_stmt *st, const char *id, char **err,
			  const char *what)
{
	int rc = sqlite3_step(st);
	if (rc != SQLITE_DONE) {
		store_db_fail(s, err, what);
		sqlite3_finalize(st);
		return -1;
	}
	sqlite3_finalize(st);
	if (sqlite3_changes(s->db) == 0) {
		store_set_err(err, "%s: no session %s", store_path(s), id);
		return -1;
	}
	return 0;
}

int store_session_refresh(struct store *s, const char *session_id, double hz, char **err)
{
	sqlite3_stmt *st = store_prep(s, "UPDATE sessions SET refresh_hz = ?2 WHERE id = ?1", err,
				      "recording the refresh");
	if (!st)
		return -1;
	store_bind_text(st, 1, session_id);
	if (hz > 0)
		sqlite3_bind_double(st, 2, hz);
	return update_session(s, st, session_id, err, "recording the refresh");
}

static int session_end_once(struct store *s, const char *session_id, enum store_status status,
			    char **err)
{
	char now[32];
	store_utc_now(now);
	sqlite3_stmt *st = store_prep(s, "UPDATE sessions SET status = ?2, ended_utc = ?3"
				      " WHERE id = ?1", err, "ending the session");
	if (!st)
		return -1;
	store_bind_text(st, 1, session_id);
	store_bind_text(st, 2, store_status_name(status));
	store_bind_text(st, 3, status == STORE_RUNNING ? NULL : now);
	return update_session(s, st, session_id, err, "ending the session");
}

int store_session_end(struct store *s, const char *session_id, enum store_status status,
		      char **err)
{
	bool had_reserve = s->reserve != NULL;
	char *first = NULL;
	if (!session_end_once(s, session_id, status, &first))
		return 0;
	/* A full disk: the failure released the reserve file beside the database; that room is
	 * what this status update needs, so try once more. */
	if (had_reserve && !s->reserve &&
	    (sqlite3_extended_errcode(s->db) & 0xff) == SQLITE_FULL) {
		free(first);
		return session_end_once(s, session_id, status, err);
	}
	if (err) {
		free(*err);
		*err = first;
	} else {
		free(first);
	}
	return -1;
}

int store_session_own(struct store *s, const char *session_id, long pid, const char *host,
		      char **err)
{
	char here[256];
	if (!host) {
		store_this_host(here);
		host = here;
	}
	sqlite3_stmt *st = store_prep(s, "UPDATE sessions SET status = 'running', ended_utc = NULL,"
				      " owner_pid = ?2, owner_host = ?3 WHERE id = ?1", err,
				      "taking over the session");
	if (!st)
		return -1;
	store_bind_text(st, 1, session_id);
	sqlite3_bind_int64(st, 2, (sqlite3_int64)pid);
	store_bind_text(st, 3, host);
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

bool store_session_orphaned(const struct store_session *ss)
{
	if (ss->status != STORE_RUNNING)
		return false;
	if (!ss->owner_host)
		return true;
	char host[256];
	store_this_host(host);
	return !strcmp(ss->owner_host, host) && owner_gone(ss->owner_pid);
}

/* Ids of running sessions that may be orphans: no owner recorded (written before schema
 * version 3) or owned on this host by a process that is gone. */
static int orphans(struct store *s, char (**ids)[37], size_t *k, char **err)
{
	char host[256];
	store_this_host(host);
	*ids = NULL;
	*k = 0;
	sqlite3_stmt *st = store_prep(s, "SELECT id, owner_pid FROM sessions WHERE status ="
				      " 'running' AND (owner_host IS NULL OR owner_host = ?1)", err,
				      "recovering sessions");
	if (!st)
		return -1;
	store_bind_text(st, 1, host);
	size_t cap = 0;
	int rc;
	while ((rc = sqlite3_step(st)) == SQLITE_ROW) {
		bool owned = sqlite3_column_type(st, 1) != SQLITE_NULL;
		if (owned && !owner_gone((long)sqlite3_column_int64(st, 1)))
			continue;
		if (*k == cap) {
			cap = cap ? 2 * cap : 8;
			*ids = xrealloc(*ids, cap * sizeof **ids);
		}
		const char *id = store_col_text(st, 0);
		snprintf((*ids)[(*k)++], 37, "%s", id ? id : "");
	}
	if (rc != SQLITE_DONE) {
		store_db_fail(s, err, "recovering sessions");
		sqlite3_finalize(st);
		free(*ids);
		*ids = NULL;
		return -1;
	}
	sqlite3_finalize(st);
	return 0;
}

int store_recover(struct store *s, int *n, char **err)
{
	if (n)
		*n = 0;
	char (*ids)[37];
	size_t k;
	if (orphans(s, &ids, &k, err))
		return -1;
	int done = 0;
	for (size_t i = 0; i < k; i++) {
		sqlite3_stmt *st = store_prep(s, "UPDATE sessions SET status = 'interrupted'"
					      " WHERE id = ?1 AND status = 'running'", err,
					      "recovering sessions");
		if (!st) {
			free(ids);
			return -1;
		}
		store_bind_text(st, 1, ids[i]);
		int rc = sqlite3_step(st);
		if (rc != SQLITE_DONE)
			store_db_fail(s, err, "marking crashed sessions interrupted");
		sqlite3_finalize(st);
		if (rc != SQLITE_DONE) {
			free(ids);
			return -1;
		}
		done += sqlite3_changes(s->db);
	}
	free(ids);
	if (n)
		*n = done;
	return 0;
}

static int64_t mono_ns(void)
{
	struct timespec ts;
	clock_gettime(CLOCK_MONOTONIC, &ts);
	return (int64_t)ts.tv_sec * 1000000000 + ts.tv_nsec;
}

int store_event(struct store *s, const char *session_id, const char *kind, const char *detail,
		char **err)
{
	sqlite3_stmt *st = store_cached(s, ST_EVENT,
		"INSERT INTO events (session_id, seq, mono_ns, kind, detail) VALUES (?1,"
		" (SELECT coalesce(max(seq) + 1, 0) FROM events WHERE session_id = ?1), ?2, ?3, ?4)",
		err);
	if (!st)
		return -1;
	store_bind_text(st, 1, session_id);
	sqlite3_bind_int64(st, 2, mono_ns());
	store_bind_text(st, 3, kind);
	store_bind_text(st, 4, detail);
	int rc = sqlite3_step(st);
	sqlite3_reset(st);
	if (rc != SQLITE_DONE) {
		if ((sqlite3_extended_errcode(s->db) & 0xff) == SQLITE_CONSTRAINT) {
			store_set_err(err, "%s: no session %s", store_path(s), session_id);
			return -1;
		}
		return store_db_fail(s, err, "storing an event");
	}
	return 0;
}

/* ---- trials ---- */

/* JSON text of the protocol's categories: [{"category": C, "key": K}, ...]. Caller frees. */
static char *choices_json(const struct protocol *p)
{
	cJSON *a = cJSON_CreateArray();
	for (size_t i = 0; p && i < p->nchoices; i++) {
		cJSON *o = cJSON_CreateObject();
		const char *cat = p->choices[i].category, *key = p->choices[i].key;
		cJSON_AddStringToObject(o, "category", cat ? cat : "");
		cJSON_AddStringToObject(o, "key", key ? key : "");
		cJSON_AddItemToArray(a, o);
	}
	char *t = cJSON_PrintUnformatted(a);
	cJSON_Delete(a);
	return t;
}

static char *strings_json(const char *const *v, size_t n)
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
	sqlite3_stmt *st = store_cached(s, ST_META,
		"UPDATE sessions SET choices = coalesce(choices, ?2),"
		" label_names = coalesce(label_names, ?3) WHERE id = ?1", err);
	if (!st)
		return -1;
	char *cj = p ? choices_json(p) : NULL;
	char *lj = l ? strings_json((const char *const *)l->label_names, l->nlabels) : NULL;
	store_bind_text(st, 1, session_id);
	store_bind_text(st, 2, cj);
	store_bind_text(st, 3, lj);
	int rc = sqlite3_step(st);
	sqlite3_reset(st);
	cJSON_free(cj);
	cJSON_free(lj);
	if (rc != SQLITE_DONE)
		return store_db_fail(s, err, "storing the session's categories");
	snprintf(s->meta_done, sizeof s->meta_done, "%s", session_id);
	return 0;
}

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

static int put_frames(struct store *s, const char *session_id, const struct trial_record *t,
		      char **err)
{
	if (t->nflips == 0)
		return 0;
	sqlite3_stmt *st = store_cached(s, ST_FRAMES, "INSERT INTO frames (session_id, trial, n,"
					" flips) VALUES (?1, ?2, ?3, ?4)", err);
	if (!st)
		return -1;
	unsigned char *blob = flips_blob(t->flips, t->nflips);
	store_bind_text(st, 1, session_id);
	sqlite3_bind_int(st, 2, t->trial);
	sqlite3_bind_int64(st, 3, (sqlite3_int64)t->nflips);
	sqlite3_bind_blob(st, 4, blob, (int)(t->nflips * 8), SQLITE_STATIC);
	int rc = sqlite3_step(st);
	sqlite3_reset(st);
	sqlite3_clear_bindings(st);
	free(blob);
	if (rc != SQLITE_DONE)
		return store_db_fail(s, err, "storing a trial's frame times");
	return 0;
}

/* Marks SESSION complete once its stored trials (repeats not counted) reach its plan. */
static int complete_when_done(struct store *s, const char *session_id, char **err)
{
	char now[32];
	store_utc_now(now);
	sqlite3_stmt *st = store_cached(s, ST_COMPLETE, "UPDATE sessions SET status = 'complete',"
					" ended_utc = ?2 WHERE id = ?1 AND status = 'running'"
					" AND planned_trials > 0 AND planned_trials <= (SELECT count(*)"
					" FROM trials WHERE session_id = ?1 AND repeat_of IS NULL)", err);
	if (!st)
		return -1;
	store_bind_text(st, 1, session_id);
	store_bind_text(st, 2, now);
	int rc = sqlite3_step(st);
	sqlite3_reset(st);
	if (rc != SQLITE_DONE)
		return store_db_fail(s, err, "completing the session");
	return 0;
}

static int put_row(struct store *s, const char *session_id, const struct trial_record *t,
		   const struct protocol *p, const struct stimlist *l, char **err)
{
	if (!s->st[ST_TRIAL]) {
		char *sql = insert_sql(&store_trials_table);
		s->st[ST_TRIAL] = store_prep(s, sql, err, "preparing a statement");
		free(sql);
		if (!s->st[ST_TRIAL])
			return -1;
	}
	sqlite3_stmt *st = store_cached(s, ST_TRIAL, "", err);
	if (!st)
		return -1;
	struct store_trial row;
	store_trial_from_record(&row, session_id, t, p, l);
	char *labels = row.nlabels ? strings_json(row.label_values, row.nlabels) : NULL;
	store_bind_row(st, 1, &store_trials_table, &row, labels);
	int rc = sqlite3_step(st);
	sqlite3_reset(st);
	cJSON_free(labels);
	if (rc == SQLITE_DONE)
		return 0;
	int ext = sqlite3_extended_errcode(s->db);
	if (ext == SQLITE_CONSTRAINT_PRIMARYKEY) {
		store_set_err(err, "%s: trial %d of session %s is already stored", store_path(s),
			      t->trial, session_id);
		return -1;
	}
	if (ext == SQLITE_CONSTRAINT_FOREIGNKEY) {
		store_set_err(err, "%s: no session %s", store_path(s), session_id);
		return -1;
	}
	return store_db_fail(s, err, "storing a trial");
}

int store_trial_put(struct store *s, const char *session_id, const struct trial_record *t,
		    const struct protocol *p, const struct stimlist *l, char **err)
{
	assert(s && session_id && t);
	sqlite3_stmt *b = store_cached(s, ST_BEGIN, "BEGIN IMMEDIATE", err);
	if (!b)
		return -1;
	if (sqlite3_step(b) != SQLITE_DONE)
		return store_db_fail(s, err, "starting to store a trial");
	if (put_meta(s, session_id, p, l, err) || put_row(s, session_id, t, p, l, err) ||
	    put_frames(s, session_id, t, err) || complete_when_done(s, session_id, err))
		goto fail;
	sqlite3_stmt *c = store_cached(s, ST_COMMIT, "COMMIT", err);
	if (!c)
		goto fail;
	if (sqlite3_step(c) != SQLITE_DONE) {
		store_db_fail(s, err, "committing a trial");
		goto fail;
	}
	return 0;
fail:
	if (!sqlite3_get_autocommit(s->db)) {
		sqlite3_stmt *r = store_cached(s, ST_ROLLBACK, "ROLLBACK", NULL);
		if (r)
			sqlite3_step(r);
	}
	/* The meta update rolled back with the trial; write it again next time. */
	s->meta_done[0] = '\0';
	return -1;
}

int store_session_delete_empty(struct store *s, const char *session_id, char **err)
{
	/* One statement, so no trial can arrive between the test and the delete; events go with
	 * the session (ON DELETE CASCADE). */
	sqlite3_stmt *st = store_prep(s, "DELETE FROM sessions WHERE id = ?1 AND status <> 'running'"
				      " AND NOT EXISTS (SELECT 1 FROM trials WHERE session_id = ?1)",
				      err, "deleting the session");
	if (!st)
		return -1;
	store_bind_text(st, 1, session_id);
	int rc = sqlite3_step(st);
	sqlite3_finalize(st);
	if (rc != SQLITE_DONE)
		return store_db_fail(s, err, "deleting the session");
	if (sqlite3_changes(s->db) == 1)
		return 0;
	/* Nothing deleted: say why. */
	st = store_prep(s, "SELECT status, (SELECT count(*) FROM trials WHERE session_id = ?1)"
			" FROM sessions WHERE id = ?1", err, "reading the session");
	if (!st)
		return -1;
	store_bind_text(st, 1, session_id);
	if (sqlite3_step(st) != SQLITE_ROW)
		store_set_err(err, "%s: no session %s", s->path, session_id);
	else if (sqlite3_column_int64(st, 1) > 0)
		store_set_err(err, "session %.8s holds %lld trial%s; only a session without trials "
			      "can be deleted", session_id, (long long)sqlite3_column_int64(st, 1),
			      sqlite3_column_int64(st, 1) == 1 ? "" : "s");
	else
		store_set_err(err, "session %.8s is running; end it first", session_id);
	sqlite3_finalize(st);
	return -1;
}
