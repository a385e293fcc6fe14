/* store_pg — pooling into the lab's PostgreSQL server, and reading it back (include/store_pg.h).
 *
 * The server holds one schema (default "tachist") with the tables sessions and trials generated
 * from the column tables (store_columns.c, types from store_type_sql), frames and events written
 * out here as in store_schema.c, and schema_version (one row: the version of those tables).
 * Every statement sets search_path to the schema, whose name is checked to need no quoting, so
 * the SQL text is constant or generated from the tables; values travel as parameters or COPY
 * data. Pushing reads a rig's SQLite file through the store's own reader connection in one read
 * transaction (a rig writing its next trial is never blocked) and sends each changed session in
 * one server transaction with COPY. Reading back (store_pg_fetch) copies the schema into a
 * temporary SQLite file, so sessions, export and report read the server through the same code as
 * a file. Called by `tachist pool` and store_open_existing. */
#include <assert.h>
#include <errno.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <libpq-fe.h>

#include "diag.h"
#include "store_int.h"
#include "store_pg.h"

struct store_pg {
	PGconn *conn;
	char *shown;          /* the connection text with any password masked */
	char *schema;
	bool staging;         /* the temporary staging tables exist on this connection */
	bool lost;            /* the connection failed: only closing it is left */
};

/* ---- messages ---- */

/* libpq's message without its trailing newline, or WHAT when there is none. */
static char *pg_message(PGconn *c, const PGresult *r)
{
	const char *m = r ? PQresultErrorField(r, PG_DIAG_MESSAGE_PRIMARY) : NULL;
	if (!m || !*m)
		m = r ? PQresultErrorMessage(r) : NULL;
	if (!m || !*m)
		m = c ? PQerrorMessage(c) : "";
	char *v = xstrdup(*m ? m : "no message from the server");
	size_t n = strlen(v);
	while (n && (v[n - 1] == '\n' || v[n - 1] == ' '))
		v[--n] = '\0';
	for (char *p = v; *p; p++)
		if (*p == '\n')
			*p = ' ';
	return v;
}

static int pg_fail(struct store_pg *pg, PGresult *r, char **err, const char *what)
{
	char *m = pg_message(pg->conn, r);
	/* SQLSTATE classes 08 (connection exception) and 57P (the server shutting the session
	 * down) mean the connection is gone even while libpq has not noticed yet. */
	const char *state = r ? PQresultErrorField(r, PG_DIAG_SQLSTATE) : NULL;
	if (state && (!strncmp(state, "08", 2) || !strncmp(state, "57P", 3)))
		pg->lost = true;
	if (PQstatus(pg->conn) != CONNECTION_OK)
		pg->lost = true;
	if (pg->lost)
		store_set_err(err, "%s: the connection to the server was lost while %s (%s)",
			      pg->shown, what, m);
	else
		store_set_err(err, "%s: %s: %s", pg->shown, what, m);
	free(m);
	PQclear(r);
	return -1;
}

/* Runs SQL (no parameters); 0 when it succeeded. */
static int pg_exec(struct store_pg *pg, const char *sql, char **err, const char *what)
{
	PGresult *r = PQexec(pg->conn, sql);
	ExecStatusType t = PQresultStatus(r);
	if (t != PGRES_COMMAND_OK && t != PGRES_TUPLES_OK)
		return pg_fail(pg, r, err, what);
	PQclear(r);
	return 0;
}

static int pg_exec_owned(struct store_pg *pg, char *sql, char **err, const char *what)
{
	int rc = pg_exec(pg, sql, err, what);
	free(sql);
	return rc;
}

/* A query with text parameters returning rows; NULL (and *ERR) on failure. */
static PGresult *pg_query(struct store_pg *pg, const char *sql, int n, const char *const *vals,
			  char **err, const char *what)
{
	PGresult *r = PQexecParams(pg->conn, sql, n, NULL, vals, NULL, NULL, 0);
	if (PQresultStatus(r) != PGRES_TUPLES_OK && PQresultStatus(r) != PGRES_COMMAND_OK) {
		pg_fail(pg, r, err, what);
		return NULL;
	}
	return r;
}

/* ---- the schema ---- */

/* The PostgreSQL form of a column constraint written for SQLite: booleans default to false, and
 * a reference to the sessions table is left out. On the server the rows of a session arrive in
 * the one transaction that writes its session row, and deleting a session deletes its rows by
 * the trigger below; a per-row foreign-key check would double the time of taking a session. */
static void pg_constraint(const struct store_column *c, char *out, size_t size)
{
	const char *k = c->constraint;
	const char *d = strstr(k, "DEFAULT 0");
	const char *ref = strstr(k, "REFERENCES");
	int keep = ref ? (int)(ref - k) : (int)strlen(k);
	while (keep > 0 && k[keep - 1] == ' ')
		keep--;
	if (c->type == STORE_BOOL && d && d < k + keep)
		snprintf(out, size, "%.*sDEFAULT false%.*s", (int)(d - k), k,
			 (int)(k + keep - (d + 9)), d + 9);
	else
		snprintf(out, size, "%.*s", keep, k);
}

static char *pg_create_sql(const struct store_table *t)
{
	size_t len = 64 + strlen(t->name) + strlen(t->constraints);
	for (size_t i = 0; i < t->ncols; i++)
		len += strlen(t->cols[i].name) + strlen(t->cols[i].constraint) + 40;
	char *v = xmalloc(len), *q = v;
	q += sprintf(q, "CREATE TABLE %s (", t->name);
	for (size_t i = 0; i < t->ncols; i++) {
		char k[256];
		pg_constraint(&t->cols[i], k, sizeof k);
		q += sprintf(q, "%s%s %s%s%s", i ? ", " : "", t->cols[i].name,
			     store_type_sql(t->cols[i].type, true), k[0] ? " " : "", k);
	}
	sprintf(q, "%s)", t->constraints);
	return v;
}

