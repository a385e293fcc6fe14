/* keywatch — pairs kernel-stamped presses with SDL's events for the same presses (see
 * keywatch.h). Two small queues of unpaired presses, one per side; a pair is made as soon as
 * both sides have the same key, oldest first. A side's oldest entry is dropped when its queue is
 * full (a key only one side saw: another keyboard, or a key SDL does not name). */
#include "keywatch.h"

#include <ctype.h>
#include <stdbool.h>
#include <stdio.h>
#include <string.h>

#include <SDL.h>

#include "dclock.h"
#include "display.h"
#include "evsrc.h"

#define PENDING 32

struct side {
	struct keywatch_press v[PENDING];
	int n;
};

static void push(struct side *s, const struct keywatch_press *p)
{
	if (s->n == PENDING) {
		memmove(s->v, s->v + 1, (PENDING - 1) * sizeof s->v[0]);
		s->n--;
	}
	s->v[s->n++] = *p;
}

/* Takes the oldest entry of S named KEY into OUT; false when there is none. */
static bool take(struct side *s, const char *key, struct keywatch_press *out)
{
	for (int i = 0; i < s->n; i++)
		if (!strcmp(s->v[i].key, key)) {
			*out = s->v[i];
			memmove(s->v + i, s->v + i + 1, (size_t)(s->n - i - 1) * sizeof s->v[0]);
			s->n--;
			return true;
		}
	return false;
}

int keywatch_run(struct display *d, struct evsrc *src, int n, const char *const *lines,
		 size_t nlines, void (*on_press)(const struct keywatch_press *p, void *ctx),
		 void *ctx, volatile sig_atomic_t *stop)
{
	struct side kern = {0}, sdl = {0};
	int64_t offset = dclock_monotonic_ns() - (int64_t)SDL_GetTicks64() * 1000000;
	int pairs = 0;
	int64_t drawn = 0;
	while (pairs < n && !(stop && *stop)) {
		int64_t now = dclock_monotonic_ns();
		if (now - drawn > 50000000) {
			display_clear(d);
			display_draw_text(d, lines, nlines);
			SDL_RenderPresent(display_renderer(d));
			drawn = now;
		}
		/* The kernel's side first: its event always comes before SDL's for one press. */
		struct evsrc_key key;
		int rc = 0;
		while (pairs < n && (rc = evsrc_next(src, &key)) == 1) {
			struct keywatch_press k = {.kernel_ns = key.t_ns};
			evsrc_key_name(key.code, k.key, sizeof k.key);
			struct keywatch_press p;
			if (take(&sdl, k.key, &p)) {
				p.kernel_ns = k.kernel_ns;
				on_press(&p, ctx);
				pairs++;
			} else {
				push(&kern, &k);
			}
		}
		if (rc < 0)
			return -1;
		SDL_Event ev;
		while (pairs < n && SDL_PollEvent(&ev)) {
			if (ev.type == SDL_QUIT)
				return pairs;
			if (ev.type != SDL_KEYDOWN || ev.key.repeat)
				continue;
			if (ev.key.keysym.sym == SDLK_ESCAPE)
				return pairs;
			struct keywatch_press p = {.sdl_ns = offset + (int64_t)ev.key.timestamp * 1000000,
						   .seen_ns = dclock_monotonic_ns()};
			snprintf(p.key, sizeof p.key, "%s", SDL_GetKeyName(ev.key.keysym.sym));
			for (char *c = p.key; *c; c++)
				*c = (char)tolower((unsigned char)*c);
			struct keywatch_press k;
			if (take(&kern, p.key, &k)) {
				p.kernel_ns = k.kernel_ns;
				on_press(&p, ctx);
				pairs++;
			} else {
				push(&sdl, &p);
			}
		}
		SDL_Delay(1);
	}
	return pairs;
}
