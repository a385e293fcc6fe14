/* store_bench — trial commit latency through the store against a bare SQLite insert of the same
 * row, measured side by side in one run (tests/bench/bench_store.sh prints the figures).
 *
 *   store_bench DIR N [FLIPS]
 *
 * Writes N trials with FLIPS flip times each (default 150, about 2.5 s at 60 Hz) through
 * store_trial_put into DIR/store.db, and N times the same row and frame blob into DIR/bare.db
 * with one prepared INSERT pair in BEGIN IMMEDIATE ... COMMIT, with the same pragmas (WAL,
 * synchronous=FULL). The two alternate in rounds of 50 so disk weather hits both alike.
 * Prints "store p50 p99" and "bare p50 p99" in microseconds. This tool (not the program)
 * includes sqlite3.h: the baseline is SQLite itself. */
#include <sqlite3.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "protocol.h"
#include "stimlist.h"
#include "store.h"

static int64_t now_ns(void)
{
	struct timespec ts;
	clock_gettime(CLOCK_MONOTONIC, &ts);
	return (int64_t)ts.tv_sec * 1000000000 + ts.tv_nsec;
}

static int cmp(const void *a, const void *b)
{
	int64_t x = *(const int64_t *)a, y = *(const int64_t *)b;
	return (x > y) - (x < y);
}

static void quantiles(int64_t *v, int n, double *p50, double *p99)
{
	qsort(v, (size_t)n, sizeof *v, cmp);
	*p50 = (double)v[n / 2] / 1000.0;
	*p99 = (double)v[(int)((n - 1) * 0.99)] / 1000.0;
}

static void die_sql(sqlite3 *db, const char *what)
{
	fprintf(stderr, "store_bench: %s: %s\n", what, sqlite3_errmsg(db));
	exit(1);
}

static void exec(sqlite3 *db, const char *sql)
{
	if (sqlite3_exec(db, sql, NULL, NULL, NULL) != SQLITE_OK)
		die_sql(db, sql);
}

