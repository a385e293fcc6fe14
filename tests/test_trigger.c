/* test_trigger — trigger codes through a serial port, with a pseudo-terminal pair (openpty) as
 * the port: the port is set raw 8N1 at the rig's baud, every code is read back in order (also
 * bytes a cooked terminal would change), the trial loop writes each trial's onset code right
 * after the onset flip and the response code when an answer counts, a closed peer fails the
 * write and abandons the trial; the protocol's [triggers] section. */
#include <errno.h>
#include <fcntl.h>
#include <poll.h>
#include <pty.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <termios.h>
#include <time.h>
#include <unistd.h>
#include <cmocka.h>

#include "dclock.h"
#include "diag.h"
#include "display.h"
#include "observer.h"
#include "protocol_file.h"
#include "responder.h"
#include "trialloop.h"
#include "trigger.h"

static int64_t mono_ns(void)
{
	struct timespec ts;
	clock_gettime(CLOCK_MONOTONIC, &ts);
	return (int64_t)ts.tv_sec * 1000000000 + ts.tv_nsec;
}

struct pty {
	int master;
	char name[256];
};

static void pty_open(struct pty *p)
{
	int slave;
	assert_int_equal(openpty(&p->master, &slave, p->name, NULL, NULL), 0);
	close(slave);   /* tachist opens the port by its name, as it would /dev/ttyUSB0 */
}

/* Reads up to N bytes the port wrote (waits up to 1 s for the first, 50 ms for the rest). */
static size_t read_back(int master, unsigned char *buf, size_t n)
{
	size_t got = 0;
	while (got < n) {
		struct pollfd p = {master, POLLIN, 0};
		if (poll(&p, 1, got ? 50 : 1000) <= 0)
			break;
		ssize_t r = read(master, buf + got, n - got);
		if (r <= 0)
			break;
		got += (size_t)r;
	}
	return got;
}

/* Codes come out in order, byte for byte: 10 and 13 (which a terminal's output processing would
 * turn into CR LF or drop) and 255 included, because the port is raw (POSI cfmakeraw clears
 * OPOST). Each write's stamp lies between two CLOCK_MONOTONIC readings around it. */
static void trigger_testCodesInOrder(void **state)
{
	(void)state;
	struct pty p;
	pty_open(&p);
	char err[400];
	struct trigger *t = trigger_open(p.name, 115200, err, sizeof err);
	assert_non_null(t);
	const int codes[] = {10, 11, 255, 1, 13, 100};
	for (size_t i = 0; i < 6; i++) {
		int64_t before = mono_ns(), at = 0;
		assert_int_equal(trigger_send(t, codes[i], &at, err, sizeof err), 0);
		assert_true(at >= before && at <= mono_ns());
	}
	unsigned char buf[16];
	assert_int_equal(read_back(p.master, buf, sizeof buf), 6);
	for (size_t i = 0; i < 6; i++)
		assert_int_equal(buf[i], codes[i]);
	trigger_close(t);
	close(p.master);
}

/* The port is left at 8 data bits, no parity, one stop bit, the asked baud, no flow control
 * (8N1 as POSI termios spells it: CS8, PARENB and CSTOPB clear). */
static void trigger_testEightNOne(void **state)
{
	(void)state;
	struct pty p;
	pty_open(&p);
	char err[400];
	struct trigger *t = trigger_open(p.name, 9600, err, sizeof err);
	assert_non_null(t);
	int fd = open(p.name, O_RDWR | O_NOCTTY);
	assert_true(fd >= 0);
	struct termios tio;
	assert_int_equal(tcgetattr(fd, &tio), 0);
	assert_int_equal(tio.c_cflag & CSIZE, CS8);
	assert_int_equal(tio.c_cflag & PARENB, 0);
	assert_int_equal(tio.c_cflag & CSTOPB, 0);
	assert_int_equal(tio.c_oflag & OPOST, 0);
	assert_int_equal(cfgetospeed(&tio), B9600);
	close(fd);
	trigger_close(t);
	close(p.master);
}

