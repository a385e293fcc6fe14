/* test_evsrc — the kernel-stamped key source fed from a pipe carrying struct input_event records
 * with chosen times (no input device needed): key-downs arrive in order with their times to the
 * microsecond, repeats and key-ups are ignored, records split across reads are reassembled,
 * nothing is lost at 1,000 events/s, a closed device is reported after the queued keys; the
 * trial loop's RT from such a key is the chosen time − the onset flip; devices that are not
 * keyboards are refused by name. The end-to-end check through the kernel needs a writable
 * /dev/uinput and is reported as skipped elsewhere. */
#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <pthread.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/ioctl.h>
#include <time.h>
#include <unistd.h>
#include <cmocka.h>

#include <SDL.h>
#include <linux/input.h>
#include <linux/uinput.h>

#include "dclock.h"
#include "display.h"
#include "evsrc.h"
#include "keywatch.h"
#include "responder.h"
#include "trialloop.h"

static int64_t mono_ns(void)
{
	struct timespec ts;
	clock_gettime(CLOCK_MONOTONIC, &ts);
	return (int64_t)ts.tv_sec * 1000000000 + ts.tv_nsec;
}

/* Writes one record: TYPE/CODE/VALUE at T_US microseconds. */
static void put(int fd, int type, int code, int value, int64_t t_us)
{
	struct input_event ev;
	memset(&ev, 0, sizeof ev);
	ev.input_event_sec = (time_t)(t_us / 1000000);
	ev.input_event_usec = (suseconds_t)(t_us % 1000000);
	ev.type = (unsigned short)type;
	ev.code = (unsigned short)code;
	ev.value = value;
	assert_int_equal(write(fd, &ev, sizeof ev), (ssize_t)sizeof ev);
}

/* Waits (up to 2 s) until SRC has seen N key records of any value. */
static void wait_seen(struct evsrc *src, uint64_t n)
{
	int64_t t0 = mono_ns();
	for (;;) {
		struct evsrc_stats st;
		evsrc_stats(src, &st);
		if (st.downs + st.repeats + st.ups + st.lost >= n)
			return;
		assert_true(mono_ns() - t0 < 2000000000);
		struct timespec d = {0, 200000};
		nanosleep(&d, NULL);
	}
}

static struct evsrc *pipe_source(int *wfd)
{
	int p[2];
	assert_int_equal(pipe(p), 0);
	char err[300];
	struct evsrc *s = evsrc_open_fd(p[0], "test pipe", err, sizeof err);
	assert_non_null(s);
	*wfd = p[1];
	return s;
}

/* Key-downs come out in order with the written time to the microsecond (1 µs = 1000 ns, the
 * resolution of struct input_event's timeval, linux/input.h); value 2 (auto-repeat) and value 0
 * (key-up) records, and other event types, are counted or dropped, never queued (the evdev value
 * meanings: the kernel's Documentation/input/event-codes.rst, EV_KEY). */
static void evsrc_testDownsOnlyWithTimes(void **state)
{
	(void)state;
	int w;
	struct evsrc *s = pipe_source(&w);
	put(w, EV_KEY, KEY_F, 1, 5000000123);
	put(w, EV_SYN, SYN_REPORT, 0, 5000000123);
	put(w, EV_KEY, KEY_F, 2, 5000250000);
	put(w, EV_KEY, KEY_F, 2, 5000283000);
	put(w, EV_MSC, MSC_SCAN, 33, 5000300000);
	put(w, EV_KEY, KEY_F, 0, 5000300001);
	put(w, EV_KEY, KEY_J, 1, 5000400999);
	put(w, EV_KEY, KEY_J, 0, 5000500000);
	wait_seen(s, 6);
	struct evsrc_key k;
	assert_int_equal(evsrc_next(s, &k), 1);
	assert_int_equal(k.code, KEY_F);
	assert_int_equal(k.t_ns, 5000000123000LL);
	assert_int_equal(evsrc_next(s, &k), 1);
	assert_int_equal(k.code, KEY_J);
	assert_int_equal(k.t_ns, 5000400999000LL);
	assert_int_equal(evsrc_next(s, &k), 0);
	struct evsrc_stats st;
	evsrc_stats(s, &st);
	assert_int_equal(st.downs, 2);
	assert_int_equal(st.repeats, 2);
	assert_int_equal(st.ups, 2);
	assert_int_equal(st.lost, 0);
	assert_string_equal(evsrc_error(s), "");
	evsrc_close(s);
	close(w);
}

