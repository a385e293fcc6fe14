/* csvout — writing CSV rows (RFC 4180: every field quoted, quotes doubled, CRLF line ends) through
 * libcsv's writer. Used by the stimulus-set tools for the lists they write. */
#ifndef TACHIST_CSVOUT_H
#define TACHIST_CSVOUT_H

#include <stddef.h>
#include <stdio.h>

/* Writes the N CELLS (NULL is written as an empty field) and a line end. Returns 0 or -1. */
int csvout_row(FILE *f, const char *const *cells, size_t n);

#endif
