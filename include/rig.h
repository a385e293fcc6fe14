/* rig — the observer's display as the experimenter describes it (an INI profile).
 *
 * Sizes in cm and px, viewing distance in cm, nominal refresh in Hz, an optional photodiode
 * marker. Loaded by io/rig.c; used by geometry, timing plans, the presenter and the store (which
 * keeps the file's text verbatim). */
#ifndef TACHIST_RIG_H
#define TACHIST_RIG_H

#include "diag.h"

struct lum_cal;

enum rig_corner { RIG_MARKER_NONE, RIG_MARKER_TOP_LEFT, RIG_MARKER_TOP_RIGHT,
		  RIG_MARKER_BOTTOM_LEFT, RIG_MARKER_BOTTOM_RIGHT };

struct rig {
	char *path;        /* file it came from (owned), NULL for built-in defaults */
	char *text;        /* the file's full text (owned), stored with each session */
	char *name;        /* free text label, may be NULL */
	double width_cm, height_cm;
	int width_px, height_px;
	double distance_cm;
	double refresh_hz;
	int display;       /* display index for the observer's window */
	enum rig_corner marker_corner;
	int marker_px;     /* side of the square marker patch */
	struct lum_cal *lum; /* the [luminance] calibration (owned), NULL when the rig has none */
	int max_image_side; /* widest or tallest image file accepted, px (default: image.h's) */
};

/* Loads and validates PATH; every problem goes to D as FILE:LINE. Returns 0 when usable, -1 when
 * any error was found (R is then cleared). R must be released with rig_clear. */
int rig_load(const char *path, struct rig *r, struct diag_list *d);
/* Parses rig text already in memory (PATH used only for messages). */
int rig_parse(const char *path, const char *text, struct rig *r, struct diag_list *d);
void rig_clear(struct rig *r);

#endif
