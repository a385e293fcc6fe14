/* test_run — the run layer's stepwise interface as the console drives it: blocks and their info,
 * progress snapshots in the ITI, pause and end commands from the callback, skipping, and the
 * session status that results. Headless, model observer, the demo protocol, a temporary database. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>
#include <cmocka.h>

#include "run.h"
#include "store.h"

static char dir[] = "/tmp/tachist-run-XXXXXX";
static char db[256], rig[256];

static int setup(void **state)
{
	(void)state;
	if (!mkdtemp(dir))
		return -1;
	snprintf(db, sizeof db, "%s/t.db", dir);
	snprintf(rig, sizeof rig, "%s/rig.ini", dir);
	FILE *f = fopen(rig, "w");
	if (!f)
		return -1;
	fputs("[screen]\nwidth_cm = 53\nheight_cm = 30\nwidth_px = 640\nheight_px = 360\n"
	      "distance_cm = 57\nrefresh_hz = 60\n", f);
	fclose(f);
	setenv("SDL_VIDEODRIVER", "dummy", 1);
	return 0;
}

static int teardown(void **state)
{
	(void)state;
	char cmd[300];
	snprintf(cmd, sizeof cmd, "rm -rf %s", dir);
	return system(cmd);
}

static struct run_session *open_session(void)
{
	struct run_options o = {
		.protocol_path = "protocols/demo.ini", .subject = "T1", .db_path = db, .rig_path = rig,
		.observer = "model:shape=weibull,threshold=20,slope=-3,rt=400,seed=8", .headless = true,
		.has_seed = true, .seed = 21, .no_signal_handlers = true,
	};
	struct diag_list d;
	diag_init(&d);
	char *err = NULL;
	struct run_session *s = run_open(&o, &d, &err);
	if (!s)
		fprintf(stderr, "# %s\n", err);
	free(err);
	diag_clear(&d);
	return s;
}

struct watch {
	size_t calls, iti, paused, last_n;
	bool order_ok;
	size_t pause_at, end_at;
	int pause_ticks;
};

static enum run_cmd watch_cb(const struct run_snapshot *sn, void *ctx)
{
	struct watch *w = ctx;
	w->calls++;
	if (sn->state == RUN_STATE_ITI) {
		w->iti++;
		/* One call per stored trial, in order, with the last trial first in the list. */
		if (sn->trial_n != w->last_n + 1 || sn->nlast == 0 ||
		    sn->last[0].block_trial != (int)sn->trial_n - 1 || sn->answered > sn->trial_n ||
		    !(sn->refresh_hz > 59.9 && sn->refresh_hz < 60.1) ||
		    strcmp(sn->timing_mode, "simulated"))
			w->order_ok = false;
		w->last_n = sn->trial_n;
		if (w->pause_at && sn->trial_n == w->pause_at) {
			w->pause_at = 0;
			return RUN_CMD_PAUSE;
		}
		if (w->end_at && sn->trial_n == w->end_at)
			return RUN_CMD_END;
	} else if (sn->state == RUN_STATE_PAUSED) {
		w->paused++;
		return ++w->pause_ticks < 3 ? RUN_CMD_PAUSE : RUN_CMD_CONTINUE;
	}
	return RUN_CMD_CONTINUE;
}

/* Block list, then the practice block with a pause asked by the callback and resumed: every
 * trial stored, one ITI call per trial, pause/resume events. */
static void run_testBlocksAndPause(void **state)
{
	(void)state;
	struct run_session *s = open_session();
	assert_non_null(s);
	assert_int_equal(run_block_count(s), 2);
	struct run_block_info bi;
	assert_int_equal(run_block_info(s, 0, &bi), 0);
	assert_string_equal(bi.name, "practice");
	assert_true(bi.practice);
	assert_int_equal(bi.ntrials, 12);
	assert_int_equal(bi.stored, 0);
	assert_true(bi.est_seconds > 12 * 2.0);
	assert_int_equal(run_next_block(s), 0);
	struct watch w = {.order_ok = true, .pause_at = 4};
	struct run_block_summary sum;
	char *err = NULL;
	assert_int_equal(run_block(s, 0, watch_cb, &w, &sum, &err), RUN_BLOCK_DONE);
	assert_true(w.order_ok);
	assert_int_equal(w.iti, 12);
	assert_int_equal(w.paused, 3);
	assert_int_equal(sum.trials, 12);
	assert_int_equal(sum.faults, 0);
	assert_int_equal(run_next_block(s), 1);
	assert_int_equal(run_block_info(s, 0, &bi), 0);
	assert_int_equal(bi.stored, 12);
	/* The experimenter skips the main block: the session still counts as complete. */
	assert_int_equal(run_block_skip(s, 1, &err), 0);
	assert_int_equal(run_next_block(s), 2);
	char id[37];
	snprintf(id, sizeof id, "%s", run_session_id(s));
	assert_int_equal(run_close(s, &err), 0);

	struct store *st;
	assert_int_equal(store_open(db, &st, &err), 0);
	struct store_session ss;
	assert_int_equal(store_session_get(st, id, &ss, &err), 0);
	assert_int_equal(ss.status, STORE_COMPLETE);
	assert_int_equal(ss.ntrials, 12);
	struct store_event_row *ev;
	size_t nev;
	assert_int_equal(store_events_load(st, id, &ev, &nev, &err), 0);
	int pauses = 0, resumes = 0, skips = 0;
	for (size_t i = 0; i < nev; i++) {
		pauses += !strcmp(ev[i].kind, "pause");
		resumes += !strcmp(ev[i].kind, "resume");
		skips += !strcmp(ev[i].kind, "skip");
	}
	assert_int_equal(pauses, 1);
	assert_int_equal(resumes, 1);
	assert_int_equal(skips, 1);
	store_events_free(ev, nev);
	store_session_clear(&ss);
	store_close(st);
}

/* RUN_CMD_END from the callback ends the block at once with what was stored so far; the session
 * is then ended-early, and a later run of the same block is a repeat. */
static void run_testEndFromCallback(void **state)
{
	(void)state;
	struct run_session *s = open_session();
	assert_non_null(s);
	struct watch w = {.order_ok = true, .end_at = 5};
	char *err = NULL;
	struct run_block_summary sum;
	assert_int_equal(run_block(s, 0, watch_cb, &w, &sum, &err), RUN_BLOCK_ENDED);
	free(err);
	assert_int_equal(sum.trials, 5);
	struct run_block_info bi;
	run_block_info(s, 0, &bi);
	assert_int_equal(bi.stored, 5);
	assert_int_equal(bi.runs, 1);
	char id[37];
	snprintf(id, sizeof id, "%s", run_session_id(s));
	assert_int_equal(run_close(s, &err), 0);
	struct store *st;
	assert_int_equal(store_open(db, &st, &err), 0);
	struct store_session ss;
	assert_int_equal(store_session_get(st, id, &ss, &err), 0);
	assert_int_equal(ss.status, STORE_ENDED_EARLY);
	assert_int_equal(ss.ntrials, 5);
	store_session_clear(&ss);
	store_close(st);
	assert_int_equal(run_close(NULL, &err), 0);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(run_testBlocksAndPause),
		cmocka_unit_test(run_testEndFromCallback),
	};
	return cmocka_run_group_tests(tests, setup, teardown);
}
