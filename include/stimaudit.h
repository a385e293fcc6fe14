/* stimaudit — the audit of a stimulus list: each image decoded once, in list order, reduced to a
 * small record (size, channels, luminance, contrast, hashes, distance to its source), then
 * statistics across the set (usual size, category z-scores, exact and near duplicates) computed
 * from the records; problems become flags, and flags of one kind that say the same thing of
 * different images are gathered into groups.
 *
 * Memory holds one image and the last source (imgcache.h) besides the records, whatever the size
 * of the set. The result owns its records, flags, groups and pairs and borrows the list. Used by
 * app/cmd/cmd_stimuli.c, which prints it. */
#ifndef TACHIST_STIMAUDIT_H
#define TACHIST_STIMAUDIT_H

#include <stddef.h>
#include <stdint.h>

#include "image.h"
#include "rig.h"
#include "stimlist.h"

/* Defaults (documented in docs/stimuli.md). */
#define STIMAUDIT_SIZE_DEG 6.0   /* stimulus size assumed for the up-scaling check */
#define STIMAUDIT_TOLERANCE 0.02 /* relative budget tolerance */
#define STIMAUDIT_NEAR_BITS 8    /* perceptual-hash bits apart that still count as near duplicates */
#define STIMAUDIT_Z 3.0          /* |z| above which luminance or contrast is an outlier */

enum stimaudit_kind { STIMAUDIT_UNREADABLE, STIMAUDIT_SIZE, STIMAUDIT_UPSCALE,
		      STIMAUDIT_TRANSLUCENT, STIMAUDIT_LUMINANCE, STIMAUDIT_CONTRAST,
		      STIMAUDIT_DUPLICATE, STIMAUDIT_NEAR, STIMAUDIT_BUDGET, STIMAUDIT_SOURCE_SIZE,
		      STIMAUDIT_SOURCE_MISSING, STIMAUDIT_NKINDS };

struct stimaudit_opts {
	double units;        /* 1 (values in [0, 1]) or 255 */
	double tolerance;    /* relative budget tolerance */
	double size_deg;     /* stimulus size for the up-scaling check */
	double zmax;
	int near_bits;
	int norm_linf;       /* compare levels with L∞ instead of L2 */
	const struct rig *rig;  /* NULL: no up-scaling check */
	long max_side;       /* image size limit (0: image.h's default) */
};
/* The defaults above, no rig, units 1, L2. */
void stimaudit_defaults(struct stimaudit_opts *o);

/* What the audit keeps per row: no pixels. */
struct stimaudit_row {
	int ok;                 /* decoded */
	struct image_info info;
	double lum, rms, zlum, zrms;
	int translucent;
	char sha[65];
	uint64_t phash;
	int src_state;          /* 0 no source, 1 measured, 2 missing or unreadable, 3 size mismatch */
	double l2, linf;        /* [0, 1] units, when measured */
	unsigned flags;         /* bit per stimaudit_kind */
};

struct stimaudit_flag {
	size_t row;
	enum stimaudit_kind kind;
	char *msg;              /* one sentence about this row's image */
	char *key;              /* what must be equal for two flags of a kind to share a group */
	double value;           /* the number a group gives as a range (factor, z, bits, miss) */
};

/* Flags of one kind and key: MEMBERS index the flags, first row first. */
struct stimaudit_group {
	enum stimaudit_kind kind;
	size_t *members, n;
	double min, max;        /* range of the members' values */
	char *summary;          /* the member's message when n = 1, else a sentence for them all */
};

struct stimaudit_category {
	const char *name;       /* borrowed from the list */
	size_t n, nok;
	double ml, sl, mc, sc;  /* mean and sample SD of luminance and contrast; NaN when undefined */
};

struct stimaudit_pair {
	size_t a, b;            /* rows, a before b */
	int bits;               /* -1 for exact duplicates */
};

struct stimaudit {
	const struct stimlist *l;
	struct stimaudit_opts o;
	int stim_px;            /* the stimulus size in px on the rig; 0 without a rig */
	double stim_deg_actual;
	int usual_w, usual_h;
	struct stimaudit_row *rows;           /* l->n */
	struct stimaudit_flag *flags;         /* sorted by row, then kind */
	size_t nflags;
	struct stimaudit_group *groups;       /* in order of their first row, then kind */
	size_t ngroups;
	struct stimaudit_category *cats;      /* in order of first appearance */
	size_t ncats;
	struct stimaudit_pair *pairs;
	size_t npairs;
};

/* Audits every row of L with options O into A (cleared first). Never fails: what cannot be read
 * is flagged. */
void stimaudit_run(const struct stimlist *l, const struct stimaudit_opts *o, struct stimaudit *a);
void stimaudit_clear(struct stimaudit *a);
/* "unreadable", "size", "upscaled", ... (the words the audit prints). */
const char *stimaudit_kind_name(enum stimaudit_kind k);

#endif
