/* diag — a list of problems found in the user's files, each tied to FILE:LINE.
 *
 * Parsers and checks never print: they append diagnostics here so that one pass reports every
 * problem, and the command layer words them for people (diag_format). A line of 0 means "the file
 * as a whole". Messages are owned by the list. */
#ifndef TACHIST_DIAG_H
#define TACHIST_DIAG_H

#include <stddef.h>
#include <stdio.h>

enum diag_level { DIAG_ERROR, DIAG_WARNING, DIAG_NOTE };

struct diag {
	enum diag_level level;
	char *file;     /* as the user named it; may be NULL */
	int line;       /* 1-based; 0 = whole file */
	char *msg;
};

struct diag_list {
	struct diag *v;
	size_t n, cap;
};

void diag_init(struct diag_list *d);
void diag_clear(struct diag_list *d);
/* Appends one diagnostic (printf-style). Aborts on out-of-memory, like every allocation here. */
void diag_add(struct diag_list *d, enum diag_level level, const char *file, int line,
	      const char *fmt, ...) __attribute__((format(printf, 5, 6)));
size_t diag_count(const struct diag_list *d, enum diag_level level);
/* Orders the diagnostics by file (in the order files were first mentioned), then by line (whole-
 * file messages first), keeping the order of discovery otherwise: how people read them. */
void diag_sort(struct diag_list *d);
/* "FILE:LINE: error: message" (LINE left out when 0, FILE when NULL). */
void diag_format(const struct diag *g, char *buf, size_t len);

/* Allocation helpers used across the program: abort with a message on out-of-memory. */
void *xmalloc(size_t n);
void *xcalloc(size_t n, size_t size);
void *xrealloc(void *p, size_t n);
char *xstrdup(const char *s);
char *xasprintf(const char *fmt, ...) __attribute__((format(printf, 1, 2)));

#endif