int main(int argc, char **argv)
{
	if (argc < 3) {
		fprintf(stderr, "usage: store_bench DIR N [FLIPS]\n");
		return 2;
	}
	int n = atoi(argv[2]), nflips = argc > 3 ? atoi(argv[3]) : 150;
	char *spath = xasprintf("%s/store.db", argv[1]), *bpath = xasprintf("%s/bare.db", argv[1]);

	static char *cats[2] = {"cat", "dog"}, *keys[2] = {"f", "j"};
	static char *names[2] = {"set", "note"}, *vals[2] = {"A", "plain"};
	struct protocol p;
	memset(&p, 0, sizeof p);
	p.nchoices = 2;
	for (int i = 0; i < 2; i++) {
		p.choices[i].category = cats[i];
		p.choices[i].key = keys[i];
	}
	struct protocol_block blk = {0};
	blk.name = "main";
	p.blocks = &blk;
	p.nblocks = 1;
	struct stim item;
	memset(&item, 0, sizeof item);
	item.image = "img/cat_0001.png";
	item.category = "cat";
	item.has_level = true;
	item.level = 0.03;
	item.source = "img/clean_0001.png";
	item.labels = vals;
	struct stimlist l;
	memset(&l, 0, sizeof l);
	l.label_names = names;
	l.nlabels = 2;
	l.items = &item;
	l.n = 1;

	struct store *s;
	char *err = NULL;
	if (store_open(spath, &s, &err)) {
		fprintf(stderr, "store_bench: %s\n", err);
		return 1;
	}
	struct store_session ss;
	memset(&ss, 0, sizeof ss);
	ss.subject = xstrdup("BENCH");
	if (store_session_begin(s, &ss, &err)) {
		fprintf(stderr, "store_bench: %s\n", err);
		return 1;
	}

	sqlite3 *db;
	if (sqlite3_open(bpath, &db) != SQLITE_OK)
		die_sql(db, "open");
	exec(db, "PRAGMA journal_mode = WAL; PRAGMA synchronous = FULL;"
		 "CREATE TABLE IF NOT EXISTS trials (session_id TEXT NOT NULL, trial INTEGER NOT NULL,"
		 " block INTEGER, block_name TEXT, block_trial INTEGER, practice INTEGER, stim INTEGER,"
		 " image TEXT, category TEXT, choice INTEGER, level REAL, source TEXT, labels TEXT,"
		 " response_key TEXT, response INTEGER, response_category TEXT, correct INTEGER,"
		 " rt_ms REAL, timed_out INTEGER, frames_planned INTEGER, frames_actual INTEGER,"
		 " dropped_frames INTEGER, timing_ok INTEGER, onset_ns INTEGER, offset_ns INTEGER,"
		 " start_ns INTEGER, staircase INTEGER, anticipation INTEGER, key_sdl_ms INTEGER,"
		 " level_requested REAL, repeat_of INTEGER, PRIMARY KEY (session_id, trial))"
		 " WITHOUT ROWID;"
		 "CREATE TABLE IF NOT EXISTS frames (session_id TEXT NOT NULL, trial INTEGER NOT NULL,"
		 " n INTEGER, flips BLOB, PRIMARY KEY (session_id, trial)) WITHOUT ROWID;");
	sqlite3_stmt *ins, *fr, *beg, *com;
	if (sqlite3_prepare_v2(db, "INSERT INTO trials VALUES (?1, ?2, 1, 'main', ?2, 0, 0,"
			       " 'img/cat_0001.png', 'cat', 0, 0.03, 'img/clean_0001.png',"
			       " '[\"A\",\"plain\"]', 'f', 0, 'cat', 1, 412.5, 0, 12, 12, 0, 1, ?3,"
			       " ?4, ?5, NULL, 0, 1234, NULL, NULL)", -1, &ins, NULL) ||
	    sqlite3_prepare_v2(db, "INSERT INTO frames VALUES (?1, ?2, ?3, ?4)", -1, &fr, NULL) ||
	    sqlite3_prepare_v2(db, "BEGIN IMMEDIATE", -1, &beg, NULL) ||
	    sqlite3_prepare_v2(db, "COMMIT", -1, &com, NULL))
		die_sql(db, "prepare");

	int64_t *flips = xcalloc((size_t)nflips + 1, sizeof *flips);
	unsigned char *blob = xcalloc((size_t)nflips * 8 + 1, 1);
	int64_t *ts = xcalloc((size_t)n, sizeof *ts), *tb = xcalloc((size_t)n, sizeof *tb);
	for (int done = 0; done < n;) {
		int round = n - done < 50 ? n - done : 50;
		for (int i = done; i < done + round; i++) {
			struct trial_record t;
			memset(&t, 0, sizeof t);
			t.trial = i;
			t.block_trial = i;
			t.staircase = -1;
			t.repeat_of = -1;
			t.has_level = true;
			t.level = 0.03;
			t.response = 0;
			strcpy(t.response_key, "f");
			t.correct = 1;
			t.has_rt = true;
			t.rt_ms = 412.5;
			t.key_sdl_ms = 1234;
			t.frames_planned = t.frames_actual = 12;
			t.timing_ok = true;
			t.start_ns = (int64_t)i * 2500000000LL;
			t.onset_ns = t.start_ns + 700000000;
			t.offset_ns = t.onset_ns + 200000000;
			for (int f = 0; f < nflips; f++)
				flips[f] = t.start_ns + f * 16666667LL;
			t.flips = flips;
			t.nflips = (size_t)nflips;
			int64_t a = now_ns();
			if (store_trial_put(s, ss.id, &t, &p, &l, &err)) {
				fprintf(stderr, "store_bench: %s\n", err);
				return 1;
			}
			ts[i] = now_ns() - a;
		}
		for (int i = done; i < done + round; i++) {
			int64_t st = (int64_t)i * 2500000000LL;
			for (int f = 0; f < nflips; f++) {
				uint64_t v = (uint64_t)(st + f * 16666667LL);
				for (int k = 0; k < 8; k++)
					blob[f * 8 + k] = (unsigned char)(v >> (8 * k));
			}
			int64_t a = now_ns();
			sqlite3_reset(beg);
			if (sqlite3_step(beg) != SQLITE_DONE)
				die_sql(db, "begin");
			sqlite3_reset(ins);
			sqlite3_bind_text(ins, 1, ss.id, -1, SQLITE_STATIC);
			sqlite3_bind_int(ins, 2, i);
			sqlite3_bind_int64(ins, 3, st + 700000000);
			sqlite3_bind_int64(ins, 4, st + 900000000);
			sqlite3_bind_int64(ins, 5, st);
			if (sqlite3_step(ins) != SQLITE_DONE)
				die_sql(db, "insert");
			sqlite3_reset(fr);
			sqlite3_bind_text(fr, 1, ss.id, -1, SQLITE_STATIC);
			sqlite3_bind_int(fr, 2, i);
			sqlite3_bind_int(fr, 3, nflips);
			sqlite3_bind_blob(fr, 4, blob, nflips * 8, SQLITE_STATIC);
			if (sqlite3_step(fr) != SQLITE_DONE)
				die_sql(db, "insert frames");
			sqlite3_reset(com);
			if (sqlite3_step(com) != SQLITE_DONE)
				die_sql(db, "commit");
			tb[i] = now_ns() - a;
		}
		done += round;
	}
	double s50, s99, b50, b99;
	quantiles(ts, n, &s50, &s99);
	quantiles(tb, n, &b50, &b99);
	printf("store %.1f %.1f\nbare %.1f %.1f\n", s50, s99, b50, b99);
	sqlite3_finalize(ins);
	sqlite3_finalize(fr);
	sqlite3_finalize(beg);
	sqlite3_finalize(com);
	sqlite3_close(db);
	store_session_clear(&ss);
	store_close(s);
	free(flips);
	free(blob);
	free(ts);
	free(tb);
	free(spath);
	free(bpath);
	return 0;
}
