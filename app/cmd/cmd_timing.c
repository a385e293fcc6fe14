/* cmd_timing — `tachist timing`: flips an empty frame N times on the observer's display and
 * reports the frame-interval distribution (a text histogram), the estimated refresh rate against
 * the rig's nominal one, dropped frames, and whether SDL_RenderPresent actually blocks (waits for
 * the vertical blank) — without which frame times mean nothing. With --keys: the input devices
 * this user can read, and on the rig's [input] device each press's kernel time beside SDL's time
 * of the same press, with the distribution of that lag (keywatch.c). */
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>

#include "cmd.h"
#include "dclock.h"
#include "display.h"
#include "evsrc.h"
#include "frames.h"
#include "keywatch.h"
#include "rig_file.h"

/* A bar of '#' for COUNT out of TOP, at most 50 wide, in BAR (64 bytes). */
static const char *hist_bar(char *bar, size_t count, size_t top)
{
	size_t w = (size_t)((double)count / (double)top * 50 + 0.999);
	memset(bar, '#', w);
	bar[w] = '\0';
	return bar;
}

enum { O_RIG, O_FRAMES, O_HEADLESS, O_KEYS };
const struct opts_row cmd_timing_opts[] = {
	[O_RIG] = {"rig", "FILE", "the rig profile with the nominal refresh and display"},
	[O_FRAMES] = {"frames", "N", "frames to flip, 20 to 100000 (default 300)"},
	[O_HEADLESS] = {"headless", NULL, "no display: measure the virtual clock (a self-test)"},
	[O_KEYS] = {"keys", NULL, "list the input devices; watch the rig's [input] device's presses"},
	OPTS_END,
};

/* The frame-interval histogram of the N flips FLIPS: 0.25 ms bins around the median M, everything
 * else in the end bins. */
static void print_histogram(const int64_t *flips, size_t n, const struct frames_measure *m)
{
	double *iv = xmalloc(n * sizeof *iv);
	for (size_t i = 1; i < n; i++)
		iv[i - 1] = (double)(flips[i] - flips[i - 1]) / 1e6;
	size_t ni = n - 1;
	enum { NB = 24 };
	double lo = m->median_ms - 0.25 * NB / 2;
	size_t bins[NB] = {0}, under = 0, over = 0, top = 1;
	for (size_t i = 0; i < ni; i++) {
		double b = floor((iv[i] - lo) / 0.25);
		if (b < 0) under++;
		else if (b >= NB) over++;
		else bins[(int)b]++;
	}
	free(iv);
	for (int b = 0; b < NB; b++)
		if (bins[b] > top) top = bins[b];
	if (under > top) top = under;
	if (over > top) top = over;
	printf("\ninterval (ms)      count\n");
	char bar[64];
#define BAR(cnt) hist_bar(bar, (cnt), top)
	if (under)
		printf("      < %7.2f %6zu %s\n", lo, under, BAR(under));
	for (int b = 0; b < NB; b++)
		if (bins[b])
			printf("%7.2f-%7.2f %6zu %s\n", lo + 0.25 * b, lo + 0.25 * (b + 1), bins[b], BAR(bins[b]));
	if (over)
		printf("      >=%7.2f %6zu %s\n", lo + 0.25 * NB, over, BAR(over));
#undef BAR
}

/* Whether present waits for the vertical blank, from the N times INSIDE (ms) spent in each
 * present and the measured rate; prints the verdict. */
static bool present_blocks(double *inside, size_t n, const struct frames_measure *m,
			   double nominal_hz)
{
	gsl_sort(inside, 1, n);
	double in_med = gsl_stats_median_from_sorted_data(inside, 1, n);
	double period_ms = 1000.0 / nominal_hz;
	/* Present blocks when it waits for the vertical blank: with nothing else to do, a frame
	 * then spends most of its period inside the call. Under half a period, and a rate far
	 * above the nominal one, means it returns at once. */
	bool blocks = in_med > 0.5 * period_ms || (m->rate_hz < 1.1 * nominal_hz &&
						   m->rate_hz > 0.9 * nominal_hz);
	printf("\npresent blocks: %s (median %.3f ms inside each present)\n",
	       blocks ? "yes" : "NO - frame times are not locked to the display; check the "
	       "driver's vsync setting", in_med);
	return blocks;
}

/* Prints the input devices under /dev/input, and how to read them without root. */
static void list_devices(void)
{
	struct evsrc_device *v;
	size_t n;
	if (evsrc_list(&v, &n)) {
		printf("input devices: none (this machine has no /dev/input)\n");
		return;
	}
	int unreadable = 0;
	printf("input devices (/dev/input):\n");
	for (size_t i = 0; i < n; i++) {
		const struct evsrc_device *x = &v[i];
		if (!x->readable) {
			printf("  %-20s no read access\n", x->path);
			unreadable++;
			continue;
		}
		printf("  %-20s %-9s %-9s \"%s\"\n", x->path, x->keyboard ? "keyboard" : "other",
		       x->usb[0] ? x->usb : "-", x->name);
		if (x->by_id[0])
			printf("  %-20s %s\n", "", x->by_id);
	}
	if (!n)
		printf("  (none)\n");
	free(v);
	if (unreadable)
		printf("\n%d device%s cannot be read by this user. To read input devices, add yourself to "
		       "the 'input' group\n(sudo usermod -aG input $USER, then log in again), or give the "
		       "response keyboard a udev rule\n(docs/response-timing.md). Never run tachist as "
		       "root for this.\n", unreadable, unreadable == 1 ? "" : "s");
	if (geteuid() == 0)
		printf("\nwarning: running as root reads every device; sessions must not run as root\n");
}

