/* report_fixture — writes an invented database for the report tests and benchmark through the
 * store's own write API: simulated sessions of a made-up m-AFC categorization task whose observer
 * follows a logistic psychometric function of the level (seeded GSL mt19937), with occasional
 * anticipations, timeouts and dropped frames.
 *
 * usage: report_fixture DB [--m M] [--levels L] [--per-level N] [--blocks B] [--subjects S]
 *                          [--seed X] [--mode normal|noresp|equal|single]
 *   noresp  every trial times out without a response
 *   equal   every trial at one level
 *   single  one trial per level (L levels) */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>

#include "diag.h"
#include "protocol.h"
#include "stimlist.h"
#include "store.h"
#include "trial.h"

static const char *names[] = {"kite", "lamp", "fern", "boat", "drum", "vase", "hook", "comb", "pear",
			      "wren", "moth", "reed"};

int main(int argc, char **argv)
{
	if (argc < 2) {
		fprintf(stderr, "usage: report_fixture DB [options]\n");
		return 2;
	}
	const char *db = argv[1], *mode = "normal";
	int m = 4, nlev = 5, per = 20, nblocks = 1, nsubj = 1;
	unsigned long seed = 1;
	for (int i = 2; i + 1 < argc; i += 2) {
		const char *k = argv[i], *v = argv[i + 1];
		if (!strcmp(k, "--m")) m = atoi(v);
		else if (!strcmp(k, "--levels")) nlev = atoi(v);
		else if (!strcmp(k, "--per-level")) per = atoi(v);
		else if (!strcmp(k, "--blocks")) nblocks = atoi(v);
		else if (!strcmp(k, "--subjects")) nsubj = atoi(v);
		else if (!strcmp(k, "--seed")) seed = strtoul(v, NULL, 10);
		else if (!strcmp(k, "--mode")) mode = v;
		else {
			fprintf(stderr, "report_fixture: unknown option %s\n", k);
			return 2;
		}
	}
	if (m < 2 || m > 12 || nlev < 1 || per < 1 || nblocks < 1 || nsubj < 0) {
		fprintf(stderr, "report_fixture: bad sizes\n");
		return 2;
	}
	bool noresp = !strcmp(mode, "noresp"), equal = !strcmp(mode, "equal");
	if (!strcmp(mode, "single"))
		per = 1;

	/* An in-memory protocol and stimulus list: the store copies their texts into each trial. */
	struct protocol p;
	memset(&p, 0, sizeof p);
	p.name = "fixture";
	p.path = "fixture.ini";
	p.text = "[fixture]\n";
	p.nchoices = (size_t)m;
	char keys[12][4];
	for (int c = 0; c < m; c++) {
		snprintf(keys[c], sizeof keys[c], "%c", 'a' + c);
		p.choices[c].category = (char *)names[c];
		p.choices[c].key = keys[c];
	}
	int nb = nblocks + 1;   /* block 0 is practice */
	p.blocks = calloc((size_t)nb, sizeof *p.blocks);
	char (*bname)[16] = calloc((size_t)nb, sizeof *bname);
	for (int b = 0; b < nb; b++) {
		snprintf(bname[b], sizeof bname[b], b ? "main%d" : "practice", b);
		p.blocks[b].name = bname[b];
		p.blocks[b].practice = b == 0;
	}
	p.nblocks = (size_t)nb;
	struct stimlist l;
	memset(&l, 0, sizeof l);
	l.path = "fixture.csv";
	static char *labn[] = {"set"};
	l.label_names = labn;
	l.nlabels = 1;
	l.has_level_column = true;
	size_t nst = (size_t)m * (size_t)nlev * 2;
	l.items = calloc(nst, sizeof *l.items);
	static char *setv[] = {"A", "B"};
	for (int c = 0; c < m; c++)
		for (int v = 0; v < nlev; v++)
			for (int e = 0; e < 2; e++) {
				struct stim *s = &l.items[((size_t)c * (size_t)nlev + (size_t)v) * 2 + (size_t)e];
				s->image = xasprintf("%s_l%d_e%d.png", names[c], v, e);
				s->category = (char *)names[c];
				s->choice = c;
				s->has_level = true;
				s->level = equal ? 0.5 : 0.1 * (v + 1);
				s->labels = &setv[e];
			}
	l.n = nst;

	struct store *st;
	char *err = NULL;
	if (store_open(db, &st, &err) < 0) {
		fprintf(stderr, "report_fixture: %s\n", err);
		return 1;
	}
	gsl_rng *r = gsl_rng_alloc(gsl_rng_mt19937);
	gsl_rng_set(r, seed);
	double alpha = 0.1 * (nlev + 1) / 2.0, beta = 0.04, lambda = 0.02, gamma = 1.0 / m;
	int64_t flips[40];
	for (int sj = 0; sj < nsubj; sj++) {
		struct store_session ss;
		memset(&ss, 0, sizeof ss);
		ss.subject = xasprintf("S%02d", sj + 1);
		ss.timing_mode = xstrdup("simulated");
		ss.observer = xstrdup("model:fixture");
		ss.seed = seed;
		if (store_session_begin(st, &ss, &err) < 0) {
			fprintf(stderr, "report_fixture: %s\n", err);
			return 1;
		}
		store_session_refresh(st, ss.id, 60.0, &err);
		int trial = 0;
		int64_t now = 1000000000;
		for (int b = 0; b < nb; b++) {
			int reps = b == 0 ? 1 : per;
			int bt = 0;
			for (int rep = 0; rep < reps; rep++)
				for (int c = 0; c < m; c++)
					for (int v = 0; v < nlev; v++) {
						if (b == 0 && (c > 1 || v > 0))
							continue;
						int e = (int)gsl_rng_uniform_int(r, 2);
						int stim = (c * nlev + v) * 2 + e;
						double x = l.items[stim].level;
						double pc = gamma + (1 - gamma - lambda) /
								(1 + exp(-(x - alpha) / beta));
						struct trial_record t;
						memset(&t, 0, sizeof t);
						t.block = b;
						t.block_trial = bt++;
						t.trial = trial++;
						t.stim = stim;
						t.choice = c;
						t.has_level = true;
						t.level = x;
						t.staircase = -1;
						t.repeat_of = -1;
						double u = gsl_rng_uniform(r);
						if (noresp || u < 0.01) {
							t.response = -1;
							t.correct = -1;
							t.timed_out = true;
						} else {
							bool ok = gsl_rng_uniform(r) < pc;
							/* Errors lean to the next category, so confusions show. */
							int wrong = gsl_rng_uniform(r) < 0.6
									    ? (c + 1) % m
									    : (c + 1 + (int)gsl_rng_uniform_int(r, (unsigned long)(m - 1))) % m;
							if (wrong == c)
								wrong = (c + 1) % m;
							t.response = ok ? c : wrong;
							snprintf(t.response_key, sizeof t.response_key, "%s", keys[t.response]);
							t.correct = ok;
							t.has_rt = true;
							t.rt_ms = u < 0.02 ? 60 + 30 * gsl_rng_uniform(r)
									   : 350 + gsl_ran_gaussian(r, 50) + gsl_ran_exponential(r, 120);
							t.anticipation = t.rt_ms < 100;
						}
						bool drop = gsl_rng_uniform(r) < 0.02;
						t.frames_planned = 12;
						t.frames_actual = drop ? 13 : 12;
						t.dropped_frames = drop;
						t.timing_ok = !drop;
						size_t nf = 30;
						for (size_t f = 0; f < nf; f++) {
							now += 16666667 + (int64_t)gsl_ran_gaussian(r, 50000);
							if (drop && f == 5)
								now += 16666667;
							flips[f] = now;
						}
						t.start_ns = flips[0];
						t.onset_ns = flips[3];
						t.offset_ns = flips[15];
						t.flips = flips;
						t.nflips = nf;
						if (store_trial_put(st, ss.id, &t, &p, &l, &err) < 0) {
							fprintf(stderr, "report_fixture: %s\n", err);
							return 1;
						}
					}
		}
		store_session_end(st, ss.id, STORE_COMPLETE, &err);
		store_session_clear(&ss);
	}
	store_close(st);
	gsl_rng_free(r);
	for (size_t i = 0; i < nst; i++)
		free(l.items[i].image);
	free(l.items);
	free(p.blocks);
	free(bname);
	return 0;
}