/* The tables not generated from column tables, and the triggers that stand for the SQLite
 * file's ON DELETE CASCADE: deleting sessions deletes their trials, frames and events, deleting
 * trials their frames (one statement per deleting statement, over its transition table). The
 * functions name the schema (%s, checked to need no quoting) so they work from any search_path. */
static const char pg_other_tables[] =
	"CREATE INDEX sessions_subject ON sessions(subject, started_utc);"
	"CREATE TABLE frames ("
	" session_id uuid NOT NULL, trial integer NOT NULL, n integer NOT NULL, flips bytea,"
	" PRIMARY KEY (session_id, trial));"
	"CREATE TABLE events ("
	" session_id uuid NOT NULL,"
	" seq integer NOT NULL, mono_ns bigint, kind text NOT NULL, detail text,"
	" PRIMARY KEY (session_id, seq));"
	"CREATE TABLE schema_version (version integer NOT NULL, written_utc timestamptz NOT NULL"
	" DEFAULT now());"
	"CREATE FUNCTION sessions_deleted() RETURNS trigger LANGUAGE plpgsql SET search_path = %s"
	" AS $$ BEGIN"
	" DELETE FROM frames f USING gone g WHERE f.session_id = g.id;"
	" DELETE FROM trials t USING gone g WHERE t.session_id = g.id;"
	" DELETE FROM events e USING gone g WHERE e.session_id = g.id;"
	" RETURN NULL; END $$;"
	"CREATE TRIGGER sessions_deleted AFTER DELETE ON sessions REFERENCING OLD TABLE AS gone"
	" FOR EACH STATEMENT EXECUTE FUNCTION sessions_deleted();"
	"CREATE FUNCTION trials_deleted() RETURNS trigger LANGUAGE plpgsql SET search_path = %s"
	" AS $$ BEGIN"
	" DELETE FROM frames f USING gone g WHERE f.session_id = g.session_id AND f.trial = g.trial;"
	" RETURN NULL; END $$;"
	"CREATE TRIGGER trials_deleted AFTER DELETE ON trials REFERENCING OLD TABLE AS gone"
	" FOR EACH STATEMENT EXECUTE FUNCTION trials_deleted();";

/* The type PostgreSQL's format_type() names for T. */
static const char *pg_type_shown(enum store_type t)
{
	const char *s = store_type_sql(t, true);
	return !strcmp(s, "timestamptz") ? "timestamp with time zone" : s;
}

/* Checks the columns of table T on the server against ours; adds those missing when ADD (an
 * older version's table). */
static int pg_check_table(struct store_pg *pg, const struct store_table *t, bool add, char **err)
{
	const char *vals[2] = {pg->schema, t->name};
	PGresult *r = pg_query(pg, "SELECT a.attname, format_type(a.atttypid, a.atttypmod)"
			       " FROM pg_attribute a JOIN pg_class c ON c.oid = a.attrelid"
			       " JOIN pg_namespace n ON n.oid = c.relnamespace"
			       " WHERE n.nspname = $1 AND c.relname = $2 AND a.attnum > 0"
			       " AND NOT a.attisdropped", 2, vals, err, "reading the tables");
	if (!r)
		return -1;
	int rc = 0;
	for (size_t i = 0; i < t->ncols && !rc; i++) {
		const struct store_column *c = &t->cols[i];
		int row = -1;
		for (int k = 0; k < PQntuples(r); k++)
			if (!strcmp(PQgetvalue(r, k, 0), c->name))
				row = k;
		if (row >= 0 && strcmp(PQgetvalue(r, row, 1), pg_type_shown(c->type))) {
			store_set_err(err, "%s: table %s.%s is not tachist's: its column %s is %s, "
				      "tachist keeps %s there; pool into another schema (--schema)",
				      pg->shown, pg->schema, t->name, c->name, PQgetvalue(r, row, 1),
				      pg_type_shown(c->type));
			rc = -1;
		} else if (row < 0 && !add) {
			store_set_err(err, "%s: table %s.%s is not tachist's: it has no column %s; "
				      "pool into another schema (--schema)", pg->shown, pg->schema,
				      t->name, c->name);
			rc = -1;
		} else if (row < 0) {
			char k[256];
			pg_constraint(c, k, sizeof k);
			/* An added column takes no NOT NULL without a default (rows exist already). */
			const char *keep = strstr(k, "DEFAULT") ? k : "";
			rc = pg_exec_owned(pg, xasprintf("ALTER TABLE %s ADD COLUMN %s %s %s", t->name,
							 c->name, store_type_sql(c->type, true), keep),
					   err, "adding a column");
		}
	}
	PQclear(r);
	return rc;
}

