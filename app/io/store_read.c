/* store_read — the read side: sessions by id or subject, a session's trials as an array, its
 * frame times and events, and the streaming iterator export uses.
 *
 * Every SELECT list is generated from the column tables and every row is filled by
 * store_read_row, so a new column is read everywhere without an edit here. Label values travel
 * as a JSON array per trial and their names as a JSON array in the session row; the iterator
 * maps each session's labels onto the union of label names of the sessions it visits, so a
 * table export has one header. Callers: report, export, sessions, the console and resume. */
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <cJSON.h>

#include "diag.h"
#include "store_int.h"

/* ---- rows ---- */

void store_read_row(sqlite3_stmt *st, int first, const struct store_table *t, void *row,
		    bool dup)
{
	for (size_t i = 0; i < t->ncols; i++) {
		const struct store_column *c = &t->cols[i];
		int k = first + (int)i;
		if (c->off == STORE_NO_FIELD)
			continue;
		char *p = (char *)row + c->off;
		switch (c->type) {
		case STORE_TEXT:
		case STORE_TIME: {
			const char *v = store_col_text(st, k);
			if (dup && v)
				v = xstrdup(v);
			memcpy(p, &v, sizeof v);
			break;
		}
		case STORE_UUID:
		case STORE_HASH: {
			const char *v = store_col_text(st, k);
			snprintf(p, c->type == STORE_UUID ? 37 : 65, "%s", v ? v : "");
			break;
		}
		case STORE_INT: {
			int v = sqlite3_column_type(st, k) == SQLITE_NULL
				? (c->missing == STORE_IF_NEG ? -1 : 0) : sqlite3_column_int(st, k);
			memcpy(p, &v, sizeof v);
			break;
		}
		case STORE_INT64: {
			int64_t v = sqlite3_column_int64(st, k);
			memcpy(p, &v, sizeof v);
			break;
		}
		case STORE_REAL: {
			double v = sqlite3_column_double(st, k);
			memcpy(p, &v, sizeof v);
			break;
		}
		case STORE_BOOL: {
			bool v = sqlite3_column_int(st, k) != 0;
			memcpy(p, &v, sizeof v);
			break;
		}
		case STORE_SEED: {
			uint64_t v = (uint64_t)sqlite3_column_int64(st, k);
			memcpy(p, &v, sizeof v);
			break;
		}
		case STORE_STATUS: {
			enum store_status v = STORE_INTERRUPTED;   /* an unknown word: not running */
			const char *w = store_col_text(st, k);
			if (w)
				store_status_parse(w, &v);
			memcpy(p, &v, sizeof v);
			break;
		}
		case STORE_JSON:
			break;
		}
		if (c->missing == STORE_IF_UNFLAGGED) {
			bool has = sqlite3_column_type(st, k) != SQLITE_NULL;
			memcpy((char *)row + c->has_off, &has, sizeof has);
		}
	}
}

void store_free_row(const struct store_table *t, void *row)
{
	for (size_t i = 0; i < t->ncols; i++) {
		const struct store_column *c = &t->cols[i];
		if (c->off == STORE_NO_FIELD || (c->type != STORE_TEXT && c->type != STORE_TIME))
			continue;
		char *v;
		memcpy(&v, (char *)row + c->off, sizeof v);
		free(v);
	}
}

/* ---- sessions ---- */

char *store_session_select(void)
{
	char *cols = store_col_list(&store_sessions_table, "s.", true);
	char *v = xasprintf("%s, (SELECT count(*) FROM trials t WHERE t.session_id = s.id)", cols);
	free(cols);
	return v;
}

void store_session_read(sqlite3_stmt *st, struct store_session *ss)
{
	memset(ss, 0, sizeof *ss);
	store_read_row(st, 0, &store_sessions_table, ss, true);
	ss->ntrials = (size_t)sqlite3_column_int64(st, (int)store_sessions_table.ncols);
}

void store_session_clear(struct store_session *ss)
{
	if (!ss)
		return;
	store_free_row(&store_sessions_table, ss);
	memset(ss, 0, sizeof *ss);
}

/* Finds the one session whose id starts with PREFIX (8+ characters, or the whole id). */
static int find_session(struct store *s, const char *prefix, sqlite3_stmt **row, char **err)
{
	size_t len = prefix ? strlen(prefix) : 0;
	if (len < 8 || len > 36) {
		store_set_err(err, "session ID '%s' is too short: give at least 8 characters of it",
			      prefix ? prefix : "");
		return -1;
	}
	char *cols = store_session_select();
	char *sql = xasprintf("SELECT %s FROM sessions s WHERE substr(s.id, 1, ?2) = ?1 LIMIT 2",
			      cols);
	free(cols);
	sqlite3_stmt *st = store_prep(s, sql, err, "reading a session");
	free(sql);
	if (!st)
		return -1;
	store_bind_text(st, 1, prefix);
	sqlite3_bind_int(st, 2, (int)len);
	int rc = sqlite3_step(st);
	if (rc == SQLITE_DONE) {
		sqlite3_finalize(st);
		store_set_err(err, "%s: no session %s", store_path(s), prefix);
		return -1;
	}
	if (rc != SQLITE_ROW) {
		store_db_fail(s, err, "reading a session");
		sqlite3_finalize(st);
		return -1;
	}
	*row = st;
	return 0;
}

