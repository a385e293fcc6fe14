/* rig — the observer's display as the experimenter describes it, as plain data (a core header).
 *
 * Sizes in cm and px, viewing distance in cm, nominal refresh in Hz, an optional photodiode
 * marker. Read from its INI profile by rig_file.h (app/io/rig.c); used by geometry, timing plans,
 * the presenter and the store (which keeps the file's text verbatim). */
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
	char *input_device; /* [input] device: the response keyboard (event device path or name),
			     * NULL = keys through SDL (frame-stamped) */
	char *trigger_port; /* [trigger] port: serial device for trigger codes, NULL = none */
	int trigger_baud;   /* [trigger] baud, default 115200 */
	char *pool_server;  /* [pool] server: where the console sends finished sessions (a libpq
			     * URI or keyword string, never with a password), NULL = nowhere */
	char *pool_schema;  /* [pool] schema on that server, NULL = the default (tachist) */
};

#endif