/* How many of our tables exist in the schema, and the version row (-1 when no version table). */
static int pg_schema_state(struct store_pg *pg, int *ntables, int *version, char **err)
{
	const char *vals[1] = {pg->schema};
	PGresult *r = pg_query(pg, "SELECT count(*) FILTER (WHERE c.relname IN ('sessions', 'trials',"
			       " 'frames', 'events')), count(*) FILTER (WHERE c.relname ="
			       " 'schema_version') FROM pg_class c JOIN pg_namespace n"
			       " ON n.oid = c.relnamespace WHERE n.nspname = $1 AND c.relkind IN"
			       " ('r', 'v', 'm', 'p', 'f')", 1, vals, err, "reading the schema");
	if (!r)
		return -1;
	*ntables = atoi(PQgetvalue(r, 0, 0));
	bool has_version = atoi(PQgetvalue(r, 0, 1)) > 0;
	PQclear(r);
	*version = -1;
	if (!has_version)
		return 0;
	r = pg_query(pg, "SELECT coalesce(max(version), 0) FROM schema_version", 0, NULL, err,
		     "reading the schema version");
	if (!r)
		return -1;
	*version = atoi(PQgetvalue(r, 0, 0));
	PQclear(r);
	return 0;
}

static int pg_schema_check(struct store_pg *pg, bool create, char **err)
{
	int ntables, version;
	if (pg_schema_state(pg, &ntables, &version, err))
		return -1;
	if (version < 0 && ntables > 0) {
		store_set_err(err, "%s: schema %s already holds tables tachist did not make (no "
			      "schema_version); pool into another schema (--schema)", pg->shown,
			      pg->schema);
		return -1;
	}
	if (version > STORE_SCHEMA_VERSION) {
		store_set_err(err, "%s: schema %s has version %d, newer than this tachist understands "
			      "(%d); use a newer tachist", pg->shown, pg->schema, version,
			      STORE_SCHEMA_VERSION);
		return -1;
	}
	if (version < 0 && !create) {
		store_set_err(err, "%s: no tachist data in schema %s", pg->shown, pg->schema);
		return -1;
	}
	if (version < 0) {
		if (pg_exec_owned(pg, pg_create_sql(&store_sessions_table), err, "creating the tables") ||
		    pg_exec_owned(pg, pg_create_sql(&store_trials_table), err, "creating the tables") ||
		    pg_exec_owned(pg, xasprintf(pg_other_tables, pg->schema, pg->schema), err,
				  "creating the tables"))
			return -1;
		version = 0;
	}
	bool add = create && version < STORE_SCHEMA_VERSION;
	if (pg_check_table(pg, &store_sessions_table, add, err) ||
	    pg_check_table(pg, &store_trials_table, add, err))
		return -1;
	if (version < STORE_SCHEMA_VERSION && create) {
		char sql[96];
		snprintf(sql, sizeof sql, "DELETE FROM schema_version; INSERT INTO schema_version "
			 "(version) VALUES (%d)", STORE_SCHEMA_VERSION);
		if (pg_exec(pg, sql, err, "writing the schema version"))
			return -1;
	}
	return 0;
}

/* Connects and sets the session up; the schema is checked (and made, when CREATE) inside one
 * transaction holding an advisory lock, so two rigs starting at once do not both create it. */
static int pg_connect(const char *conninfo, const char *schema, bool create,
		      struct store_pg **out, char **err)
{
	*out = NULL;
	if (!store_pg_schema_valid(schema)) {
		store_set_err(err, "'%s' is not a schema name tachist uses (lower-case letters, digits "
			      "and '_', starting with a letter)", schema ? schema : "");
		return -1;
	}
	struct store_pg *pg = xcalloc(1, sizeof *pg);
	pg->shown = store_pg_shown(conninfo);
	pg->schema = xstrdup(schema);
	/* The connection text as dbname with expand_dbname, so a URI or keyword string works as
	 * with PQconnectdb; the server lists us as "tachist" unless the text names an application. */
	const char *const keys[] = {"dbname", "fallback_application_name", NULL};
	const char *const vals[] = {conninfo, "tachist", NULL};
	pg->conn = PQconnectdbParams(keys, vals, 1);
	if (!pg->conn || PQstatus(pg->conn) != CONNECTION_OK) {
		char *m = pg_message(pg->conn, NULL);
		store_set_err(err, "%s: cannot connect to the PostgreSQL server: %s", pg->shown, m);
		free(m);
		store_pg_close(pg);
		return -1;
	}
	/* A writer serialises schema creation on an advisory lock; a reader takes one snapshot. */
	char *sql = create
		? xasprintf("SET client_min_messages = warning; SET extra_float_digits = 1;"
			    " SET TIME ZONE 'UTC'; BEGIN; SELECT pg_advisory_xact_lock(%d);"
			    " SET LOCAL search_path = %s", STORE_APPLICATION_ID, schema)
		: xasprintf("SET client_min_messages = warning; SET extra_float_digits = 1;"
			    " SET TIME ZONE 'UTC'; BEGIN ISOLATION LEVEL REPEATABLE READ, READ ONLY;"
			    " SET LOCAL search_path = %s", schema);
	int rc = pg_exec_owned(pg, sql, err, "setting up");
	if (!rc && create) {
		const char *vals[1] = {schema};
		PGresult *r = pg_query(pg, "SELECT 1 FROM pg_namespace WHERE nspname = $1", 1, vals,
				       err, "reading the schema");
		rc = r ? 0 : -1;
		if (r && PQntuples(r) == 0)
			rc = pg_exec_owned(pg, xasprintf("CREATE SCHEMA %s", schema), err,
					   "creating the schema");
		PQclear(r);
	}
	if (!rc)
		rc = pg_schema_check(pg, create, err);
	if (!rc && create)
		rc = pg_exec(pg, "COMMIT", err, "creating the tables");
	if (!rc) {
		char *sp = xasprintf("SET search_path = %s", schema);
		rc = pg_exec_owned(pg, sp, err, "setting up");
	}
	if (rc) {
		store_pg_close(pg);
		return -1;
	}
	*out = pg;
	return 0;
}