/* Records split at odd byte boundaries across writes are reassembled whole. */
static void evsrc_testSplitRecords(void **state)
{
	(void)state;
	int w;
	struct evsrc *s = pipe_source(&w);
	unsigned char buf[3 * sizeof(struct input_event)];
	for (int i = 0; i < 3; i++) {
		struct input_event ev;
		memset(&ev, 0, sizeof ev);
		ev.input_event_sec = 7;
		ev.input_event_usec = 100 + i;
		ev.type = EV_KEY;
		ev.code = (unsigned short)(KEY_A + i);
		ev.value = 1;
		memcpy(buf + i * sizeof ev, &ev, sizeof ev);
	}
	size_t cuts[] = {5, 17, sizeof(struct input_event) + 3, sizeof buf};
	size_t off = 0;
	for (size_t c = 0; c < 4; c++) {
		assert_int_equal(write(w, buf + off, cuts[c] - off), (ssize_t)(cuts[c] - off));
		off = cuts[c];
		struct timespec d = {0, 2000000};
		nanosleep(&d, NULL);
	}
	wait_seen(s, 3);
	for (int i = 0; i < 3; i++) {
		struct evsrc_key k;
		assert_int_equal(evsrc_next(s, &k), 1);
		assert_int_equal(k.code, KEY_A + i);
		assert_int_equal(k.t_ns, 7000000000LL + (100 + i) * 1000LL);
	}
	evsrc_close(s);
	close(w);
}

struct feeder {
	int fd;
	int n;
};

/* Writes N key-downs one millisecond apart (1,000 events/s), each stamped with its index. */
static void *feed(void *arg)
{
	struct feeder *f = arg;
	struct timespec next;
	clock_gettime(CLOCK_MONOTONIC, &next);
	for (int i = 0; i < f->n; i++) {
		next.tv_nsec += 1000000;
		if (next.tv_nsec >= 1000000000) {
			next.tv_nsec -= 1000000000;
			next.tv_sec++;
		}
		clock_nanosleep(CLOCK_MONOTONIC, TIMER_ABSTIME, &next, NULL);
		struct input_event ev;
		memset(&ev, 0, sizeof ev);
		ev.input_event_sec = 1 + i / 1000000;
		ev.input_event_usec = i % 1000000;
		ev.type = EV_KEY;
		ev.code = KEY_SPACE;
		ev.value = 1;
		if (write(f->fd, &ev, sizeof ev) != (ssize_t)sizeof ev)
			return (void *)1;
	}
	return NULL;
}

/* 2,000 key-downs at 1,000 per second, taken by a consumer that polls once per 60 Hz frame as
 * the trial loop does: every one arrives, in order, none lost. */
static void evsrc_testNothingLostAt1000PerSecond(void **state)
{
	(void)state;
	int w;
	struct evsrc *s = pipe_source(&w);
	struct feeder f = {w, 2000};
	pthread_t th;
	assert_int_equal(pthread_create(&th, NULL, feed, &f), 0);
	int got = 0;
	int64_t t0 = mono_ns();
	while (got < f.n && mono_ns() - t0 < 10000000000LL) {
		struct timespec d = {0, 16666667};
		nanosleep(&d, NULL);
		struct evsrc_key k;
		while (evsrc_next(s, &k) == 1) {
			assert_int_equal(k.t_ns, 1000000000LL + got * 1000LL);
			got++;
		}
	}
	void *rc;
	pthread_join(th, &rc);
	assert_null(rc);
	assert_int_equal(got, f.n);
	struct evsrc_stats st;
	evsrc_stats(s, &st);
	assert_int_equal(st.lost, 0);
	assert_int_equal(st.downs, 2000);
	evsrc_close(s);
	close(w);
}

