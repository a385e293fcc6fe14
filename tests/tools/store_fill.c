/* store_fill — writes a database of invented sessions through the store's write API, for the
 * export and pool end-to-end tests and the benchmarks.
 *
 *   store_fill DB SESSIONS TRIALS [--flips K] [--subject ID] [--plain] [--running]
 *              [--fill-disk FILE]
 *
 * --fill-disk writes FILE until the disk is full just before each session is ended, so the end
 * itself meets a full disk (the store's reserve file must make room for it).
 * Each session gets TRIALS trials (one transaction each, as in a real run) with K flip times.
 * Unless --plain, the list and protocol hold the awkward text an export must survive: commas,
 * quotes, newlines, tabs, CR, cells starting with = + - @, non-ASCII letters, a negative level.
 * Prints the session IDs, one a line; when a trial cannot be stored, the session ID and
 * "committed N" (trials stored in that session), and exits 1. */
#include <errno.h>
#include <fcntl.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "protocol.h"
#include "rig.h"
#include "stimlist.h"
#include "store.h"

static char *cats[4] = {"cat", "dog", "=cmd", "+plus"};
static char *keys[4] = {"f", "j", "k", "l"};
static char *notes[9] = {"plain", "has, comma", "quote \"q\" here", "line\nbreak", "-minus",
			 "@at", "\ttab", "\rcr", "\xc3\xbc" "n\xc3\xaf" "code"};
static char *sets[3] = {"A", "B", "C"};

/* Appends zeros to PATH until the file system says it is full. */
static void fill_disk(const char *path)
{
	int fd = open(path, O_WRONLY | O_CREAT | O_APPEND, 0644);
	if (fd < 0)
		return;
	static const char zero[4096];
	while (write(fd, zero, sizeof zero) > 0)
		;
	/* Smaller writes take the last partial block. */
	while (write(fd, zero, 1) > 0)
		;
	close(fd);
}