int store_pg_open(const char *conninfo, const char *schema, struct store_pg **out, char **err)
{
	return pg_connect(conninfo, schema, true, out, err);
}

void store_pg_close(struct store_pg *pg)
{
	if (!pg)
		return;
	PQfinish(pg->conn);
	free(pg->shown);
	free(pg->schema);
	free(pg);
}

bool store_pg_alive(const struct store_pg *pg)
{
	return pg && !pg->lost && PQstatus(pg->conn) == CONNECTION_OK;
}

/* ---- COPY data ---- */

struct copybuf {
	char *b;
	size_t n, cap;
};

static void cb_put(struct copybuf *c, const char *s, size_t n)
{
	if (c->n + n + 1 > c->cap) {
		c->cap = (c->n + n + 1) * 2;
		c->b = xrealloc(c->b, c->cap);
	}
	memcpy(c->b + c->n, s, n);
	c->n += n;
}

static void cb_str(struct copybuf *c, const char *s)
{
	cb_put(c, s, strlen(s));
}

/* COPY's binary format: a signature and two 32-bit words before the rows, a 16-bit -1 after
 * them; each row a 16-bit field count, each field a 32-bit length (-1 for NULL) and its bytes in
 * the type's binary form, all integers big-endian. The server then converts no text to numbers,
 * which is most of the work of taking a row. */
static const char copy_signature[11] = {'P', 'G', 'C', 'O', 'P', 'Y', '\n', '\377', '\r', '\n',
					'\0'};

static void cb_be(struct copybuf *c, uint64_t v, int bytes)
{
	char b[8];
	for (int i = 0; i < bytes; i++)
		b[i] = (char)(v >> (8 * (bytes - 1 - i)));
	cb_put(c, b, (size_t)bytes);
}

static int hexval(int ch)
{
	return ch >= '0' && ch <= '9' ? ch - '0' : ch >= 'a' && ch <= 'f' ? ch - 'a' + 10
		: ch >= 'A' && ch <= 'F' ? ch - 'A' + 10 : -1;
}

/* The 16 bytes of a UUID written 8-4-4-4-12 in hex; -1 when S is not one. */
static int uuid_bytes(const unsigned char *s, size_t n, unsigned char out[16])
{
	if (n != 36)
		return -1;
	int k = 0;
	for (size_t i = 0; i < 36; i++) {
		if (i == 8 || i == 13 || i == 18 || i == 23) {
			if (s[i] != '-')
				return -1;
			continue;
		}
		int hi = hexval(s[i]), lo = hexval(s[i + 1]);
		if (hi < 0 || lo < 0)
			return -1;
		out[k++] = (unsigned char)(hi << 4 | lo);
		i++;
	}
	return 0;
}

/* Column I of statement ST as a binary COPY field of store type T (-1: a blob, as bytea). A value
 * the server's type cannot hold (an integer out of range, a boolean other than 0 or 1, an id that
 * is not a UUID) is an error naming the column, as the server would refuse it in text form. */
static int cb_field(struct copybuf *c, sqlite3_stmt *st, int i, int t, char **err)
{
	if (sqlite3_column_type(st, i) == SQLITE_NULL) {
		cb_be(c, UINT32_MAX, 4);
		return 0;
	}
	if (t < 0) {
		const void *b = sqlite3_column_blob(st, i);
		int n = sqlite3_column_bytes(st, i);
		cb_be(c, (uint32_t)n, 4);
		cb_put(c, b, (size_t)n);
		return 0;
	}
	switch ((enum store_type)t) {
	case STORE_INT: {
		int64_t v = sqlite3_column_int64(st, i);
		if (v < INT32_MIN || v > INT32_MAX)
			break;
		cb_be(c, 4, 4);
		cb_be(c, (uint32_t)(int32_t)v, 4);
		return 0;
	}
	case STORE_INT64:
	case STORE_SEED:
		cb_be(c, 8, 4);
		cb_be(c, (uint64_t)sqlite3_column_int64(st, i), 8);
		return 0;
	case STORE_BOOL: {
		int64_t v = sqlite3_column_int64(st, i);
		if (v != 0 && v != 1)
			break;
		cb_be(c, 1, 4);
		cb_put(c, v ? "\1" : "\0", 1);
		return 0;
	}
	case STORE_REAL: {
		double d = sqlite3_column_double(st, i);
		uint64_t bits;
		memcpy(&bits, &d, sizeof bits);
		cb_be(c, 8, 4);
		cb_be(c, bits, 8);
		return 0;
	}
	case STORE_UUID: {
		unsigned char u[16];
		if (uuid_bytes(sqlite3_column_text(st, i), (size_t)sqlite3_column_bytes(st, i), u))
			break;
		cb_be(c, 16, 4);
		cb_put(c, (const char *)u, 16);
		return 0;
	}
	case STORE_JSON: {   /* jsonb: a version byte (1), then the text */
		int n = sqlite3_column_bytes(st, i);
		const unsigned char *s = sqlite3_column_text(st, i);
		cb_be(c, (uint32_t)n + 1, 4);
		cb_put(c, "\1", 1);
		cb_put(c, (const char *)s, (size_t)n);
		return 0;
	}
	case STORE_TEXT:
	case STORE_HASH:
	case STORE_STATUS: {
		const unsigned char *s = sqlite3_column_text(st, i);
		int n = sqlite3_column_bytes(st, i);
		cb_be(c, (uint32_t)n, 4);
		cb_put(c, (const char *)s, (size_t)n);
		return 0;
	}
	case STORE_TIME:   /* no COPYed table has one (sessions go in by INSERT) */
		break;
	}
	store_set_err(err, "the source's column %s holds a value the server's %s cannot take "
		      "('%s')", sqlite3_column_name(st, i),
		      store_type_sql((enum store_type)(t < 0 ? STORE_TEXT : t), true),
		      sqlite3_column_text(st, i) ? (const char *)sqlite3_column_text(st, i) : "");
	return -1;
}

