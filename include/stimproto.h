/* stimproto — a starting protocol for an imported stimulus list: the categories found, each on a
 * key from a row of keys, a practice block and a main block, and a comment above every key saying
 * what to edit. Written so that `tachist check` accepts it unchanged.
 *
 * Used by app/cmd/cmd_stimuli.c (`stimuli import --protocol`). */
#ifndef TACHIST_STIMPROTO_H
#define TACHIST_STIMPROTO_H

#include <stddef.h>

/* The default row, in the order keys are handed out: index fingers first, then outwards. */
#define STIMPROTO_KEYS "f,j,d,k,s,l,a,g,h"

struct stimproto_input {
	const char *path;               /* the protocol to write */
	const char *list;               /* the list it names (exists; made relative to PATH) */
	char *const *categories;        /* sorted */
	const size_t *counts;           /* images per category */
	size_t ncategories;
	int have_level;                 /* the list has a level column (level 0 = clean) */
	char *const *practice;          /* one image per category as written in the list, or NULL */
	const char *keys;               /* comma-separated key names; NULL: STIMPROTO_KEYS */
};

/* Writes the protocol. Returns 0, or -1 with a sentence in ERR (more categories than keys, a
 * category name a protocol cannot hold, a key named twice, the file exists already or cannot be
 * written). */
int stimproto_write(const struct stimproto_input *in, char *err, size_t errlen);

#endif
