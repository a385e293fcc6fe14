/* stimlist — the stimulus list: a CSV file (RFC 4180, parsed with libcsv) with one image per row.
 *
 * Required columns `image` and `category`; optional `level` (a number) and `source` (the clean image
 * a perturbed one was made from); every further column is a label carried into exported tables.
 * Image paths are relative to the list file and stored resolved. */
#ifndef TACHIST_STIMLIST_H
#define TACHIST_STIMLIST_H

#include <stdbool.h>
#include <stddef.h>

#include "diag.h"

struct protocol;

struct stim {
	char *image;        /* as written in the list */
	char *path;         /* resolved */
	char *category;
	int choice;         /* index among the protocol's categories, -1 when loaded without one */
	bool has_level;
	double level;
	char *source;       /* as written, NULL when absent or empty */
	char *source_path;  /* resolved, NULL when absent */
	char **labels;      /* one per stimlist.label_names; "" when empty */
	int line;           /* line in the list file where the row starts */
};

struct stimlist {
	char *path;
	char **label_names; /* extra columns in file order */
	size_t nlabels;
	struct stim *items;
	size_t n;
	char sha256[65];    /* hex digest of the file's bytes */
	bool has_level_column, has_source_column;
};

/* Loads PATH. With a protocol P, categories are checked against its choices. Every problem goes to
 * D as FILE:LINE. Returns 0 when usable, -1 on any error. */
int stimlist_load(const char *path, const struct protocol *p, struct stimlist *l,
		  struct diag_list *d);
int stimlist_parse(const char *path, const char *data, size_t len, const struct protocol *p,
		   struct stimlist *l, struct diag_list *d);
void stimlist_clear(struct stimlist *l);
/* The value of COLUMN for item S ("image", "category", "level", "source" or a label), or NULL when
 * the list has no such column. */
const char *stimlist_value(const struct stimlist *l, const struct stim *s, const char *column,
			   char *buf, size_t len);

#endif