static int cb_flush(struct store_pg *pg, struct copybuf *c, char **err)
{
	if (c->n && PQputCopyData(pg->conn, c->b, (int)c->n) != 1)
		return pg_fail(pg, NULL, err, "sending rows");
	c->n = 0;
	return 0;
}

/* One table's rows of a session: SQL selects them from the source (parameter 1: the session),
 * TYPES gives each column's store type (-1 for a blob); COPY_SQL receives them. *ROWS gets the
 * number of rows sent. */
static int copy_rows(struct store_pg *pg, struct store *src, const char *sql, const int *types,
		     int ncols, const char *copy_sql, const char *session, size_t *rows, char **err)
{
	sqlite3_stmt *st = store_prep(src, sql, err, "reading the source");
	if (!st)
		return -1;
	store_bind_text(st, 1, session);
	PGresult *r = PQexec(pg->conn, copy_sql);
	if (PQresultStatus(r) != PGRES_COPY_IN) {
		sqlite3_finalize(st);
		return pg_fail(pg, r, err, "starting to send rows");
	}
	PQclear(r);
	struct copybuf c = {0};
	int rc = 0, step = SQLITE_DONE;
	cb_put(&c, copy_signature, sizeof copy_signature);
	cb_be(&c, 0, 4);   /* flags */
	cb_be(&c, 0, 4);   /* header extension length */
	*rows = 0;
	while (!rc && (step = sqlite3_step(st)) == SQLITE_ROW) {
		cb_be(&c, (uint16_t)ncols, 2);
		for (int i = 0; i < ncols && !rc; i++)
			rc = cb_field(&c, st, i, types[i], err);
		(*rows)++;
		/* Small pieces keep the server busy while the next rows are read: with 256 KB
		 * pieces both sides waited on each other and a million rows took half as long
		 * again (measured with tests/bench/bench_pool_pg.sh). */
		if (!rc && c.n >= (1u << 14))
			rc = cb_flush(pg, &c, err);
	}
	if (!rc && step != SQLITE_DONE)
		rc = store_db_fail(src, err, "reading the source");
	if (!rc) {
		cb_be(&c, UINT16_MAX, 2);   /* the trailer: -1 */
		rc = cb_flush(pg, &c, err);
	}
	free(c.b);
	sqlite3_finalize(st);
	if (PQputCopyEnd(pg->conn, rc ? "source read failed" : NULL) != 1 && !rc)
		rc = pg_fail(pg, NULL, err, "sending rows");
	while ((r = PQgetResult(pg->conn))) {
		if (PQresultStatus(r) != PGRES_COMMAND_OK && !rc)
			rc = pg_fail(pg, r, err, "storing rows");
		else
			PQclear(r);
	}
	return rc;
}

/* ---- pushing one session ---- */

/* The types of table T's columns, in table order. */
static int *table_types(const struct store_table *t)
{
	int *v = xmalloc(t->ncols * sizeof *v);
	for (size_t i = 0; i < t->ncols; i++)
		v[i] = (int)t->cols[i].type;
	return v;
}

static const int frame_types[] = {STORE_UUID, STORE_INT, STORE_INT, -1};
static const int event_types[] = {STORE_UUID, STORE_INT, STORE_INT64, STORE_TEXT, STORE_TEXT};

/* The session row: inserted, or replacing the server's while that one is running or
 * interrupted (a finished state is never overwritten). *CHANGED: a row was written. */
static int push_session_row(struct store_pg *pg, struct store *src, const char *id,
			    bool *changed, char **err)
{
	const struct store_table *t = &store_sessions_table;
	char *cols = store_col_list(t, "", true);
	char *sel = xasprintf("SELECT %s FROM sessions WHERE id = ?1", cols);
	sqlite3_stmt *st = store_prep(src, sel, err, "reading the source");
	free(sel);
	if (!st) {
		free(cols);
		return -1;
	}
	store_bind_text(st, 1, id);
	int rc = -1;
	if (sqlite3_step(st) != SQLITE_ROW) {
		store_db_fail(src, err, "reading the source");
		goto done;
	}
	size_t len = strlen(cols) * 3 + t->ncols * 24 + 256;
	char *sql = xmalloc(len), *q = sql;
	q += sprintf(q, "INSERT INTO sessions (%s) VALUES (", cols);
	for (size_t i = 0; i < t->ncols; i++)
		q += sprintf(q, "%s$%zu", i ? ", " : "", i + 1);
	q += sprintf(q, ") ON CONFLICT (id) DO UPDATE SET ");
	for (size_t i = 1; i < t->ncols; i++)
		q += sprintf(q, "%s%s = EXCLUDED.%s", i > 1 ? ", " : "", t->cols[i].name,
			     t->cols[i].name);
	sprintf(q, " WHERE sessions.status IN ('running', 'interrupted')");
	char **vals = xcalloc(t->ncols, sizeof *vals);
	for (size_t i = 0; i < t->ncols; i++) {
		if (sqlite3_column_type(st, (int)i) == SQLITE_NULL)
			continue;
		if (t->cols[i].type == STORE_REAL)
			vals[i] = xasprintf("%.17g", sqlite3_column_double(st, (int)i));
		else
			vals[i] = xstrdup(store_col_text(st, (int)i));
	}
	PGresult *r = PQexecParams(pg->conn, sql, (int)t->ncols, NULL, (const char *const *)vals,
				   NULL, NULL, 0);
	if (PQresultStatus(r) != PGRES_COMMAND_OK) {
		pg_fail(pg, r, err, "storing a session");
	} else {
		*changed = atoi(PQcmdTuples(r)) > 0;
		PQclear(r);
		rc = 0;
	}
	for (size_t i = 0; i < t->ncols; i++)
		free(vals[i]);
	free(vals);
	free(sql);
done:
	sqlite3_finalize(st);
	free(cols);
	return rc;
}