struct lagstats {
	double *sdl, *seen;   /* ms, SDL's stamp − kernel, and our read of SDL's event − kernel */
	size_t n;
	int64_t t0;
};

static void print_press(const struct keywatch_press *p, void *ctx)
{
	struct lagstats *l = ctx;
	if (!l->t0)
		l->t0 = p->kernel_ns;
	double sdl = (double)(p->sdl_ns - p->kernel_ns) / 1e6;
	double seen = (double)(p->seen_ns - p->kernel_ns) / 1e6;
	l->sdl[l->n] = sdl;
	l->seen[l->n++] = seen;
	printf("%4zu  %-10s %12.6f s %+9.3f ms %+9.3f ms\n", l->n, p->key,
	       (double)(p->kernel_ns - l->t0) / 1e9, sdl, seen);
	fflush(stdout);
}

static void print_lag(const char *what, double *v, size_t n)
{
	gsl_sort(v, 1, n);
	printf("  %-32s median %+8.3f ms, 90%% %+8.3f ms, min %+8.3f, max %+8.3f\n", what,
	       gsl_stats_median_from_sorted_data(v, 1, n),
	       gsl_stats_quantile_from_sorted_data(v, 1, n, 0.9), v[0], v[n - 1]);
}

enum { KEY_PRESSES = 20 };

/* timing --keys: the device list, then the rig's [input] device watched for KEY_PRESSES
 * presses on the observer's display. */
static int timing_keys(const struct rig *rig, bool headless)
{
	list_devices();
	if (!rig->input_device) {
		printf("\nThe rig names no response device: sessions read keys through SDL after each "
		       "flip (frame-stamped).\nName one in the rig's [input] section "
		       "(device = /dev/input/by-id/...) to watch its presses here.\n");
		return EXIT_OK;
	}
	char e[700];
	struct evsrc *src = evsrc_open_device(rig->input_device, e, sizeof e);
	if (!src) {
		fprintf(stderr, "tachist: %s: [input] device: %s\n", rig->path ? rig->path : "rig", e);
		return EXIT_PROBLEMS;
	}
	printf("\nresponse device: \"%s\"%s%s (%s)\n", evsrc_name(src), evsrc_usb(src) ? " USB " : "",
	       evsrc_usb(src) ? evsrc_usb(src) : "", rig->input_device);
	if (headless) {
		printf("watching presses needs the observer's display (SDL delivers keys to a focused "
		       "window); run without --headless\n");
		evsrc_close(src);
		return EXIT_OK;
	}
	char err[512];
	struct display_opts o = {.vsync = false, .display_index = rig->display,
				 .width_px = rig->width_px, .height_px = rig->height_px,
				 .background = 0, .title = "tachist timing --keys"};
	struct display *disp = display_open(&o, err, sizeof err);
	if (!disp) {
		fprintf(stderr, "tachist: %s\n", err);
		evsrc_close(src);
		return EXIT_PROBLEMS;
	}
	printf("press keys on it (%d presses; Escape ends)\n\n", KEY_PRESSES);
	printf("   #  key          kernel time    SDL stamp  SDL read\n");
	printf("                               (− kernel)  (− kernel)\n");
	struct lagstats l = {.sdl = xcalloc(KEY_PRESSES, sizeof(double)),
			     .seen = xcalloc(KEY_PRESSES, sizeof(double))};
	static const char *const lines[] = {"Press keys on the response device", "",
					    "Escape ends"};
	int got = keywatch_run(disp, src, KEY_PRESSES, lines, 3, print_press, &l, NULL);
	int code = EXIT_OK;
	if (got < 0) {
		fprintf(stderr, "tachist: the response device stopped: %s\n", evsrc_error(src));
		code = EXIT_PROBLEMS;
	}
	if (l.n >= 2) {
		printf("\nlag behind the kernel's stamp over %zu presses:\n", l.n);
		print_lag("SDL's own stamp (1 ms ticks)", l.sdl, l.n);
		print_lag("SDL's event read (polled each ms)", l.seen, l.n);
		printf("  (a trial loop that reads SDL after each flip adds up to one refresh period "
		       "more; sessions with [input] use the kernel's stamp)\n");
	}
	free(l.sdl);
	free(l.seen);
	display_close(disp);
	evsrc_close(src);
	return code;
}

