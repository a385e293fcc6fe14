/* cmd_pool — `tachist pool --into FILE|SERVER DB...`: pools databases from several rigs into one.
 * Sessions are keyed by UUID and trials by (session, index), so pooling a file twice adds
 * nothing. Into a file, each source goes in its own transaction (store_pool_from); into a
 * PostgreSQL server (a libpq URI or keyword string), each session does (store_pg_push), and
 * --follow keeps sending the sessions of the given rig databases as they end, retrying with
 * backoff while the server cannot be reached, until SIGINT or SIGTERM. */
#include <signal.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "cmd.h"
#include "opts.h"
#include "run.h"
#include "store.h"
#include "store_pg.h"

enum { O_INTO, O_SCHEMA, O_FOLLOW, O_INTERVAL };
const struct opts_row cmd_pool_opts[] = {
	[O_INTO] = {"into", "TARGET", "the database to pool into: a file, or a PostgreSQL server "
		    "(postgresql://... or a libpq keyword string)"},
	[O_SCHEMA] = {"schema", "NAME", "the server's schema to pool into (default tachist)"},
	[O_FOLLOW] = {"follow", NULL, "keep sending each session to the server once it has ended"},
	[O_INTERVAL] = {"interval", "SECONDS", "with --follow: how often to look for ended "
			"sessions (default 5)"},
	OPTS_END,
};

static void on_signal(int sig)
{
	(void)sig;
	run_request_stop();
}

/* Sleeps SECONDS in short steps, returning early once a stop was requested. */
static void nap(double seconds)
{
	for (double left = seconds; left > 0 && !run_stop_requested(); left -= 0.1) {
		struct timespec ts = {0, 100 * 1000 * 1000};
		nanosleep(&ts, NULL);
	}
}

static int pool_into_file(const char *into, const char **srcs, int nsrc)
{
	struct store *s;
	char *err = NULL;
	if (store_open(into, &s, &err)) {
		fprintf(stderr, "tachist pool: %s\n", err);
		free(err);
		return EXIT_PROBLEMS;
	}
	int failed = 0;
	for (int i = 0; i < nsrc; i++) {
		struct store_pool_stats st;
		if (store_pool_from(s, srcs[i], &st, &err)) {
			fprintf(stderr, "tachist pool: %s (nothing from it was added)\n", err);
			free(err);
			err = NULL;
			failed++;
			continue;
		}
		printf("%s: %zu sessions added, %zu updated, %zu trials added, %zu events added",
		       srcs[i], st.sessions_added, st.sessions_updated, st.trials_added,
		       st.events_added);
		if (st.source_version != STORE_SCHEMA_VERSION)
			printf(" (schema version %d read through a migrated copy)", st.source_version);
		printf("\n");
		if (st.trials_conflicting)
			fprintf(stderr, "tachist pool: warning: %s: %zu trials differ from the ones "
				"already in %s; kept those in %s\n", srcs[i], st.trials_conflicting,
				into, into);
	}
	store_close(s);
	return failed ? EXIT_PROBLEMS : EXIT_OK;
}

static void print_pg_stats(const char *src, const struct store_pg_stats *st)
{
	printf("%s: %zu sessions added, %zu updated, %zu trials added, %zu events added", src,
	       st->sessions_added, st->sessions_updated, st->trials_added, st->events_added);
	if (st->sessions_running)
		printf(" (%zu still running, sent once ended)", st->sessions_running);
	printf("\n");
	fflush(stdout);
}

/* One pass over the sources; returns how many failed. Prints what changed (every source when
 * VERBOSE). LAST (NULL, or one slot a source) keeps the last error of each source so a problem
 * that lasts is told once. */
static int push_all(struct store_pg *pg, const char **srcs, int nsrc, bool ended_only,
		    bool verbose, char **last)
{
	int failed = 0;
	for (int i = 0; i < nsrc && store_pg_alive(pg); i++) {
		struct store_pg_stats st;
		char *err = NULL;
		int rc = store_pg_push(pg, srcs[i], ended_only, &st, &err);
		if (verbose || st.sessions_added || st.sessions_updated)
			print_pg_stats(srcs[i], &st);
		if (rc) {
			if (!last || !last[i] || !err || strcmp(last[i], err))
				fprintf(stderr, "tachist pool: %s (the sessions not sent are sent "
					"next time)\n", err ? err : "failed");
			failed++;
		}
		if (last) {
			free(last[i]);
			last[i] = err;
		} else {
			free(err);
		}
	}
	return failed;
}