/* Staging tables for a session the server holds already: rows go there by COPY, then into the
 * real tables skipping those present. Temporary, emptied at each commit. */
static int ensure_staging(struct store_pg *pg, char **err)
{
	if (pg->staging)
		return 0;
	if (pg_exec(pg, "CREATE TEMP TABLE IF NOT EXISTS stage_trials (LIKE trials) ON COMMIT "
		    "DELETE ROWS; CREATE TEMP TABLE IF NOT EXISTS stage_frames (LIKE frames) ON "
		    "COMMIT DELETE ROWS; CREATE TEMP TABLE IF NOT EXISTS stage_events (LIKE events) "
		    "ON COMMIT DELETE ROWS", err, "preparing to update a session"))
		return -1;
	pg->staging = true;
	return 0;
}

/* Sends the rows of one table: straight in for a new session, else through staging. */
static int push_table(struct store_pg *pg, struct store *src, const char *table,
		      const char *cols, const int *types, int ncols, const char *id, bool is_new,
		      size_t *added, char **err)
{
	char *sel = xasprintf("SELECT %s FROM %s WHERE session_id = ?1", cols, table);
	char *copy = xasprintf("COPY %s%s (%s) FROM STDIN (FORMAT binary)", is_new ? "" : "stage_",
			       table, cols);
	size_t rows = 0;
	int rc = copy_rows(pg, src, sel, types, ncols, copy, id, &rows, err);
	free(sel);
	free(copy);
	if (rc || is_new) {
		if (added)
			*added += rows;
		return rc;
	}
	char *ins = xasprintf("INSERT INTO %s (%s) SELECT %s FROM stage_%s ON CONFLICT DO NOTHING",
			      table, cols, cols, table);
	PGresult *r = PQexec(pg->conn, ins);
	free(ins);
	if (PQresultStatus(r) != PGRES_COMMAND_OK)
		return pg_fail(pg, r, err, "storing rows");
	if (added)
		*added += (size_t)atol(PQcmdTuples(r));
	PQclear(r);
	return 0;
}

/* One session in one server transaction. */
static int push_one(struct store_pg *pg, struct store *src, const char *id, bool is_new,
		    struct store_pg_stats *st, char **err)
{
	if (pg_exec(pg, "BEGIN", err, "starting a transaction"))
		return -1;
	bool changed = false;
	size_t trials = 0, events = 0;
	char *tcols = store_col_list(&store_trials_table, "", true);
	int *ttypes = table_types(&store_trials_table);
	int rc = push_session_row(pg, src, id, &changed, err);
	if (!rc && !is_new)
		rc = ensure_staging(pg, err);
	if (!rc)
		rc = push_table(pg, src, "trials", tcols, ttypes, (int)store_trials_table.ncols, id,
				is_new, &trials, err);
	if (!rc)
		rc = push_table(pg, src, "frames", "session_id, trial, n, flips", frame_types, 4, id,
				is_new, NULL, err);
	if (!rc)
		rc = push_table(pg, src, "events", "session_id, seq, mono_ns, kind, detail",
				event_types, 5, id, is_new, &events, err);
	free(tcols);
	free(ttypes);
	if (!rc)
		rc = pg_exec(pg, "COMMIT", err, "committing a session");
	if (rc) {
		if (store_pg_alive(pg))
			PQclear(PQexec(pg->conn, "ROLLBACK"));
		return -1;
	}
	if (is_new)
		st->sessions_added++;
	else if (changed || trials || events)
		st->sessions_updated++;
	else
		st->sessions_same++;
	st->trials_added += trials;
	st->events_added += events;
	return 0;
}

/* ---- pushing a file ---- */

/* A session of the source: its status and the last trial and event index it holds (-1: none).
 * Trials and events are only ever appended, so a session whose last indices the server holds
 * too has nothing new; the maxima come from the primary keys without reading the rows. */
struct src_session {
	char id[37];
	char status[16];
	long last_trial, last_event;
};

static int list_source(struct store *src, struct src_session **out, size_t *n, char **err)
{
	sqlite3_stmt *st = store_prep(src, "SELECT id, status, coalesce((SELECT max(trial) FROM trials"
				      " t WHERE t.session_id = s.id), -1), coalesce((SELECT max(seq)"
				      " FROM events e WHERE e.session_id = s.id), -1) FROM sessions s"
				      " ORDER BY started_utc, id",
				      err, "reading the source");
	if (!st)
		return -1;
	size_t cap = 16;
	*out = xmalloc(cap * sizeof **out);
	*n = 0;
	int step;
	while ((step = sqlite3_step(st)) == SQLITE_ROW) {
		if (*n == cap)
			*out = xrealloc(*out, (cap *= 2) * sizeof **out);
		struct src_session *v = &(*out)[(*n)++];
		snprintf(v->id, sizeof v->id, "%s", store_col_text(st, 0) ? store_col_text(st, 0) : "");
		snprintf(v->status, sizeof v->status, "%s",
			 store_col_text(st, 1) ? store_col_text(st, 1) : "");
		v->last_trial = (long)sqlite3_column_int64(st, 2);
		v->last_event = (long)sqlite3_column_int64(st, 3);
	}
	sqlite3_finalize(st);
	if (step != SQLITE_DONE)
		return store_db_fail(src, err, "reading the source");
	return 0;
}