int cmd_timing(int argc, char **argv)
{
	const char *rig_arg = NULL, *v;
	unsigned long long nframes = 300;
	bool headless = false, keys = false;
	struct opts p;
	opts_begin(&p, "timing", cmd_timing_opts, argc, argv);
	for (int k; (k = opts_next(&p, &v)) != OPTS_DONE;) {
		switch (k) {
		case O_RIG: rig_arg = v; break;
		case O_FRAMES:
			if (cmd_parse_u64(v, &nframes) || nframes < 20 || nframes > 100000)
				return opts_usage("timing", "--frames takes a whole number from 20 to "
						  "100000 (got '%s')", v);
			break;
		case O_HEADLESS: headless = true; break;
		case O_KEYS: keys = true; break;
		case OPTS_ARG: return opts_usage("timing", "unexpected argument '%s'", v);
		default: return EXIT_USAGE;
		}
	}
	char *rigpath = cmd_rig_path(rig_arg);
	if (!rigpath) {
		fprintf(stderr, "tachist: no rig profile found; pass --rig FILE\n");
		return EXIT_PROBLEMS;
	}
	struct rig rig;
	struct diag_list d;
	diag_init(&d);
	int rc = rig_load(rigpath, &rig, &d);
	cmd_print_diags(&d, stderr);
	diag_clear(&d);
	free(rigpath);
	if (rc)
		return EXIT_PROBLEMS;
	if (keys) {
		int krc = timing_keys(&rig, headless);
		rig_clear(&rig);
		return krc;
	}
	char err[512];
	struct display_opts o = {.headless = headless, .vsync = true, .display_index = rig.display,
				 .width_px = rig.width_px, .height_px = rig.height_px,
				 .background = 0, .title = "tachist timing"};
	struct display *disp = display_open(&o, err, sizeof err);
	if (!disp) {
		fprintf(stderr, "tachist: %s\n", err);
		rig_clear(&rig);
		return EXIT_PROBLEMS;
	}
	const char *drv = display_driver(disp);
	if (!headless && (!strcmp(drv, "dummy") || !strcmp(drv, "offscreen"))) {
		fprintf(stderr, "tachist: no display to measure (SDL chose its '%s' video driver); run "
			"from a desktop session, or add --headless to see the output format\n", drv);
		display_close(disp);
		rig_clear(&rig);
		return EXIT_PROBLEMS;
	}
	struct dclock *c;
	if (headless) {
		struct dclock_virtual_opts vo = {.hz = rig.refresh_hz, .seed = 1};
		c = dclock_virtual_new(display_renderer(disp), &vo);
	} else {
		c = dclock_vsync_new(display_renderer(disp), rig.refresh_hz);
	}
	size_t n = (size_t)nframes;
	int64_t *flips = malloc(n * sizeof *flips);
	double *inside = malloc(n * sizeof *inside);
	if (!flips || !inside) {
		fprintf(stderr, "tachist: out of memory\n");
		return EXIT_PROBLEMS;
	}
	/* Alternate black and dark grey so a photodiode or an eye sees the flips. */
	for (size_t i = 0; i < n; i++) {
		display_set_background(disp, (i & 1) ? 32 : 0);
		display_clear(disp);
		int64_t t0 = dclock_monotonic_ns();
		flips[i] = dclock_flip(c);
		inside[i] = (double)(flips[i] - t0) / 1e6;
		char key[24];
		uint32_t ms;
		int k = display_poll_key(disp, key, sizeof key, &ms);
		if (k == 2 || (k == 1 && !strcmp(key, "escape"))) {
			n = i + 1;
			break;
		}
	}
	struct frames_measure m;
	int code = EXIT_OK;
	if (n < 2 || frames_measure(flips, n, rig.refresh_hz, &m)) {
		fprintf(stderr, "tachist: too few frames to measure\n");
		code = EXIT_PROBLEMS;
		goto out;
	}
	printf("display: %s driver, vsync %s, %s timing\n", display_driver(disp),
	       display_has_vsync(disp) ? "granted" : "not granted", headless ? "simulated" : "real");
	printf("frames: %zu intervals; median %.3f ms, MAD %.3f ms, min %.3f, max %.3f, SD %.3f\n",
	       m.nintervals, m.median_ms, m.mad_ms, m.min_ms, m.max_ms, m.sd_ms);
	double off = (m.rate_hz - rig.refresh_hz) / rig.refresh_hz * 100;
	printf("estimated rate: %.3f Hz (rig says %.3f Hz, %+.2f%%)%s\n", m.rate_hz, rig.refresh_hz,
	       off, fabs(off) > 1 ? "  <- mismatch over 1%" : "");
	printf("dropped frames: %zu (intervals over 1.5 nominal periods)\n", m.dropped);
	print_histogram(flips, n, &m);
	/* Headless, the virtual clock stands in for the display and no present waits for anything:
	 * the time spent inside it says nothing, so nothing about it is printed. */
	if (!headless && !present_blocks(inside, n, &m, rig.refresh_hz))
		code = EXIT_PROBLEMS;
out:
	free(flips);
	free(inside);
	dclock_destroy(c);
	display_close(disp);
	rig_clear(&rig);
	return code;
}
