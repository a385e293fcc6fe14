/* diag — collected diagnostics and the allocation wrappers every module uses.
 *
 * A diag_list is a growable array of {level, file, line, message}; it owns its strings. The
 * x-allocators abort on failure so callers never carry half-built state for out-of-memory. */
#include "diag.h"

#include <stdarg.h>
#include <stdlib.h>
#include <string.h>

void *xmalloc(size_t n)
{
	void *p = malloc(n ? n : 1);
	if (!p) {
		fputs("tachist: out of memory\n", stderr);
		abort();
	}
	return p;
}

void *xcalloc(size_t n, size_t size)
{
	void *p = calloc(n ? n : 1, size ? size : 1);
	if (!p) {
		fputs("tachist: out of memory\n", stderr);
		abort();
	}
	return p;
}

void *xrealloc(void *p, size_t n)
{
	void *q = realloc(p, n ? n : 1);
	if (!q) {
		fputs("tachist: out of memory\n", stderr);
		abort();
	}
	return q;
}

char *xstrdup(const char *s)
{
	size_t n = strlen(s) + 1;
	char *p = xmalloc(n);
	memcpy(p, s, n);
	return p;
}

static char *xvasprintf(const char *fmt, va_list ap)
{
	va_list aq;
	va_copy(aq, ap);
	int n = vsnprintf(NULL, 0, fmt, aq);
	va_end(aq);
	if (n < 0)
		n = 0;
	char *s = xmalloc((size_t)n + 1);
	vsnprintf(s, (size_t)n + 1, fmt, ap);
	return s;
}

char *xasprintf(const char *fmt, ...)
{
	va_list ap;
	va_start(ap, fmt);
	char *s = xvasprintf(fmt, ap);
	va_end(ap);
	return s;
}

void diag_init(struct diag_list *d)
{
	memset(d, 0, sizeof *d);
}

void diag_clear(struct diag_list *d)
{
	if (!d)
		return;
	for (size_t i = 0; i < d->n; i++) {
		free(d->v[i].file);
		free(d->v[i].msg);
	}
	free(d->v);
	memset(d, 0, sizeof *d);
}

void diag_add(struct diag_list *d, enum diag_level level, const char *file, int line,
	      const char *fmt, ...)
{
	if (d->n == d->cap) {
		d->cap = d->cap ? d->cap * 2 : 8;
		d->v = xrealloc(d->v, d->cap * sizeof *d->v);
	}
	va_list ap;
	va_start(ap, fmt);
	struct diag *g = &d->v[d->n++];
	g->level = level;
	g->file = file ? xstrdup(file) : NULL;
	g->line = line;
	g->msg = xvasprintf(fmt, ap);
	va_end(ap);
}

size_t diag_count(const struct diag_list *d, enum diag_level level)
{
	size_t k = 0;
	for (size_t i = 0; i < d->n; i++)
		k += d->v[i].level == level;
	return k;
}

static const char *level_word(enum diag_level l)
{
	switch (l) {
	case DIAG_ERROR: return "error";
	case DIAG_WARNING: return "warning";
	default: return "note";
	}
}

void diag_format(const struct diag *g, char *buf, size_t len)
{
	if (g->file && g->line > 0)
		snprintf(buf, len, "%s:%d: %s: %s", g->file, g->line, level_word(g->level), g->msg);
	else if (g->file)
		snprintf(buf, len, "%s: %s: %s", g->file, level_word(g->level), g->msg);
	else
		snprintf(buf, len, "%s: %s", level_word(g->level), g->msg);
}

struct ranked {
	struct diag g;
	size_t rank, index;
};

static int cmp_ranked(const void *a, const void *b)
{
	const struct ranked *x = a, *y = b;
	if (x->rank != y->rank)
		return x->rank < y->rank ? -1 : 1;
	if (x->g.line != y->g.line)
		return x->g.line < y->g.line ? -1 : 1;
	return x->index < y->index ? -1 : x->index > y->index;
}

void diag_sort(struct diag_list *d)
{
	if (d->n < 2)
		return;
	struct ranked *v = xmalloc(d->n * sizeof *v);
	for (size_t i = 0; i < d->n; i++) {
		v[i].g = d->v[i];
		v[i].index = i;
		v[i].rank = i;
		for (size_t k = 0; k < i; k++)
			if ((!d->v[k].file && !d->v[i].file) ||
			    (d->v[k].file && d->v[i].file && !strcmp(d->v[k].file, d->v[i].file))) {
				v[i].rank = v[k].rank;
				break;
			}
	}
	qsort(v, d->n, sizeof *v, cmp_ranked);
	for (size_t i = 0; i < d->n; i++)
		d->v[i] = v[i].g;
	free(v);
}
