/* adapt_history — staircase thresholds from the trials a database holds, for `report`.
 *
 * For every session selected, the protocol text stored with the session is parsed again to find
 * each adaptive block's [adaptive] section; the block's stored trials (first run, in the order
 * shown) are replayed through fresh staircases (adapt_history_estimates) and each staircase's
 * estimate becomes one row. Nothing here needs the stimulus list or the images. */
#ifndef TACHIST_ADAPT_HISTORY_H
#define TACHIST_ADAPT_HISTORY_H

#include <stddef.h>

#include "adapt.h"

struct store;

struct adapt_history_row {
	char session[37];
	char *subject;
	int block;                /* plan block index */
	char *block_name;
	char *section;            /* name of the [adaptive] section */
	enum adapt_rule rule;
	int staircase;
	char *category;           /* category of a per-category staircase, NULL when open */
	double start;             /* start level (up-down) or prior mean (QUEST) */
	struct adapt_estimate est;
};

struct adapt_history {
	struct adapt_history_row *rows;
	size_t n;
};

/* Fills H for the sessions SESSION (id or unique prefix) or SUBJECT select (both NULL: all).
 * Sessions without adaptive blocks add nothing. Returns 0, or -1 with a malloc'd sentence in
 * *ERR. */
int adapt_history_load(struct store *s, const char *session, const char *subject,
		       struct adapt_history *h, char **err);
void adapt_history_clear(struct adapt_history *h);

#endif