/* The server's state of the sessions in V: a result with id, status, last trial, last event. */
static PGresult *server_state(struct store_pg *pg, const struct src_session *v, size_t n,
			      char **err)
{
	struct copybuf a = {0};
	cb_str(&a, "{");
	for (size_t i = 0; i < n; i++) {
		if (i)
			cb_str(&a, ",");
		cb_str(&a, v[i].id);
	}
	cb_put(&a, "}", 2);
	const char *vals[1] = {a.b};
	PGresult *r = pg_query(pg, "SELECT s.id::text, s.status, coalesce((SELECT max(trial) FROM"
			       " trials t WHERE t.session_id = s.id), -1), coalesce((SELECT max(seq)"
			       " FROM events e WHERE e.session_id = s.id), -1) FROM sessions s"
			       " WHERE s.id = ANY($1::uuid[])",
			       1, vals, err, "reading what the server holds");
	free(a.b);
	return r;
}

int store_pg_push(struct store_pg *pg, const char *src_path, bool ended_only,
		  struct store_pg_stats *out, char **err)
{
	assert(pg && src_path);
	struct store_pg_stats st = {0};
	struct store *src;
	if (store_open_existing(src_path, &src, err)) {
		if (out)
			*out = st;
		return -1;
	}
	st.source_version = STORE_SCHEMA_VERSION;
	if (src->tmp)
		st.source_version = -1;   /* read through a migrated copy */
	struct src_session *v = NULL;
	size_t n = 0;
	int rc = store_exec(src, "BEGIN", err, "reading the source");
	if (!rc)
		rc = list_source(src, &v, &n, err);
	PGresult *srv = NULL;
	if (!rc && n)
		srv = server_state(pg, v, n, err);
	if (!rc && n && !srv)
		rc = -1;
	char *first_err = NULL;
	for (size_t i = 0; !rc && i < n; i++) {
		if (ended_only && !strcmp(v[i].status, "running")) {
			st.sessions_running++;
			continue;
		}
		int row = -1;
		for (int k = 0; k < PQntuples(srv); k++)
			if (!strcmp(PQgetvalue(srv, k, 0), v[i].id))
				row = k;
		if (row >= 0) {
			const char *sst = PQgetvalue(srv, row, 1);
			bool open = !strcmp(sst, "running") || !strcmp(sst, "interrupted");
			if (v[i].last_trial <= atol(PQgetvalue(srv, row, 2)) &&
			    v[i].last_event <= atol(PQgetvalue(srv, row, 3)) &&
			    (!open || !strcmp(sst, v[i].status))) {
				st.sessions_same++;
				continue;
			}
		}
		char *e = NULL;
		if (push_one(pg, src, v[i].id, row < 0, &st, &e)) {
			st.sessions_failed++;
			if (!first_err)
				first_err = e;
			else
				free(e);
			if (!store_pg_alive(pg))
				break;   /* the rest would fail the same way */
		}
	}
	PQclear(srv);
	sqlite3_exec(src->db, "COMMIT", NULL, NULL, NULL);
	store_close(src);
	free(v);
	if (!rc && first_err) {
		store_set_err(err, "%s", first_err);
		rc = -1;
	}
	free(first_err);
	if (out)
		*out = st;
	return rc;
}

/* ---- reading the server back ---- */

/* Undoes COPY text escapes in place; returns the new length. */
static size_t unescape(char *s, size_t n)
{
	size_t o = 0;
	for (size_t i = 0; i < n; i++) {
		if (s[i] != '\\' || i + 1 == n) {
			s[o++] = s[i];
			continue;
		}
		char c = s[++i];
		s[o++] = c == 't' ? '\t' : c == 'n' ? '\n' : c == 'r' ? '\r' : c == 'b' ? '\b'
			 : c == 'f' ? '\f' : c == 'v' ? '\v' : c;
	}
	return o;
}

/* Binds one COPY field (escaped text of length N) as parameter I, typed by T (-1: bytea). */
static void bind_field(sqlite3_stmt *st, int i, int t, char *f, size_t n)
{
	if (n == 2 && f[0] == '\\' && f[1] == 'N') {
		sqlite3_bind_null(st, i);
		return;
	}
	n = unescape(f, n);
	f[n] = '\0';
	if (t < 0) {
		/* bytea's hex form: \x then two digits a byte */
		size_t nb = n > 2 ? (n - 2) / 2 : 0;
		unsigned char *b = xmalloc(nb ? nb : 1);
		for (size_t k = 0; k < nb; k++) {
			int hi = hexval(f[2 + 2 * k]), lo = hexval(f[3 + 2 * k]);
			b[k] = (unsigned char)((hi < 0 ? 0 : hi) << 4 | (lo < 0 ? 0 : lo));
		}
		sqlite3_bind_blob(st, i, b, (int)nb, free);
	} else if (t == STORE_REAL) {
		sqlite3_bind_double(st, i, strtod(f, NULL));
	} else if (t == STORE_INT || t == STORE_INT64 || t == STORE_SEED || t == STORE_BOOL) {
		sqlite3_bind_int64(st, i, strtoll(f, NULL, 10));
	} else {
		sqlite3_bind_text(st, i, f, (int)n, SQLITE_TRANSIENT);
	}
}