static int pool_into_server(const char *into, const char *schema, const char **srcs, int nsrc)
{
	struct store_pg *pg;
	char *err = NULL;
	if (store_pg_open(into, schema, &pg, &err)) {
		fprintf(stderr, "tachist pool: %s\n", err);
		free(err);
		return EXIT_PROBLEMS;
	}
	int failed = push_all(pg, srcs, nsrc, false, true, NULL);
	store_pg_close(pg);
	return failed ? EXIT_PROBLEMS : EXIT_OK;
}

/* --follow: connect (retrying with a doubling wait, at most a minute), send what has ended,
 * wait, again; a lost connection starts the retries over. Returns 0 when stopped by a signal. */
static int follow(const char *into, const char *schema, const char **srcs, int nsrc,
		  double interval)
{
	struct sigaction sa = {0};
	sa.sa_handler = on_signal;
	sigemptyset(&sa.sa_mask);
	sigaction(SIGINT, &sa, NULL);
	sigaction(SIGTERM, &sa, NULL);
	struct store_pg *pg = NULL;
	double wait = 1;
	char *last = NULL;   /* the last connection error printed, so an outage is told once */
	char **src_err = xcalloc((size_t)nsrc, sizeof *src_err);
	while (!run_stop_requested()) {
		if (!pg) {
			char *err = NULL;
			if (store_pg_open(into, schema, &pg, &err)) {
				if (!last || strcmp(last, err))
					fprintf(stderr, "tachist pool: %s; trying again (every %.0f s "
						"at most)\n", err, 60.0);
				free(last);
				last = err;
				nap(wait);
				wait = wait * 2 > 60 ? 60 : wait * 2;
				continue;
			}
			if (last)
				fprintf(stderr, "tachist pool: connected again\n");
			free(last);
			last = NULL;
			wait = 1;
		}
		push_all(pg, srcs, nsrc, true, false, src_err);
		if (!store_pg_alive(pg)) {
			store_pg_close(pg);
			pg = NULL;
			continue;
		}
		nap(interval);
	}
	free(last);
	for (int i = 0; i < nsrc; i++)
		free(src_err[i]);
	free(src_err);
	store_pg_close(pg);
	fprintf(stderr, "tachist pool: stopped\n");
	return EXIT_OK;
}

int cmd_pool(int argc, char **argv)
{
	const char *into = NULL, *schema = STORE_PG_DEFAULT_SCHEMA, *val;
	bool follow_on = false, schema_given = false;
	double interval = 5;
	const char **srcs = xcalloc((size_t)argc, sizeof *srcs);
	int nsrc = 0, rc = EXIT_USAGE;
	struct opts p;
	opts_begin(&p, "pool", cmd_pool_opts, argc, argv);
	for (int k; (k = opts_next(&p, &val)) != OPTS_DONE;) {
		char *end;
		switch (k) {
		case O_INTO: into = val; break;
		case O_SCHEMA: schema = val; schema_given = true; break;
		case O_FOLLOW: follow_on = true; break;
		case O_INTERVAL:
			interval = strtod(val, &end);
			if (end == val || *end || !(interval >= 0.1 && interval <= 86400)) {
				rc = opts_usage("pool", "--interval takes seconds from 0.1 to 86400, "
						"not '%s'", val);
				goto done;
			}
			break;
		case OPTS_ARG: srcs[nsrc++] = val; break;
		default: goto done;
		}
	}
	bool server = into && store_pg_is_conninfo(into);
	if (!into || nsrc == 0) {
		rc = opts_usage("pool", "give --into FILE or a server, and at least one database");
		goto done;
	}
	if (!server && follow_on) {
		rc = opts_usage("pool", "--follow needs a PostgreSQL server for --into (postgresql://...)");
		goto done;
	}
	if ((rc = cmd_server_schema("pool", "--into", into, schema_given ? schema : NULL)))
		goto done;
	if (follow_on)
		rc = follow(into, schema, srcs, nsrc, interval);
	else if (server)
		rc = pool_into_server(into, schema, srcs, nsrc);
	else
		rc = pool_into_file(into, srcs, nsrc);
done:
	free(srcs);
	return rc;
}
