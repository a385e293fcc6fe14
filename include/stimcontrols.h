/* stimcontrols — random-direction controls for a stimulus list: for each row with a source, an
 * image at the same L2 distance from the source in a random direction, written in the channels
 * the audit compares (grey when the row's image and its source are both grey, colour otherwise;
 * alpha kept when the source has it), then decoded again and measured exactly as the audit
 * measures; and a new list holding every original row and every control.
 *
 * OUT/<category>/<stem>_rand[_N].png and OUT/controls.csv. The result owns its events; every
 * message is one sentence about one row, which the command prefixes with LIST:LINE. Pixel
 * arithmetic is core/pixels.c. Used by app/cmd/cmd_stimuli.c. */
#ifndef TACHIST_STIMCONTROLS_H
#define TACHIST_STIMCONTROLS_H

#include <stddef.h>

#include "stimlist.h"

#define STIMCONTROLS_TOLERANCE 0.01   /* relative tolerance of a control's achieved L2 */

struct stimcontrols_opts {
	const char *out_dir;
	unsigned long long seed;
	double tolerance;          /* (0, 1) */
	int budget_from_level;     /* the row's level (in UNITS) instead of the measured distance */
	double units;              /* 1 or 255, for levels */
	long max_side;             /* image size limit (0: image.h's default) */
};
void stimcontrols_defaults(struct stimcontrols_opts *o);

enum stimcontrols_status { STIMCONTROLS_MADE, STIMCONTROLS_NOTE, STIMCONTROLS_PROBLEM };

struct stimcontrols_event {
	size_t row;
	enum stimcontrols_status status;
	char *msg;                 /* NOTE and PROBLEM: a sentence naming the row's image */
	char *control;             /* MADE: the control's path relative to OUT */
	double budget, achieved;   /* MADE: L2, values in [0, 1] */
	double clipped;            /* MADE: fraction of values clipped at 0 or 1 */
	int channels;              /* MADE: colour channels compared (1 or 3) */
};

struct stimcontrols {
	struct stimcontrols_event *v;   /* in row order */
	size_t n;
	size_t nmade, nproblems, nsource;
	char *list_out;                 /* OUT/controls.csv */
};

/* Makes the controls of L. Returns 0 when the list was written (rows may still have problems:
 * see R->nproblems), -1 with ERR when nothing could be done (the list already has a control or
 * l2_achieved column, OUT cannot be created, the list cannot be written). */
int stimcontrols_run(const struct stimlist *l, const struct stimcontrols_opts *o,
		     struct stimcontrols *r, char *err, size_t errlen);
void stimcontrols_clear(struct stimcontrols *r);

#endif
