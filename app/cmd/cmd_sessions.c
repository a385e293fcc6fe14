/* cmd_sessions — `tachist sessions [--db FILE] [--json]`: the sessions in a database with their
 * status and trial counts, so interrupted ones can be found and resumed. Reads only. */
#include <cJSON.h>
#include <inttypes.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "cmd.h"
#include "store.h"

static cJSON *session_json(const struct store_session *ss)
{
	cJSON *o = cJSON_CreateObject();
	cJSON_AddStringToObject(o, "id", ss->id);
	cJSON_AddStringToObject(o, "subject", ss->subject ? ss->subject : "");
	if (ss->protocol_name)
		cJSON_AddStringToObject(o, "protocol", ss->protocol_name);
	else
		cJSON_AddNullToObject(o, "protocol");
	cJSON_AddStringToObject(o, "status", store_status_name(ss->status));
	cJSON_AddNumberToObject(o, "trials", (double)ss->ntrials);
	cJSON_AddStringToObject(o, "started_utc", ss->started_utc ? ss->started_utc : "");
	if (ss->ended_utc)
		cJSON_AddStringToObject(o, "ended_utc", ss->ended_utc);
	else
		cJSON_AddNullToObject(o, "ended_utc");
	char seed[24];
	snprintf(seed, sizeof seed, "%" PRIu64, ss->seed);
	cJSON_AddRawToObject(o, "seed", seed);
	if (ss->timing_mode)
		cJSON_AddStringToObject(o, "timing_mode", ss->timing_mode);
	else
		cJSON_AddNullToObject(o, "timing_mode");
	if (ss->refresh_hz > 0)
		cJSON_AddNumberToObject(o, "refresh_hz", ss->refresh_hz);
	else
		cJSON_AddNullToObject(o, "refresh_hz");
	if (ss->observer)
		cJSON_AddStringToObject(o, "observer", ss->observer);
	else
		cJSON_AddNullToObject(o, "observer");
	cJSON_AddStringToObject(o, "version", ss->version ? ss->version : "");
	return o;
}

enum { O_DB, O_SCHEMA, O_SUBJECT, O_JSON };
const struct opts_row cmd_sessions_opts[] = {
	[O_DB] = {"db", "FILE", "the database to read (default tachist.db), or a PostgreSQL server"},
	[O_SCHEMA] = {"schema", "NAME", "with --db SERVER: the schema to read (default tachist)"},
	[O_SUBJECT] = {"subject", "ID", "only this subject's sessions"},
	[O_JSON] = {"json", NULL, "one JSON document on standard output"},
	OPTS_END,
};

int cmd_sessions(int argc, char **argv)
{
	const char *db = "tachist.db", *subject = NULL, *schema = NULL, *val;
	bool json = false;
	struct opts p;
	opts_begin(&p, "sessions", cmd_sessions_opts, argc, argv);
	for (int k; (k = opts_next(&p, &val)) != OPTS_DONE;) {
		switch (k) {
		case O_DB: db = val; break;
		case O_SCHEMA: schema = val; break;
		case O_SUBJECT: subject = val; break;
		case O_JSON: json = true; break;
		case OPTS_ARG: return opts_usage("sessions", "unexpected argument '%s'", val);
		default: return EXIT_USAGE;
		}
	}
	if (cmd_server_schema("sessions", "--db", db, schema))
		return EXIT_USAGE;
	struct store *s;
	char *err = NULL;
	if (store_open_reader(db, schema, &s, &err)) {
		fprintf(stderr, "tachist sessions: %s\n", err);
		free(err);
		return EXIT_PROBLEMS;
	}
	struct store_session *v;
	size_t n;
	if (store_sessions_list(s, subject, &v, &n, &err)) {
		fprintf(stderr, "tachist sessions: %s\n", err);
		free(err);
		store_close(s);
		return EXIT_PROBLEMS;
	}
	/* A session whose process on this host is gone shows as interrupted at once (the next
	 * run records it so; listing never writes). */
	for (size_t i = 0; i < n; i++)
		if (store_session_orphaned(&v[i]))
			v[i].status = STORE_INTERRUPTED;
	if (json) {
		cJSON *doc = cJSON_CreateObject();
		cJSON_AddStringToObject(doc, "db", db);
		cJSON *a = cJSON_AddArrayToObject(doc, "sessions");
		for (size_t i = 0; i < n; i++)
			cJSON_AddItemToArray(a, session_json(&v[i]));
		char *t = cJSON_Print(doc);
		printf("%s\n", t);
		cJSON_free(t);
		cJSON_Delete(doc);
	} else if (n == 0) {
		printf("no sessions in %s\n", db);
	} else {
		printf("%-8s  %-12s  %-16s  %-11s  %6s  %s\n", "session", "subject", "protocol",
		       "status", "trials", "started (UTC)");
		size_t interrupted = 0;
		for (size_t i = 0; i < n; i++) {
			const struct store_session *ss = &v[i];
			char started[20] = "";
			if (ss->started_utc) {
				snprintf(started, sizeof started, "%.19s", ss->started_utc);
				char *t = strchr(started, 'T');
				if (t)
					*t = ' ';
			}
			printf("%.8s  %-12s  %-16.16s  %-11s  %6zu  %s\n", ss->id, ss->subject,
			       ss->protocol_name ? ss->protocol_name : "-",
			       store_status_name(ss->status), ss->ntrials, started);
			interrupted += ss->status == STORE_INTERRUPTED;
		}
		if (interrupted)
			printf("\n%zu interrupted: continue one with tachist run PROTOCOL "
			       "--resume SESSION\n", interrupted);
	}
	store_sessions_free(v, n);
	store_close(s);
	return EXIT_OK;
}