/* The writer going away (an unplugged device) is reported once the queued keys are taken. */
static void evsrc_testGoneAfterQueued(void **state)
{
	(void)state;
	int w;
	struct evsrc *s = pipe_source(&w);
	put(w, EV_KEY, KEY_K, 1, 9000000);
	close(w);
	int64_t t0 = mono_ns();
	while (!evsrc_error(s)[0])
		assert_true(mono_ns() - t0 < 2000000000);
	struct evsrc_key k;
	assert_int_equal(evsrc_next(s, &k), 1);
	assert_int_equal(k.code, KEY_K);
	assert_int_equal(evsrc_next(s, &k), -1);
	assert_non_null(strstr(evsrc_error(s), "test pipe"));
	evsrc_close(s);
}

/* Key names match SDL's own names of the same keys in lower case (SDL_GetKeyName, the keyboard
 * responder's names), for a US layout. */
static void evsrc_testKeyNamesAsSdl(void **state)
{
	(void)state;
	static const struct { int code; SDL_Keycode sym; } k[] = {
		{KEY_F, SDLK_f}, {KEY_J, SDLK_j}, {KEY_A, SDLK_a}, {KEY_Z, SDLK_z}, {KEY_1, SDLK_1},
		{KEY_0, SDLK_0}, {KEY_SPACE, SDLK_SPACE}, {KEY_ENTER, SDLK_RETURN},
		{KEY_LEFT, SDLK_LEFT}, {KEY_RIGHT, SDLK_RIGHT}, {KEY_UP, SDLK_UP},
		{KEY_DOWN, SDLK_DOWN}, {KEY_ESC, SDLK_ESCAPE}, {KEY_TAB, SDLK_TAB},
		{KEY_COMMA, SDLK_COMMA}, {KEY_DOT, SDLK_PERIOD}, {KEY_SLASH, SDLK_SLASH},
		{KEY_SEMICOLON, SDLK_SEMICOLON}, {KEY_LEFTSHIFT, SDLK_LSHIFT},
		{KEY_RIGHTCTRL, SDLK_RCTRL}, {KEY_KP1, SDLK_KP_1}, {KEY_KPENTER, SDLK_KP_ENTER},
		{KEY_BACKSPACE, SDLK_BACKSPACE}, {KEY_F1, SDLK_F1},
	};
	for (size_t i = 0; i < sizeof k / sizeof k[0]; i++) {
		char ours[32], sdl[32];
		snprintf(sdl, sizeof sdl, "%s", SDL_GetKeyName(k[i].sym));
		for (char *p = sdl; *p; p++)
			*p = (char)(*p >= 'A' && *p <= 'Z' ? *p - 'A' + 'a' : *p);
		evsrc_key_name(k[i].code, ours, sizeof ours);
		if (strcmp(ours, sdl))
			fprintf(stderr, "# key %d: ours '%s', SDL '%s'\n", k[i].code, ours, sdl);
		assert_string_equal(ours, sdl);
	}
}

/* Opening what is not a keyboard fails with a message naming it, never a crash. */
static void evsrc_testRefusals(void **state)
{
	(void)state;
	char err[600];
	assert_null(evsrc_open_device("/dev/null", err, sizeof err));
	assert_non_null(strstr(err, "/dev/null"));
	assert_null(evsrc_open_device("/nonexistent/event99", err, sizeof err));
	assert_non_null(strstr(err, "/nonexistent/event99"));
	assert_null(evsrc_open_device("No Such Keyboard 123", err, sizeof err));
	assert_non_null(strstr(err, "No Such Keyboard 123"));
}

/* ---- the trial loop with the kernel-stamped responder ---- */

struct kctx {
	int w;
	struct evsrc *src;
	struct dclock *c;
	int64_t onset_ns;
	int64_t press_ns;      /* the chosen key-down time */
	int64_t early_ns;
	uint64_t written;
};