int store_session_get(struct store *s, const char *id, struct store_session *out, char **err)
{
	sqlite3_stmt *st = NULL;
	if (find_session(s, id, &st, err))
		return -1;
	store_session_read(st, out);
	int rc = sqlite3_step(st);
	sqlite3_finalize(st);
	if (rc == SQLITE_ROW) {
		store_session_clear(out);
		store_set_err(err, "session ID '%s' matches more than one session: give more of it",
			      id);
		return -1;
	}
	return 0;
}

int store_sessions_list(struct store *s, const char *subject, struct store_session **out,
			size_t *n, char **err)
{
	*out = NULL;
	*n = 0;
	char *cols = store_session_select();
	char *sql = xasprintf("SELECT %s FROM sessions s WHERE ?1 IS NULL OR s.subject = ?1"
			      " ORDER BY s.started_utc, s.id", cols);
	free(cols);
	sqlite3_stmt *st = store_prep(s, sql, err, "listing sessions");
	free(sql);
	if (!st)
		return -1;
	store_bind_text(st, 1, subject);
	size_t cap = 0;
	struct store_session *v = NULL;
	int rc;
	while ((rc = sqlite3_step(st)) == SQLITE_ROW) {
		if (*n == cap) {
			cap = cap ? cap * 2 : 8;
			v = xrealloc(v, cap * sizeof *v);
		}
		store_session_read(st, &v[(*n)++]);
	}
	if (rc != SQLITE_DONE) {
		store_db_fail(s, err, "listing sessions");
		sqlite3_finalize(st);
		store_sessions_free(v, *n);
		*n = 0;
		return -1;
	}
	sqlite3_finalize(st);
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
	sqlite3_stmt *st = store_prep(s, "SELECT count(*), coalesce(max(trial) + 1, 0) FROM trials"
				      " WHERE session_id = ?1", err, "counting trials");
	if (!st)
		return -1;
	store_bind_text(st, 1, session_id);
	if (sqlite3_step(st) != SQLITE_ROW) {
		store_db_fail(s, err, "counting trials");
		sqlite3_finalize(st);
		return -1;
	}
	if (count)
		*count = (size_t)sqlite3_column_int64(st, 0);
	if (next)
		*next = sqlite3_column_int(st, 1);
	sqlite3_finalize(st);
	return 0;
}

/* ---- trials ---- */

/* "SELECT <trial columns> FROM trials WHERE session_id = ?1 ORDER BY trial". Caller frees. */
static char *trials_select(void)
{
	char *cols = store_col_list(&store_trials_table, "", true);
	char *sql = xasprintf("SELECT %s FROM trials WHERE session_id = ?1 ORDER BY trial", cols);
	free(cols);
	return sql;
}