/* The SELECT expression of column NAME of type T, as SQLite keeps it. */
static void select_expr(struct copybuf *c, const char *name, int t)
{
	char e[160];
	if (t == STORE_BOOL)
		snprintf(e, sizeof e, "%s::int", name);
	else if (t == STORE_TIME)
		snprintf(e, sizeof e, "to_char(%s AT TIME ZONE 'UTC', "
			 "'YYYY-MM-DD\"T\"HH24:MI:SS.MS\"Z\"')", name);
	else
		snprintf(e, sizeof e, "%s", name);
	cb_str(c, c->n ? ", " : "");
	cb_str(c, e);
}

/* Copies TABLE (columns NAMES with TYPES) from the server into the same table of DST. */
static int fetch_table(struct store_pg *pg, struct store *dst, const char *table,
		       const char *const *names, const int *types, int ncols, char **err)
{
	struct copybuf sel = {0}, ins = {0};
	for (int i = 0; i < ncols; i++) {
		select_expr(&sel, names[i], types[i]);
		cb_str(&ins, i ? ", " : "");
		cb_str(&ins, names[i]);
	}
	cb_put(&sel, "", 1);
	cb_put(&ins, "", 1);
	char *copy = xasprintf("COPY (SELECT %s FROM %s) TO STDOUT", sel.b, table);
	char *qs = xmalloc((size_t)ncols * 4 + 1), *q = qs;
	for (int i = 0; i < ncols; i++)
		q += sprintf(q, "%s?", i ? "," : "");
	char *isql = xasprintf("INSERT INTO %s (%s) VALUES (%s)", table, ins.b, qs);
	free(qs);
	free(sel.b);
	free(ins.b);
	sqlite3_stmt *st = store_prep(dst, isql, err, "writing the local copy");
	free(isql);
	PGresult *r = st ? PQexec(pg->conn, copy) : NULL;
	free(copy);
	if (!st)
		return -1;
	if (PQresultStatus(r) != PGRES_COPY_OUT) {
		sqlite3_finalize(st);
		return pg_fail(pg, r, err, "reading the server");
	}
	PQclear(r);
	int rc = 0, len;
	char *line;
	while ((len = PQgetCopyData(pg->conn, &line, 0)) > 0) {
		if (rc) {
			PQfreemem(line);
			continue;
		}
		char *f = line, *end = line + len;
		if (end > f && end[-1] == '\n')
			*--end = '\0';
		for (int i = 0; i < ncols; i++) {
			char *tab = memchr(f, '\t', (size_t)(end - f));
			char *fe = tab ? tab : end;
			bind_field(st, i + 1, types[i], f, (size_t)(fe - f));
			f = tab ? tab + 1 : end;
		}
		if (sqlite3_step(st) != SQLITE_DONE)
			rc = store_db_fail(dst, err, "writing the local copy");
		sqlite3_reset(st);
		sqlite3_clear_bindings(st);
		PQfreemem(line);
	}
	sqlite3_finalize(st);
	if (len == -2 && !rc)
		rc = pg_fail(pg, NULL, err, "reading the server");
	while ((r = PQgetResult(pg->conn))) {
		if (PQresultStatus(r) != PGRES_COMMAND_OK && !rc)
			rc = pg_fail(pg, r, err, "reading the server");
		else
			PQclear(r);
	}
	return rc;
}

static int fetch_column_table(struct store_pg *pg, struct store *dst, const struct store_table *t,
			      char **err)
{
	const char **names = xmalloc(t->ncols * sizeof *names);
	int *types = table_types(t);
	for (size_t i = 0; i < t->ncols; i++)
		names[i] = t->cols[i].name;
	int rc = fetch_table(pg, dst, t->name, names, types, (int)t->ncols, err);
	free(names);
	free(types);
	return rc;
}

int store_pg_fetch(const char *conninfo, const char *schema, char **tmp, char **err)
{
	*tmp = NULL;
	struct store_pg *pg;
	if (pg_connect(conninfo, schema, false, &pg, err))
		return -1;
	const char *dir = getenv("TMPDIR");
	char *path = xasprintf("%s/tachist-server-XXXXXX", dir && *dir ? dir : "/tmp");
	int fd = mkstemp(path);
	if (fd < 0) {
		store_set_err(err, "cannot make a temporary copy of %s in %s: %s", pg->shown,
			      dir && *dir ? dir : "/tmp", strerror(errno));
		free(path);
		store_pg_close(pg);
		return -1;
	}
	close(fd);
	struct store *dst = NULL;
	static const char *const fnames[] = {"session_id", "trial", "n", "flips"};
	static const char *const enames[] = {"session_id", "seq", "mono_ns", "kind", "detail"};
	int rc = store_open(path, &dst, err);
	if (!rc)
		rc = store_exec(dst, "PRAGMA foreign_keys = OFF; BEGIN", err, "writing the local copy");
	if (!rc)
		rc = fetch_column_table(pg, dst, &store_sessions_table, err);
	if (!rc)
		rc = fetch_column_table(pg, dst, &store_trials_table, err);
	if (!rc)
		rc = fetch_table(pg, dst, "frames", fnames, frame_types, 4, err);
	if (!rc)
		rc = fetch_table(pg, dst, "events", enames, event_types, 5, err);
	if (!rc)
		rc = store_exec(dst, "COMMIT", err, "writing the local copy");
	store_close(dst);
	store_pg_close(pg);
	if (rc) {
		store_unlink_db(path);
		free(path);
		return -1;
	}
	*tmp = path;
	return 0;
}