/* Before flip 1 of the stimulus the virtual clock's now is the onset flip (unpaced clock: now
 * is the last stamp). Writes an anticipation-free 'j' repeat and key-up at the fixation, a
 * choice key 'f' before the onset (an anticipation, delivered late), then the answer 'j' at a
 * chosen microsecond between two flips of the response epoch. */
static void kernel_hook(void *ctx, enum epoch e, int frame, bool stim)
{
	(void)stim;
	struct kctx *k = ctx;
	if (e == EPOCH_FIXATION && frame == 1) {
		int64_t t = dclock_now(k->c) / 1000;
		put(k->w, EV_KEY, KEY_J, 2, t);     /* a repeat: never an answer */
		put(k->w, EV_KEY, KEY_J, 0, t);     /* a key-up: never an answer */
		k->written += 2;
		wait_seen(k->src, k->written);
	}
	if (e == EPOCH_STIMULUS && frame == 1) {
		k->onset_ns = dclock_now(k->c);
		k->early_ns = (k->onset_ns - 3 * k->c->period_ns) / 1000 * 1000 + 1000;
		put(k->w, EV_KEY, KEY_F, 1, k->early_ns / 1000);
		k->written++;
		wait_seen(k->src, k->written);
	}
	if (e == EPOCH_RESPONSE && frame == 3) {
		/* 2.345 ms before the last flip: between flips, as real presses are. */
		int64_t now = dclock_now(k->c);
		k->press_ns = (now - 2345000) / 1000 * 1000 + 7000;
		put(k->w, EV_KEY, KEY_J, 1, k->press_ns / 1000);
		k->written++;
		wait_seen(k->src, k->written);
	}
}

/* RT = the key-down's kernel time − the onset flip, to the microsecond (the chosen time is a
 * whole µs, so the difference is exact in ns), not the frame-quantised poll time; rt_clock is
 * "kernel"; the early 'f' is an anticipation; SDL key events (another keyboard) never answer. */
static void evsrc_testTrialRtFromKernelTime(void **state)
{
	(void)state;
	struct display_opts o = {.headless = true, .width_px = 320, .height_px = 240, .background = 128};
	char err[300];
	struct display *d = display_open(&o, err, sizeof err);
	assert_non_null(d);
	struct dclock_virtual_opts vo = {.hz = 60, .seed = 1};
	struct dclock *c = dclock_virtual_new(display_renderer(d), &vo);
	int w;
	struct evsrc *src = pipe_source(&w);
	const char *keys[] = {"f", "j"};
	struct responder *r = responder_evdev_new(keys, 2, src);
	assert_non_null(r);
	assert_string_equal(r->rt_clock, "kernel");
	struct kctx k = {.w = w, .src = src, .c = c};
	struct trialloop_config cfg = {
		.disp = d, .clock = c, .resp = r, .epoch_frames = {3, 2, 6, 4, 30, 2, 5},
		.period_ns = c->period_ns, .stim_px = 100, .nchoices = 2,
		.on_frame = kernel_hook, .frame_ctx = &k,
	};
	struct trialloop *tl = trialloop_new(&cfg);
	/* An 'f' typed on another keyboard (SDL) during the trial must not answer. */
	SDL_Event ev;
	memset(&ev, 0, sizeof ev);
	ev.type = SDL_KEYDOWN;
	ev.key.keysym.sym = SDLK_f;
	SDL_PushEvent(&ev);
	struct trialloop_trial t = {NULL, 1, false, 0, false};
	struct trial_record rec;
	memset(&rec, 0, sizeof rec);
	assert_int_equal(trialloop_run(tl, &t, &rec), TRIALLOOP_DONE);
	assert_int_equal(rec.onset_ns, k.onset_ns);
	assert_int_equal(rec.response, 1);
	assert_string_equal(rec.response_key, "j");
	assert_string_equal(rec.rt_clock, "kernel");
	assert_true(rec.anticipation);
	assert_true(rec.has_rt);
	double want = (double)(k.press_ns - k.onset_ns) / 1e6;
	fprintf(stderr, "# rt %.6f ms, chosen %.6f ms\n", rec.rt_ms, want);
	assert_float_equal(rec.rt_ms, want, 1e-9);
	/* The frame source would have said the poll after the flip: a whole number of periods. */
	double frames = rec.rt_ms * 1e6 / (double)c->period_ns;
	assert_true(fabs(frames - round(frames)) > 0.01);
	assert_int_equal(trialloop_iti_finish(tl), TRIALLOOP_DONE);

	/* The device vanishing mid-trial abandons the trial with the device named. */
	cfg.on_frame = NULL;
	trialloop_destroy(tl);
	tl = trialloop_new(&cfg);
	close(w);
	int64_t t0 = mono_ns();
	while (!evsrc_error(src)[0])
		assert_true(mono_ns() - t0 < 2000000000);
	memset(&rec, 0, sizeof rec);
	assert_int_equal(trialloop_run(tl, &t, &rec), TRIALLOOP_FAULT);
	assert_non_null(strstr(trialloop_fault(tl), "test pipe"));
	trialloop_destroy(tl);
	responder_destroy(r);
	dclock_destroy(c);
	display_close(d);
}

