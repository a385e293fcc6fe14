/* stimlist_lookup — the pure lookups of stimlist.h on a list already in memory (a row's value by
 * column name), for core (plan.c's filters) and every layer above it. Reading the list file is
 * app/io/stimlist.c. */
#include "stimlist.h"

#include <stdio.h>
#include <string.h>

const char *stimlist_value(const struct stimlist *l, const struct stim *s, const char *column,
			   char *buf, size_t len)
{
	if (!strcmp(column, "image"))
		return s->image;
	if (!strcmp(column, "category"))
		return s->category;
	if (!strcmp(column, "level")) {
		if (!l->has_level_column)
			return NULL;
		snprintf(buf, len, "%.17g", s->level);
		return buf;
	}
	if (!strcmp(column, "source"))
		return l->has_source_column ? (s->source ? s->source : "") : NULL;
	for (size_t i = 0; i < l->nlabels; i++)
		if (!strcmp(l->label_names[i], column))
			return s->labels[i];
	return NULL;
}
