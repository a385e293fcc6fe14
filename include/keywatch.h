/* keywatch — `tachist timing --keys`: each press on the response device with the kernel's time of
 * it beside the time SDL gave the same press, to show what the kernel stamp gains.
 *
 * Key-downs from the evdev source and SDL key-downs are paired by key name (the oldest unpaired
 * one of each side). SDL's own stamp is whole milliseconds of its tick counter; it is put on
 * CLOCK_MONOTONIC through an offset measured once at the start (±1 ms). SDL's queue is read every
 * millisecond, without vsync, so the time SDL's event reached the program is known to about a
 * millisecond too. Nothing here prints: the caller words each pair. */
#ifndef TACHIST_KEYWATCH_H
#define TACHIST_KEYWATCH_H

#include <signal.h>
#include <stddef.h>
#include <stdint.h>

struct display;
struct evsrc;

struct keywatch_press {
	char key[24];          /* the key's name (SDL's, lower case) */
	int64_t kernel_ns;     /* the device's event time, CLOCK_MONOTONIC ns (µs resolution) */
	int64_t sdl_ns;        /* SDL's stamp of the same press on CLOCK_MONOTONIC (ms resolution) */
	int64_t seen_ns;       /* when the program read SDL's event */
};

/* Shows LINES (NLINES) on D and calls ON_PRESS(pair, CTX) for each paired press until N pairs,
 * Escape, a window close or *STOP (may be NULL). Returns the number of pairs, or -1 when the
 * device failed (evsrc_error says why). */
int keywatch_run(struct display *d, struct evsrc *src, int n, const char *const *lines,
		 size_t nlines, void (*on_press)(const struct keywatch_press *p, void *ctx),
		 void *ctx, volatile sig_atomic_t *stop);

#endif