struct pairs {
	struct keywatch_press p[4];
	int n;
};

static void on_pair(const struct keywatch_press *p, void *ctx)
{
	struct pairs *v = ctx;
	if (v->n < 4)
		v->p[v->n++] = *p;
}

static void push_sdl(SDL_Keycode sym)
{
	SDL_Event ev;
	memset(&ev, 0, sizeof ev);
	ev.type = SDL_KEYDOWN;
	ev.key.keysym.sym = sym;
	SDL_PushEvent(&ev);   /* SDL stamps it with its tick counter now */
}

/* timing --keys pairs a kernel press with SDL's event for the same key: a 'j' stamped by "the
 * kernel" 3 ms before, and SDL's 'j' pushed later, give a lag equal to the time between them
 * (SDL's stamp is whole ms of its tick counter: ±2 ms allowed);
 * an SDL key the device never sent ('x', another keyboard) is not paired; Escape ends. */
static void evsrc_testKeywatchPairs(void **state)
{
	(void)state;
	struct display_opts o = {.headless = true, .width_px = 320, .height_px = 240};
	char err[300];
	struct display *d = display_open(&o, err, sizeof err);
	assert_non_null(d);
	int w;
	struct evsrc *src = pipe_source(&w);
	int64_t kt = (mono_ns() - 3000000) / 1000;
	put(w, EV_KEY, KEY_J, 1, kt);
	wait_seen(src, 1);
	push_sdl(SDLK_x);
	int64_t pushed = mono_ns();
	push_sdl(SDLK_j);
	int64_t pushed2 = mono_ns();
	push_sdl(SDLK_ESCAPE);
	struct pairs v = {.n = 0};
	const char *lines[] = {"test"};
	assert_int_equal(keywatch_run(d, src, 5, lines, 1, on_pair, &v, NULL), 1);
	assert_int_equal(v.n, 1);
	assert_string_equal(v.p[0].key, "j");
	assert_int_equal(v.p[0].kernel_ns, kt * 1000);
	/* SDL's stamp is the push, in whole ms of its ticks put on our clock (±1 ms each way). */
	double lag = (double)(v.p[0].sdl_ns - v.p[0].kernel_ns) / 1e6;
	double lo = (double)(pushed - kt * 1000) / 1e6, hi = (double)(pushed2 - kt * 1000) / 1e6;
	fprintf(stderr, "# SDL stamp - kernel: %.3f ms (pushed %.3f to %.3f ms after)\n", lag, lo, hi);
	assert_true(lag > lo - 2.0 && lag < hi + 2.0);
	assert_true(v.p[0].seen_ns >= v.p[0].kernel_ns);
	evsrc_close(src);
	close(w);
	display_close(d);
}

