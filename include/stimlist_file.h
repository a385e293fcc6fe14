/* stimlist_file — reading a stimulus list (a CSV file, RFC 4180, parsed with libcsv) into a
 * struct stimlist (stimlist.h), and freeing it. Implemented by app/io/stimlist.c. An io header:
 * core uses stimlist.h only. */
#ifndef TACHIST_STIMLIST_FILE_H
#define TACHIST_STIMLIST_FILE_H

#include <stddef.h>

#include "diag.h"
#include "stimlist.h"

struct protocol;

/* Loads PATH. With a protocol P, categories are checked against its choices. Every problem goes to
 * D as FILE:LINE. Returns 0 when usable, -1 on any error. */
int stimlist_load(const char *path, const struct protocol *p, struct stimlist *l,
		  struct diag_list *d);
int stimlist_parse(const char *path, const char *data, size_t len, const struct protocol *p,
		   struct stimlist *l, struct diag_list *d);
void stimlist_clear(struct stimlist *l);

#endif
