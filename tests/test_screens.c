/* test_screens — the observer's screens in a keyboard session (headless, SDL's dummy driver, keys
 * pushed into SDL's queue from the progress callback): the instruction, break, pause, ready and
 * end screens are shown and saved with --screenshots; the observer's pause is left only by the
 * experimenter (the watcher's GO_ON, or the Ctrl+Alt+S chord), and its events are stored. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>
#include <cmocka.h>

#include <SDL.h>

#include "run.h"
#include "store.h"

static char dir[] = "/tmp/tachist-screens-XXXXXX";
static char db[256], rig[256], proto[256], shots[256];

static int setup(void **state)
{
	(void)state;
	if (!mkdtemp(dir))
		return -1;
	snprintf(db, sizeof db, "%s/t.db", dir);
	snprintf(rig, sizeof rig, "%s/rig.ini", dir);
	snprintf(proto, sizeof proto, "%s/p.ini", dir);
	snprintf(shots, sizeof shots, "%s/shots", dir);
	if (mkdir(shots, 0755))
		return -1;
	FILE *f = fopen(rig, "w");
	if (!f)
		return -1;
	fputs("[screen]\nwidth_cm = 53\nheight_cm = 30\nwidth_px = 640\nheight_px = 360\n"
	      "distance_cm = 57\nrefresh_hz = 60\n", f);
	fclose(f);
	char cwd[200];
	if (!getcwd(cwd, sizeof cwd) || !(f = fopen(proto, "w")))
		return -1;
	/* No answers (nobody presses a choice key): every trial times out after 100 ms. */
	fprintf(f, "[experiment]\nlist = %s/assets-demo/stimuli.csv\nbreak_every = 4\n"
		"[categories]\nring = s\nbar = d\ncross = f\nchevron = j\nwedge = k\nlattice = l\n"
		"[timing]\nfixation_ms = 50\nstimulus_ms = 50\nresponse_ms = 100\nfeedback_ms = 0\n"
		"iti_ms = 50\n[display]\nsize_deg = 1.75\n[screens]\nlegend = keys\n"
		"[block warm]\nselect = level=0 & exemplar=1\npractice = yes\n", cwd);
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

static void push_key(SDL_Keycode sym, Uint16 mod)
{
	SDL_Event ev;
	memset(&ev, 0, sizeof ev);
	ev.type = SDL_KEYDOWN;
	ev.key.state = SDL_PRESSED;
	ev.key.keysym.sym = sym;
	ev.key.keysym.mod = mod;
	SDL_PushEvent(&ev);
}

struct observer {
	int itis, paused_ticks, breaks, end_ticks;
	bool escaped;
	bool chord;           /* leave the pause with Ctrl+Alt+S instead of GO_ON */
};

/* Plays the observer and the experimenter: Space on every break screen, Escape after the second
 * trial, the experimenter's decision after 5 ticks of the pause, END on the end screen. */
static enum run_cmd play(const struct run_snapshot *sn, void *ctx)
{
	struct observer *o = ctx;
	switch (sn->state) {
	case RUN_STATE_ITI:
		if (++o->itis == 2 && !o->escaped) {
			o->escaped = true;
			push_key(SDLK_ESCAPE, 0);
		}
		return RUN_CMD_CONTINUE;
	case RUN_STATE_PAUSED:
		if (!sn->paused_by_observer)
			return RUN_CMD_CONTINUE;
		/* CONTINUE alone never leaves the observer's pause. */
		if (++o->paused_ticks < 5)
			return RUN_CMD_CONTINUE;
		if (o->chord) {
			if (o->paused_ticks == 5)
				push_key(SDLK_s, KMOD_LCTRL | KMOD_LALT);
			return RUN_CMD_CONTINUE;
		}
		return RUN_CMD_GO_ON;
	case RUN_STATE_BREAK:
		if (sn->block < 0) {
			o->end_ticks++;
			return RUN_CMD_END;
		}
		o->breaks++;
		push_key(SDLK_SPACE, 0);
		return RUN_CMD_CONTINUE;
	default:
		return RUN_CMD_CONTINUE;
	}
}

static struct run_session *open_keyboard(const char *subject)
{
	struct run_options o = {
		.protocol_path = proto, .subject = subject, .db_path = db, .rig_path = rig,
		.observer = "keyboard", .headless = true, .has_seed = true, .seed = 5,
		.no_signal_handlers = true, .screenshot_dir = shots,
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

static bool has_event(const char *id, const char *kind, const char *detail)
{
	struct store *st = NULL;
	char *err = NULL;
	assert_int_equal(store_open_existing(db, &st, &err), 0);
	struct store_event_row *ev = NULL;
	size_t n = 0;
	assert_int_equal(store_events_load(st, id, &ev, &n, &err), 0);
	bool found = false;
	for (size_t i = 0; i < n; i++)
		found |= !strcmp(ev[i].kind, kind) && (!detail || !strcmp(ev[i].detail, detail));
	store_events_free(ev, n);
	store_close(st);
	return found;
}

static bool shot(const char *name)
{
	char path[300];
	snprintf(path, sizeof path, "%s/screen-%s.png", shots, name);
	struct stat sb;
	return stat(path, &sb) == 0 && sb.st_size > 1000;
}

/* Every screen is shown and saved; the pause waited for the experimenter's GO_ON; the session is
 * complete and the end screen was left by the watcher's END. */
static void screens_testKeyboardSession(void **state)
{
	(void)state;
	struct run_session *s = open_keyboard("K1");
	assert_non_null(s);
	char id[40];
	snprintf(id, sizeof id, "%s", run_session_id(s));
	struct observer o = {0};
	char *err = NULL;
	enum run_block_result r = run_all(s, play, &o, NULL, &err);
	free(err);
	assert_int_equal(run_close(s, &err), 0);
	printf("# %d ITIs, %d paused ticks, %d break ticks, %d end ticks\n", o.itis, o.paused_ticks,
	       o.breaks, o.end_ticks);
	assert_int_equal(r, RUN_BLOCK_DONE);
	assert_int_equal(o.paused_ticks, 5);
	assert_true(o.end_ticks >= 1);
	const char *names[] = {"instructions", "break", "pause", "ready", "end"};
	for (size_t i = 0; i < 5; i++) {
		printf("# screen-%s.png %s\n", names[i], shot(names[i]) ? "saved" : "missing");
		assert_true(shot(names[i]));
	}
	assert_true(has_event(id, "pause", "observer"));
	assert_true(has_event(id, "resume", "experimenter"));
}

/* The chord Ctrl+Alt+S on the observer's keyboard skips the rest of the block. */
static void screens_testChordSkips(void **state)
{
	(void)state;
	struct run_session *s = open_keyboard("K2");
	assert_non_null(s);
	char id[40];
	snprintf(id, sizeof id, "%s", run_session_id(s));
	struct observer o = {.chord = true};
	char *err = NULL;
	enum run_block_result r = run_block(s, 0, play, &o, NULL, &err);
	free(err);
	assert_int_equal(run_close(s, &err), 0);
	assert_int_equal(r, RUN_BLOCK_SKIPPED);
	assert_true(has_event(id, "skip", "warm"));
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(screens_testKeyboardSession),
		cmocka_unit_test(screens_testChordSkips),
	};
	return cmocka_run_group_tests(tests, setup, teardown);
}