/* Through the kernel: a virtual keyboard made with uinput; a key-down written between two
 * CLOCK_MONOTONIC readings is stamped by the kernel between them. Needs a writable /dev/uinput. */
static void evsrc_testUinputKernelStamp(void **state)
{
	(void)state;
	int u = open("/dev/uinput", O_WRONLY | O_NONBLOCK);
	if (u < 0) {
		fprintf(stderr, "# /dev/uinput cannot be opened for writing (%s): the check through "
			"the kernel is not made on this machine\n", strerror(errno));
		skip();
	}
	assert_int_equal(ioctl(u, UI_SET_EVBIT, EV_KEY), 0);
	for (int c = KEY_ESC; c <= KEY_SPACE; c++)
		assert_int_equal(ioctl(u, UI_SET_KEYBIT, c), 0);
	struct uinput_setup us;
	memset(&us, 0, sizeof us);
	us.id.bustype = BUS_USB;
	us.id.vendor = 0x1234;
	us.id.product = 0x5678;
	snprintf(us.name, sizeof us.name, "tachist test keyboard");
	assert_int_equal(ioctl(u, UI_DEV_SETUP, &us), 0);
	assert_int_equal(ioctl(u, UI_DEV_CREATE), 0);
	char sys[64] = "", path[300] = "";
	assert_true(ioctl(u, UI_GET_SYSNAME(sizeof sys), sys) >= 0);
	/* Its event node: /sys/devices/virtual/input/<sys>/eventN. */
	for (int n = 0; n < 1024 && !path[0]; n++) {
		char p[300];
		snprintf(p, sizeof p, "/sys/devices/virtual/input/%s/event%d", sys, n);
		if (access(p, F_OK) == 0)
			snprintf(path, sizeof path, "/dev/input/event%d", n);
	}
	assert_true(path[0] != '\0');
	char err[600];
	struct evsrc *s = NULL;
	for (int i = 0; i < 100 && !s; i++) {   /* udev may still be setting the node up */
		s = evsrc_open_device(path, err, sizeof err);
		if (!s) {
			struct timespec d = {0, 20000000};
			nanosleep(&d, NULL);
		}
	}
	if (!s)
		fprintf(stderr, "# %s\n", err);
	assert_non_null(s);
	assert_string_equal(evsrc_name(s), "tachist test keyboard");
	assert_string_equal(evsrc_usb(s), "1234:5678");
	struct input_event ev[2];
	memset(ev, 0, sizeof ev);
	ev[0].type = EV_KEY;
	ev[0].code = KEY_J;
	ev[0].value = 1;
	ev[1].type = EV_SYN;
	ev[1].code = SYN_REPORT;
	int64_t before = mono_ns();
	assert_int_equal(write(u, ev, sizeof ev), (ssize_t)sizeof ev);
	int64_t after = mono_ns();
	struct evsrc_key k;
	int64_t t0 = mono_ns();
	int rc;
	while ((rc = evsrc_next(s, &k)) == 0)
		assert_true(mono_ns() - t0 < 2000000000);
	assert_int_equal(rc, 1);
	assert_int_equal(k.code, KEY_J);
	/* The stamp has µs resolution: allow the truncation below BEFORE. */
	assert_true(k.t_ns >= before / 1000 * 1000 && k.t_ns <= after);
	evsrc_close(s);
	ioctl(u, UI_DEV_DESTROY);
	close(u);
}

int main(void)
{
	setenv("SDL_VIDEODRIVER", "dummy", 1);
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(evsrc_testDownsOnlyWithTimes),
		cmocka_unit_test(evsrc_testSplitRecords),
		cmocka_unit_test(evsrc_testNothingLostAt1000PerSecond),
		cmocka_unit_test(evsrc_testGoneAfterQueued),
		cmocka_unit_test(evsrc_testKeyNamesAsSdl),
		cmocka_unit_test(evsrc_testRefusals),
		cmocka_unit_test(evsrc_testTrialRtFromKernelTime),
		cmocka_unit_test(evsrc_testKeywatchPairs),
		cmocka_unit_test(evsrc_testUinputKernelStamp),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
