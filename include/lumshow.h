/* lumshow — the observer's display as a photometer target: one grey code (or one channel's
 * code) over the whole screen or in a centred patch, for measuring the display's luminance.
 *
 * lumshow_draw draws into an open display (used by `tachist calibrate`). lumshow_start runs the
 * display in a child process that shows each code the caller sends, so the console can take the
 * readings on the experimenter's terminal while the child keeps the observer's window alive; the
 * child's output never reaches the terminal, and its end (window closed, crash) is reported as an
 * error by the next lumshow_show. */
#ifndef TACHIST_LUMSHOW_H
#define TACHIST_LUMSHOW_H

#include <stdbool.h>
#include <stddef.h>

struct display;
struct rig;

/* Fills the output (PATCH_PX > 0: a centred square of that side on a SURROUND grey) with CODE on
 * channel CH (enum lum_channel: grey is all three primaries, a colour channel only its own).
 * Does not present. */
void lumshow_draw(struct display *disp, int patch_px, int surround, int code, int ch);

struct lumshow_opts {
	bool headless, window;
	double patch_deg;      /* 0: the whole screen */
	int surround;          /* grey code around the patch */
};

struct lumshow;

/* Forks the child, which opens the display the rig describes. Returns NULL with a sentence in
 * ERR when the child cannot start or its display cannot open. */
struct lumshow *lumshow_start(const struct rig *rig, const struct lumshow_opts *o, char *err,
			      size_t errlen);
/* Has the child show CODE on channel CH and waits until it is on the screen. Returns 0, or -1
 * with a sentence in ERR when the child has gone (the observer's window was closed, or it
 * failed). */
int lumshow_show(struct lumshow *s, int ch, int code, char *err, size_t errlen);
/* Ends the child (closing its window) and frees S. NULL is fine. */
void lumshow_stop(struct lumshow *s);

#endif
