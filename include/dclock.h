/* dclock — the display clock: flip() presents the frame drawn so far and returns the time (CLOCK_MONOTONIC
 * ns) at which it reached the screen.
 *
 * Two implementations behind one small vtable:
 *  - vsync: SDL_RenderPresent on a renderer created with vsync, stamped right after it returns;
 *  - virtual: time advances exactly one refresh period per flip from a fixed origin. It can inject
 *    dropped frames (a flip that arrives k+1 periods after the previous one) at a seeded rate, and
 *    timing jitter (a seeded Gaussian offset on each stamp, never reordering flips), and can pace in
 *    real time (sleep until the virtual stamp) so a person can watch a headless run. It still
 *    presents to its renderer when it has one, so screenshots and Xvfb windows show the frames.
 * The virtual clock logs every flip at which it injected a drop, for tests. */
#ifndef TACHIST_DCLOCK_H
#define TACHIST_DCLOCK_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

struct SDL_Renderer;
struct dclock;

struct dclock_ops {
	int64_t (*flip)(struct dclock *c);
	int64_t (*now)(struct dclock *c);
	void (*destroy)(struct dclock *c);
};

struct dclock {
	const struct dclock_ops *ops;
	int64_t period_ns;        /* nominal period the clock was made with */
	uint64_t nflips;          /* flips so far */
	bool simulated;           /* true for the virtual clock */
};

/* Options of the virtual clock. */
struct dclock_virtual_opts {
	double hz;                /* refresh rate */
	double drop_rate;         /* probability that a flip comes late by whole periods, 0..1 */
	int drop_frames;          /* periods lost per injected drop (default 1) */
	double jitter_ms;         /* SD of the Gaussian offset added to each stamp (clipped to ±0.4 period) */
	uint64_t seed;            /* for drops and jitter */
	bool pace;                /* sleep so that virtual time keeps up with real time; after an
				     idle gap (a flip more than one period late) pacing restarts
				     from that flip rather than rushing to catch up */
	int64_t origin_ns;        /* time of flip 0's predecessor; 0 = now */
};

/* Monotonic time now, ns. */
int64_t dclock_monotonic_ns(void);

/* Vsync clock on RENDERER (borrowed; must have been created with SDL_RENDERER_PRESENTVSYNC).
 * HZ is the nominal rate, used only as period_ns. */
struct dclock *dclock_vsync_new(struct SDL_Renderer *renderer, double hz);
/* Virtual clock; RENDERER may be NULL (no presenting at all). */
struct dclock *dclock_virtual_new(struct SDL_Renderer *renderer, const struct dclock_virtual_opts *o);

static inline int64_t dclock_flip(struct dclock *c) { return c->ops->flip(c); }
/* The clock's idea of now: monotonic for vsync and paced virtual clocks; the last flip's stamp for
 * an unpaced virtual clock (so input polled right after a flip is stamped with that flip). */
static inline int64_t dclock_now(struct dclock *c) { return c->ops->now(c); }
void dclock_destroy(struct dclock *c);

/* Virtual clock only: flip numbers (1-based count of flips, i.e. the value of nflips right after the
 * late flip) at which a drop was injected, and their count. NULL/0 for the vsync clock. */
const uint64_t *dclock_injected(const struct dclock *c, size_t *n);

#endif
