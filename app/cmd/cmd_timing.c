/* cmd_timing — `tachist timing`: flips an empty frame N times on the observer's display and
 * reports the frame-interval distribution (a text histogram), the estimated refresh rate against
 * the rig's nominal one, dropped frames, and whether SDL_RenderPresent actually blocks (waits for
 * the vertical blank) — without which frame times mean nothing. */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>

#include "cmd.h"
#include "dclock.h"
#include "display.h"
#include "frames.h"
#include "rig.h"

/* A bar of '#' for COUNT out of TOP, at most 50 wide, in BAR (64 bytes). */
static const char *hist_bar(char *bar, size_t count, size_t top)
{
	size_t w = (size_t)((double)count / (double)top * 50 + 0.999);
	memset(bar, '#', w);
	bar[w] = '\0';
	return bar;
}

int cmd_timing(int argc, char **argv)
{
	const char *rig_arg = NULL;
	unsigned long long nframes = 300;
	bool headless = false;
	for (int i = 1; i < argc; i++) {
		if (!strcmp(argv[i], "--rig") && i + 1 < argc) {
			rig_arg = argv[++i];
		} else if (!strcmp(argv[i], "--frames") && i + 1 < argc) {
			if (cmd_parse_u64(argv[++i], &nframes) || nframes < 20 || nframes > 100000) {
				fprintf(stderr, "tachist: --frames takes a whole number from 20 to 100000\n");
				return EXIT_USAGE;
			}
		} else if (!strcmp(argv[i], "--headless")) {
			headless = true;
		} else {
			cmd_print_usage("timing", stderr);
			return EXIT_USAGE;
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
	double *iv = malloc(n * sizeof *iv);
	if (!flips || !inside || !iv) {
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
	/* Histogram: 0.25 ms bins around the median, everything else in the end bins. */
	for (size_t i = 1; i < n; i++)
		iv[i - 1] = (double)(flips[i] - flips[i - 1]) / 1e6;
	size_t ni = n - 1;
	enum { NB = 24 };
	double lo = m.median_ms - 0.25 * NB / 2;
	size_t bins[NB] = {0}, under = 0, over = 0, top = 1;
	for (size_t i = 0; i < ni; i++) {
		double b = floor((iv[i] - lo) / 0.25);
		if (b < 0) under++;
		else if (b >= NB) over++;
		else bins[(int)b]++;
	}
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
	/* Headless, the virtual clock stands in for the display and no present waits for anything:
	 * the time spent inside it says nothing, so nothing about it is printed. */
	if (!headless) {
		gsl_sort(inside, 1, n);
		double in_med = gsl_stats_median_from_sorted_data(inside, 1, n);
		double period_ms = 1000.0 / rig.refresh_hz;
		/* Present blocks when it waits for the vertical blank: with nothing else to do, a
		 * frame then spends most of its period inside the call. Under half a period, and a
		 * rate far above the nominal one, means it returns at once. */
		bool blocks = in_med > 0.5 * period_ms || (m.rate_hz < 1.1 * rig.refresh_hz &&
							   m.rate_hz > 0.9 * rig.refresh_hz);
		printf("\npresent blocks: %s (median %.3f ms inside each present)\n",
		       blocks ? "yes" : "NO - frame times are not locked to the display; check the "
		       "driver's vsync setting", in_med);
		if (!blocks)
			code = EXIT_PROBLEMS;
	}
out:
	free(flips);
	free(inside);
	free(iv);
	dclock_destroy(c);
	display_close(disp);
	rig_clear(&rig);
	return code;
}
