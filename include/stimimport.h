/* stimimport — a stimulus list from a folder tree: one subfolder per category (images may sit
 * deeper; the top subfolder names the category), every file decoded to refuse what cannot be
 * shown, optionally a level and a clean source read from each file name (namepat.h), optionally
 * label columns joined from a side file keyed by image.
 *
 * The result owns every string. Nothing is printed: skipped files and problems become notes.
 * Used by app/cmd/cmd_stimuli.c; the starting protocol is io/stimproto.c. */
#ifndef TACHIST_STIMIMPORT_H
#define TACHIST_STIMIMPORT_H

#include <stddef.h>

#include "namepat.h"

#define STIMIMPORT_LABELS "labels.csv"   /* the side file looked for in the folder */

struct stimimport_opts {
	const char *dir;
	const char *out;                /* the list to be written (left out if it lies in DIR) */
	const struct namepat *pattern;  /* NULL: no levels or sources from names */
	const char *labels;             /* side file; NULL: DIR/labels.csv when it exists */
	long max_side;                  /* image size limit (0: image.h's default) */
};

struct stimimport_image {
	char *path;        /* as reached from DIR ("DIR/cat/x.png") */
	char *rel;         /* relative to DIR ("cat/x.png"): the key of the labels file */
	char *category;
	char *stem;
	char *folder;
	int matched;       /* the name matched the pattern */
	double level;
	char *src_stem;    /* from {source}, NULL when none */
	int src;           /* index of the source among the images, -1 when none */
	char **labels;     /* one per label column ("" when the labels file has no row) */
};

struct stimimport {
	struct stimimport_image *v;   /* sorted by path */
	size_t n;
	char **notes;                 /* one sentence each, naming its file */
	size_t nnotes;
	size_t nproblems;             /* notes about files meant as stimuli or labels */
	size_t unmatched;             /* names the pattern did not match */
	int have_pattern;
	char *labels_path;            /* the labels file used, NULL when none */
	char **label_names;
	size_t nlabels;
	char **categories;            /* distinct, sorted */
	size_t *category_counts;
	size_t ncategories;
};

/* Walks O->dir into S (cleared first). Returns 0, or -1 with ERR when DIR is not a folder or the
 * labels file cannot be used (then nothing is imported). */
int stimimport_scan(const struct stimimport_opts *o, struct stimimport *s, char *err,
		    size_t errlen);
/* Writes the list to PATH: image (relative to the list's folder), category, then level and source
 * with a pattern, then the label columns. Returns 0 or -1 with ERR. */
int stimimport_write_list(const struct stimimport *s, const char *path, char *err, size_t errlen);
/* Writes a starting protocol (stimproto.h) to PATH for the list written at LIST: its categories
 * on keys from KEYS (comma-separated; NULL: the default row), and a practice block showing the
 * first clean image of each category. Returns 0 or -1 with ERR. */
int stimimport_write_protocol(const struct stimimport *s, const char *list, const char *path,
			      const char *keys, char *err, size_t errlen);
void stimimport_clear(struct stimimport *s);

#endif