/* What cannot be a trigger port is refused with its name; a rate that is not standard too. */
static void trigger_testRefusals(void **state)
{
	(void)state;
	char err[400];
	assert_null(trigger_open("/dev/null", 115200, err, sizeof err));
	assert_non_null(strstr(err, "/dev/null"));
	assert_non_null(strstr(err, "not a serial port"));
	assert_null(trigger_open("/nonexistent/ttyUSB9", 115200, err, sizeof err));
	assert_non_null(strstr(err, "/nonexistent/ttyUSB9"));
	struct pty p;
	pty_open(&p);
	assert_null(trigger_open(p.name, 12345, err, sizeof err));
	assert_non_null(strstr(err, "12345"));
	close(p.master);
}

/* The peer closing (an unplugged adapter) makes the next write fail with the port named. */
static void trigger_testPeerClosed(void **state)
{
	(void)state;
	struct pty p;
	pty_open(&p);
	char err[400];
	struct trigger *t = trigger_open(p.name, 115200, err, sizeof err);
	assert_non_null(t);
	close(p.master);
	assert_int_equal(trigger_send(t, 5, NULL, err, sizeof err), -1);
	assert_non_null(strstr(err, p.name));
	trigger_close(t);
}

/* ---- in the trial loop ---- */

struct loopfx {
	struct display *d;
	struct dclock *c;
	struct responder *r;
	struct trigger *t;
	struct trialloop *tl;
	struct pty p;
	int onset_codes[2];
};

static void loop_setup(struct loopfx *f)
{
	memset(f, 0, sizeof *f);
	struct display_opts o = {.headless = true, .width_px = 320, .height_px = 240, .background = 128};
	char err[400];
	f->d = display_open(&o, err, sizeof err);
	assert_non_null(f->d);
	struct dclock_virtual_opts vo = {.hz = 60, .seed = 2};
	f->c = dclock_virtual_new(display_renderer(f->d), &vo);
	struct observer_spec s;
	assert_int_equal(observer_parse("model:rt=200,seed=5", &s, err, sizeof err), 0);
	f->r = responder_model_new(&s);
	pty_open(&f->p);
	f->t = trigger_open(f->p.name, 115200, err, sizeof err);
	assert_non_null(f->t);
	f->onset_codes[0] = 21;
	f->onset_codes[1] = 22;
	struct trialloop_config cfg = {
		.disp = f->d, .clock = f->c, .resp = f->r, .epoch_frames = {3, 2, 6, 4, 30, 2, 5},
		.period_ns = f->c->period_ns, .stim_px = 100, .nchoices = 2,
		.trigger = f->t, .onset_codes = f->onset_codes, .response_code = 50,
	};
	f->tl = trialloop_new(&cfg);
}

static void loop_teardown(struct loopfx *f)
{
	trialloop_destroy(f->tl);
	trigger_close(f->t);
	responder_destroy(f->r);
	dclock_destroy(f->c);
	display_close(f->d);
}

/* Four trials of categories 0, 1, 1, 0 send 21 50 22 50 22 50 21 50: each trial's onset code,
 * then the response code (the model answers at 200 ms, inside the 500 ms window), in order; each
 * trial keeps the time its onset code's write returned, later than the trial's start in real
 * time and increasing from trial to trial. */
static void trigger_testTrialCodesInOrder(void **state)
{
	(void)state;
	struct loopfx f;
	loop_setup(&f);
	const int truths[] = {0, 1, 1, 0};
	int64_t last = 0;
	for (int i = 0; i < 4; i++) {
		struct trialloop_trial t = {NULL, truths[i], false, 0, false};
		struct trial_record rec;
		memset(&rec, 0, sizeof rec);
		int64_t before = mono_ns();
		assert_int_equal(trialloop_run(f.tl, &t, &rec), TRIALLOOP_DONE);
		assert_true(rec.response >= 0);
		assert_true(rec.trigger_ns > before && rec.trigger_ns > last);
		last = rec.trigger_ns;
		assert_int_equal(trialloop_iti_finish(f.tl), TRIALLOOP_DONE);
	}
	unsigned char buf[16];
	assert_int_equal(read_back(f.p.master, buf, sizeof buf), 8);
	const unsigned char want[] = {21, 50, 22, 50, 22, 50, 21, 50};
	assert_memory_equal(buf, want, 8);
	close(f.p.master);
	loop_teardown(&f);
}

/* The port's peer closed before a trial: the onset write fails, the trial is abandoned
 * (TRIALLOOP_FAULT, so it is not stored) and the reason names the port. */