/* Statement column of the trial's label values. */
static int labels_column(void)
{
	return store_col_index(&store_trials_table, "labels");
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
		if (!sv)   /* a choices object: take its category */
			sv = cJSON_GetStringValue(cJSON_GetObjectItemCaseSensitive(e, "category"));
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

/* The session's label names and category names (JSON columns of its row). */
static int session_json(struct store *s, const char *id, char ***labels, size_t *nlabels,
			char ***choices, size_t *nchoices, char **err)
{
	*labels = *choices = NULL;
	*nlabels = *nchoices = 0;
	sqlite3_stmt *st = store_prep(s, "SELECT label_names, choices FROM sessions WHERE id = ?1",
				      err, "reading a session");
	if (!st)
		return -1;
	store_bind_text(st, 1, id);
	int rc = sqlite3_step(st);
	if (rc == SQLITE_ROW) {
		*labels = parse_string_array(store_col_text(st, 0), nlabels);
		*choices = parse_string_array(store_col_text(st, 1), nchoices);
	}
	if (rc != SQLITE_ROW && rc != SQLITE_DONE) {
		store_db_fail(s, err, "reading a session");
		sqlite3_finalize(st);
		return -1;
	}
	sqlite3_finalize(st);
	return 0;
}

/* Fills T's labels from the row's JSON: names copied from NAMES, values parsed. */
static void own_labels(struct store_trial *t, const char *json, char **names, size_t nnames)
{
	size_t nv;
	char **vals = parse_string_array(json, &nv);
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

int store_trials_load(struct store *s, const char *session_id, struct store_trial **out,
		      size_t *n, char **err)
{
	*out = NULL;
	*n = 0;
	char **names, **choices;
	size_t nnames, nchoices;
	struct store_session ss;
	if (store_session_get(s, session_id, &ss, err))
		return -1;
	if (session_json(s, ss.id, &names, &nnames, &choices, &nchoices, err)) {
		store_session_clear(&ss);
		return -1;
	}
	free_strings(choices, nchoices);
	char *sql = trials_select();
	sqlite3_stmt *st = store_prep(s, sql, err, "reading trials");
	free(sql);
	int rc = SQLITE_ERROR;
	size_t cap = 0;
	struct store_trial *v = NULL;
	if (st) {
		store_bind_text(st, 1, ss.id);
		while ((rc = sqlite3_step(st)) == SQLITE_ROW) {
			if (*n == cap) {
				cap = cap ? cap * 2 : 64;
				v = xrealloc(v, cap * sizeof *v);
			}
			struct store_trial *t = &v[(*n)++];
			memset(t, 0, sizeof *t);
			store_read_row(st, 0, &store_trials_table, t, true);
			t->subject = xstrdup(ss.subject ? ss.subject : "");
			own_labels(t, store_col_text(st, labels_column()), names, nnames);
		}
		if (rc != SQLITE_DONE)
			store_db_fail(s, err, "reading trials");
		sqlite3_finalize(st);
	}
	free_strings(names, nnames);
	store_session_clear(&ss);
	if (rc != SQLITE_DONE) {
		store_trials_free(v, *n);
		*n = 0;
		return -1;
	}
	*out = v;
	return 0;
}

void store_trials_free(struct store_trial *v, size_t n)
{
	for (size_t i = 0; i < n; i++) {
		struct store_trial *t = &v[i];
		store_free_row(&store_trials_table, t);
		free((char *)t->subject);
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
	sqlite3_stmt *st = store_prep(s, "SELECT flips FROM frames WHERE session_id = ?1"
				      " AND trial = ?2", err, "reading frame times");
	if (!st)
		return -1;
	store_bind_text(st, 1, session_id);
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
	if (rc != SQLITE_ROW && rc != SQLITE_DONE)
		store_db_fail(s, err, "reading frame times");
	sqlite3_finalize(st);
	return rc == SQLITE_ROW || rc == SQLITE_DONE ? 0 : -1;
}

int store_events_load(struct store *s, const char *session_id, struct store_event_row **out,
		      size_t *n, char **err)
{
	*out = NULL;
	*n = 0;
	sqlite3_stmt *st = store_prep(s, "SELECT seq, mono_ns, kind, detail FROM events"
				      " WHERE session_id = ?1 ORDER BY seq", err, "reading events");
	if (!st)
		return -1;
	store_bind_text(st, 1, session_id);
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
		const char *kind = store_col_text(st, 2), *detail = store_col_text(st, 3);
		e->kind = kind ? xstrdup(kind) : NULL;
		e->detail = detail ? xstrdup(detail) : NULL;
	}
	if (rc != SQLITE_DONE) {
		store_db_fail(s, err, "reading events");
		sqlite3_finalize(st);
		store_events_free(v, *n);
		*n = 0;
		return -1;
	}
	sqlite3_finalize(st);
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
		if (session_json(s, it->sessions[i].id, &m->labels, &m->nlabels, &m->choices,
				 &m->nchoices, err)) {
			store_iter_close(it);
			return -1;
		}
		m->map = xcalloc(m->nlabels ? m->nlabels : 1, sizeof *m->map);
		for (size_t k = 0; k < m->nlabels; k++)
			m->map[k] = union_add(it, m->labels[k]);
	}
	it->values = xcalloc(it->nnames ? it->nnames : 1, sizeof *it->values);
	char *sql = trials_select();
	it->st = store_prep(s, sql, err, "reading trials");
	free(sql);
	if (!it->st) {
		store_iter_close(it);
		return -1;
	}
	*out = it;
	return 0;
}

/* Points the row's labels at the union columns, values borrowed from the parsed JSON. */
static void iter_labels(struct store_iter *it, const struct iter_session *m)
{
	for (size_t k = 0; k < it->nnames; k++)
		it->values[k] = NULL;
	const char *lj = store_col_text(it->st, labels_column());
	if (lj && m->nlabels) {
		it->json = cJSON_Parse(lj);
		size_t k = 0;
		for (cJSON *e = it->json ? it->json->child : NULL; e && k < m->nlabels;
		     e = e->next, k++)
			it->values[m->map[k]] = cJSON_GetStringValue(e);
	}
	it->row.nlabels = it->nnames;
	it->row.label_names = (const char *const *)it->names;
	it->row.label_values = it->values;
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
			store_bind_text(it->st, 1, cs->id);
			it->bound = true;
		}
		int rc = sqlite3_step(it->st);
		if (rc == SQLITE_DONE) {
			it->cur++;
			it->bound = false;
			continue;
		}
		if (rc != SQLITE_ROW)
			return store_db_fail(it->s, err, "reading trials");
		struct store_trial *t = &it->row;
		memset(t, 0, sizeof *t);
		store_read_row(it->st, 0, &store_trials_table, t, false);
		t->subject = cs->subject;
		iter_labels(it, &it->meta[it->cur]);
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