int main(int argc, char **argv)
{
	if (argc < 4) {
		fprintf(stderr, "usage: store_fill DB SESSIONS TRIALS [--flips K] [--subject ID] "
			"[--plain] [--running] [--fill-disk FILE]\n");
		return 2;
	}
	int nsess = atoi(argv[2]), ntrials = atoi(argv[3]), nflips = 60;
	const char *subject = "S01";
	int plain = 0, running = 0;
	const char *filler = NULL;
	for (int i = 4; i < argc; i++) {
		if (!strcmp(argv[i], "--flips") && i + 1 < argc)
			nflips = atoi(argv[++i]);
		else if (!strcmp(argv[i], "--subject") && i + 1 < argc)
			subject = argv[++i];
		else if (!strcmp(argv[i], "--plain"))
			plain = 1;
		else if (!strcmp(argv[i], "--fill-disk") && i + 1 < argc)
			filler = argv[++i];
		else if (!strcmp(argv[i], "--running"))
			running = 1;
	}
	struct protocol p;
	memset(&p, 0, sizeof p);
	p.name = plain ? "plainproto" : "tricky, \"proto\"";
	p.path = "protocols/invented.ini";
	p.text = "[invented]\nfor = tests\n";
	p.size_deg = 5;
	p.nchoices = 4;
	for (int i = 0; i < 4; i++) {
		p.choices[i].category = plain ? sets[i % 3] : cats[i];
		p.choices[i].key = keys[i];
	}
	struct protocol_block blocks[2];
	memset(blocks, 0, sizeof blocks);
	blocks[0].name = "practice";
	blocks[0].practice = true;
	blocks[1].name = "main";
	p.blocks = blocks;
	p.nblocks = 2;

	enum { NITEMS = 36 };
	struct stim items[NITEMS];
	char *labels[NITEMS][2];
	char images[NITEMS][64];
	char *names[2] = {"set", "note"};
	for (int i = 0; i < NITEMS; i++) {
		memset(&items[i], 0, sizeof items[i]);
		if (plain)
			snprintf(images[i], sizeof images[i], "img/%02d.png", i);
		else
			snprintf(images[i], sizeof images[i], "img/%02d, \"x\".png", i);
		items[i].image = images[i];
		items[i].choice = i % 4;
		items[i].category = p.choices[i % 4].category;
		items[i].has_level = i % 6 != 5;
		items[i].level = plain ? (i % 5) * 0.01 : (i % 5) * 0.01 - (i % 7 == 0 ? 0.5 : 0);
		items[i].source = i % 3 ? "img/clean.png" : NULL;
		labels[i][0] = sets[i % 3];
		labels[i][1] = plain ? sets[(i + 1) % 3] : notes[i % 9];
		items[i].labels = labels[i];
	}
	struct stimlist l;
	memset(&l, 0, sizeof l);
	l.path = "stimuli/invented.csv";
	memset(l.sha256, 'b', 64);
	l.label_names = names;
	l.nlabels = 2;
	l.items = items;
	l.n = NITEMS;

	struct rig r;
	memset(&r, 0, sizeof r);
	r.text = "[screen]\nwidth_cm = 53\n";
	r.width_cm = 53.1;
	r.height_cm = 29.9;
	r.width_px = 1920;
	r.height_px = 1080;
	r.distance_cm = 57.3;
	r.refresh_hz = 60;

	struct store *s;
	char *err = NULL;
	if (store_open(argv[1], &s, &err)) {
		fprintf(stderr, "store_fill: %s\n", err);
		return 1;
	}
	int64_t *flips = calloc((size_t)(nflips > 0 ? nflips : 1), sizeof *flips);
	for (int k = 0; k < nsess; k++) {
		struct store_session ss;
		memset(&ss, 0, sizeof ss);
		store_session_describe(&ss, &p, &l, &r);
		ss.subject = strdup(subject);
		ss.seed = 1000u + (unsigned)k;
		ss.timing_mode = strdup("simulated");
		ss.observer = strdup("model:threshold=0.02");
		if (store_session_begin(s, &ss, &err)) {
			fprintf(stderr, "store_fill: %s\n", err);
			return 1;
		}
		store_event(s, ss.id, "block_start", "practice", NULL);
		int64_t t0 = 1000000000LL * (k + 1);
		for (int i = 0; i < ntrials; i++) {
			struct trial_record t;
			memset(&t, 0, sizeof t);
			t.block = i < ntrials / 10 ? 0 : 1;
			t.block_trial = t.block ? i - ntrials / 10 : i;
			t.trial = i;
			t.stim = (i * 5) % NITEMS;
			t.choice = items[t.stim].choice;
			t.has_level = items[t.stim].has_level;
			t.level = items[t.stim].level;
			t.staircase = i % 11 == 3 ? 0 : -1;
			t.level_requested = 0.021;
			t.repeat_of = -1;
			if (i % 13 == 4) {
				t.response = -1;
				t.correct = -1;
				t.timed_out = true;
			} else {
				t.response = (i * 3) % 4;
				snprintf(t.response_key, sizeof t.response_key, "%s", keys[t.response]);
				t.correct = t.response == t.choice;
				t.has_rt = true;
				t.rt_ms = 350 + (i * 37) % 400 + 0.125;
			}
			t.frames_planned = 12;
			t.frames_actual = i % 17 == 0 ? 13 : 12;
			t.dropped_frames = i % 17 == 0;
			t.timing_ok = i % 17 != 0;
			t.start_ns = t0 + (int64_t)i * 2000000000LL;
			t.onset_ns = t.start_ns + 700000000;
			t.offset_ns = t.onset_ns + 200000000;
			for (int f = 0; f < nflips; f++)
				flips[f] = t.start_ns + f * 16666667LL;
			t.flips = flips;
			t.nflips = (size_t)nflips;
			if (store_trial_put(s, ss.id, &t, &p, &l, &err)) {
				fprintf(stderr, "store_fill: %s\n", err);
				/* The session stops as a run would: marked aborted if the store
				 * still lets us. */
				if (store_session_end(s, ss.id, STORE_ABORTED, &err))
					fprintf(stderr, "store_fill: %s\n", err);
				printf("%s\ncommitted %d\n", ss.id, i);
				free(err);
				store_session_clear(&ss);
				free(flips);
				store_close(s);
				return 1;
			}
		}
		if (filler)
			fill_disk(filler);
		if (!running && store_session_end(s, ss.id, STORE_COMPLETE, &err)) {
			fprintf(stderr, "store_fill: %s\n", err);
			return 1;
		}
		printf("%s\n", ss.id);
		store_session_clear(&ss);
	}
	free(flips);
	store_close(s);
	return 0;
}