static void trigger_testClosedPeerAbandonsTrial(void **state)
{
	(void)state;
	struct loopfx f;
	loop_setup(&f);
	struct trialloop_trial t = {NULL, 0, false, 0, false};
	struct trial_record rec;
	memset(&rec, 0, sizeof rec);
	assert_int_equal(trialloop_run(f.tl, &t, &rec), TRIALLOOP_DONE);
	assert_int_equal(trialloop_iti_finish(f.tl), TRIALLOOP_DONE);
	close(f.p.master);
	memset(&rec, 0, sizeof rec);
	assert_int_equal(trialloop_run(f.tl, &t, &rec), TRIALLOOP_FAULT);
	assert_non_null(strstr(trialloop_fault(f.tl), f.p.name));
	loop_teardown(&f);
}

/* ---- the protocol's [triggers] ---- */

static const char proto_head[] =
	"[experiment]\nname = trig\nlist = list.csv\n"
	"[categories]\nanimal = f\nvehicle = j\n"
	"[timing]\nstimulus_ms = 50\n"
	"[display]\nsize_deg = 5\n"
	"[block main]\n";

static int parse(const char *tail, struct protocol *p, struct diag_list *d)
{
	char text[2048];
	snprintf(text, sizeof text, "%s%s", proto_head, tail);
	diag_init(d);
	return protocol_parse("t.ini", text, p, d);
}

static bool has_diag(const struct diag_list *d, int line, const char *part)
{
	for (size_t i = 0; i < d->n; i++)
		if (d->v[i].line == line && strstr(d->v[i].msg, part))
			return true;
	return false;
}

/* onset for every category, onset.CATEGORY for one, response and block codes. */
static void trigger_testProtocolSection(void **state)
{
	(void)state;
	struct protocol p;
	struct diag_list d;
	int rc = parse("[triggers]\nonset = 10\nonset.vehicle = 12\nresponse = 50\n"
		       "block_start = 100\nblock_end = 101\n", &p, &d);
	for (size_t i = 0; i < d.n; i++)
		fprintf(stderr, "# %d: %s\n", d.v[i].line, d.v[i].msg);
	assert_int_equal(rc, 0);
	assert_int_equal(p.triggers.onset_choice[0], 10);
	assert_int_equal(p.triggers.onset_choice[1], 12);
	assert_int_equal(p.triggers.response, 50);
	assert_int_equal(p.triggers.block_start, 100);
	assert_int_equal(p.triggers.block_end, 101);
	protocol_clear(&p);
	diag_clear(&d);
	/* Without the section: no codes. */
	assert_int_equal(parse("", &p, &d), 0);
	assert_int_equal(p.triggers.onset_choice[0], 0);
	assert_int_equal(p.triggers.response, 0);
	protocol_clear(&p);
	diag_clear(&d);
}

/* Every problem of the section is reported at its line in one pass. */
static void trigger_testProtocolProblems(void **state)
{
	(void)state;
	struct protocol p;
	struct diag_list d;
	/* proto_head has 11 lines; [triggers] is line 12. */
	int rc = parse("[triggers]\nonset = 0\nonset.plant = 3\nresponse = 256\nresponse = 5\n"
		       "blok_end = 4\n", &p, &d);
	for (size_t i = 0; i < d.n; i++)
		fprintf(stderr, "# %d: %s\n", d.v[i].line, d.v[i].msg);
	assert_int_equal(rc, -1);
	assert_true(has_diag(&d, 13, "onset"));
	assert_true(has_diag(&d, 14, "plant"));
	assert_true(has_diag(&d, 15, "response"));
	assert_true(has_diag(&d, 16, "duplicate"));
	assert_true(has_diag(&d, 17, "block_end"));
	protocol_clear(&p);
	diag_clear(&d);
}

int main(void)
{
	setenv("SDL_VIDEODRIVER", "dummy", 1);
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(trigger_testCodesInOrder),
		cmocka_unit_test(trigger_testEightNOne),
		cmocka_unit_test(trigger_testRefusals),
		cmocka_unit_test(trigger_testPeerClosed),
		cmocka_unit_test(trigger_testTrialCodesInOrder),
		cmocka_unit_test(trigger_testClosedPeerAbandonsTrial),
		cmocka_unit_test(trigger_testProtocolSection),
		cmocka_unit_test(trigger_testProtocolProblems),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
