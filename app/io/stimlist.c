/* stimlist — the stimulus list: CSV (RFC 4180) parsed with libcsv into struct stimlist.
 *
 * libcsv does not count lines, so the file is fed to it one physical line at a time: a row that
 * ends while line L is being fed ends on L, and it began on the first non-blank line fed after the
 * previous row ended (a quoted field may span lines). Fields of the current row collect in a
 * growable array; the first row is the header. Every problem is a FILE:LINE diagnostic and
 * parsing goes on (except after broken quoting, which libcsv cannot resume from). Spaces around
 * an unquoted cell are part of it (RFC 4180 section 2: "Spaces are considered part of a field"),
 * so libcsv's trimming is off; a NUL byte is refused, since the cell would end there in C. Called
 * by `check`, the run layer and the stimulus-set tools. */
#include "stimlist_file.h"

#include <ctype.h>
#include <csv.h>
#include <errno.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "decimal.h"
#include "infile.h"
#include "inifile.h"
#include "protocol.h"
#include "sha256.h"
#include "suggest.h"

#define MAX_COLUMNS 256

struct row {
	char **f;
	size_t n, cap;
	int line;
};

struct lctx {
	const char *file;
	const char *dir;
	const struct protocol *p;
	struct stimlist *l;
	struct diag_list *d;
	struct row row;
	int too_many;          /* the current row has more than MAX_COLUMNS fields */
	int line;              /* physical line being fed */
	int row_line;          /* line where the current row began */
	int row_ended;         /* a row ended during the current line */
	int have_header;
	int col_image, col_category, col_level, col_source;
	int *label_col;        /* column of each label */
	size_t ncols;
};

static void on_field(void *field, size_t len, void *data)
{
	struct lctx *c = data;
	if (c->row.n == MAX_COLUMNS) {
		c->too_many = 1;
		return;
	}
	if (c->row.n == c->row.cap) {
		c->row.cap = c->row.cap ? 2 * c->row.cap : 8;
		c->row.f = xrealloc(c->row.f, c->row.cap * sizeof *c->row.f);
	}
	char *s = xmalloc(len + 1);
	if (len)
		memcpy(s, field, len);
	s[len] = '\0';
	c->row.f[c->row.n++] = s;
}

/* libcsv's space test: nothing is a space, so no cell is trimmed. */
static int no_space(unsigned char ch)
{
	(void)ch;
	return 0;
}

static void row_reset(struct lctx *c)
{
	for (size_t i = 0; i < c->row.n; i++)
		free(c->row.f[i]);
	c->row.n = 0;
	c->too_many = 0;
}

static void header(struct lctx *c)
{
	struct stimlist *l = c->l;
	int line = c->row_line;
	c->col_image = c->col_category = c->col_level = c->col_source = -1;
	c->ncols = c->row.n;
	c->label_col = xcalloc(c->row.n, sizeof *c->label_col);
	for (size_t i = 0; i < c->row.n; i++) {
		const char *name = c->row.f[i];
		if (!*name) {
			diag_add(c->d, DIAG_ERROR, c->file, line, "column %zu has no name", i + 1);
			continue;
		}
		int twice = 0;
		for (size_t j = 0; j < i && !twice; j++)
			if (!strcmp(c->row.f[j], name)) {
				diag_add(c->d, DIAG_ERROR, c->file, line,
					 "column '%s' appears twice (columns %zu and %zu)", name, j + 1,
					 i + 1);
				twice = 1;
			}
		if (twice)
			continue;   /* the first one counts; the rest of the rows stay readable */
		if (!strcmp(name, "image")) c->col_image = (int)i;
		else if (!strcmp(name, "category")) c->col_category = (int)i;
		else if (!strcmp(name, "level")) c->col_level = (int)i;
		else if (!strcmp(name, "source")) c->col_source = (int)i;
		else {
			c->label_col[l->nlabels] = (int)i;
			l->label_names = xrealloc(l->label_names,
						  (l->nlabels + 1) * sizeof *l->label_names);
			l->label_names[l->nlabels++] = xstrdup(name);
		}
	}
	static const char *const required[] = {"image", "category"};
	int cols[2] = {c->col_image, c->col_category};
	for (int k = 0; k < 2; k++) {
		if (cols[k] >= 0)
			continue;
		static const char *const known[] = {"image", "category", "level", "source"};
		const char *near = NULL;
		for (size_t i = 0; i < c->row.n && !near; i++) {
			const char *s = suggest_nearest(c->row.f[i], known, 4);
			if (s && !strcmp(s, required[k]))
				near = c->row.f[i];
		}
		if (near)
			diag_add(c->d, DIAG_ERROR, c->file, line, "missing column '%s' (is '%s' meant to "
				 "be '%s'?)", required[k], near, required[k]);
		else
			diag_add(c->d, DIAG_ERROR, c->file, line, "missing column '%s'", required[k]);
	}
	l->has_level_column = c->col_level >= 0;
	l->has_source_column = c->col_source >= 0;
	c->have_header = 1;
}

static char *resolve(const char *dir, const char *rel)
{
	if (rel[0] == '/' || !strcmp(dir, "."))
		return xstrdup(rel);
	return xasprintf("%s/%s", dir, rel);
}

static void data_row(struct lctx *c)
{
	int line = c->row_line;
	if (c->row.n != c->ncols) {
		diag_add(c->d, DIAG_ERROR, c->file, line, "row has %zu field%s; the header has %zu",
			 c->row.n, c->row.n == 1 ? "" : "s", c->ncols);
		return;
	}
	if (c->col_image < 0 || c->col_category < 0)
		return;
	int bad = 0;
	const char *image = c->row.f[c->col_image];
	const char *category = c->row.f[c->col_category];
	if (!*image) {
		diag_add(c->d, DIAG_ERROR, c->file, line, "empty cell in column 'image'");
		bad = 1;
	}
	int choice = -1;
	if (!*category) {
		diag_add(c->d, DIAG_ERROR, c->file, line, "empty cell in column 'category'");
		bad = 1;
	} else if (c->p) {
		choice = protocol_choice_index(c->p, category);
		if (choice < 0) {
			const char *names[PROTOCOL_MAX_CHOICES];
			char list[512] = "";
			for (size_t i = 0; i < c->p->nchoices; i++) {
				names[i] = c->p->choices[i].category;
				size_t n = strlen(list);
				snprintf(list + n, sizeof list - n, "%s%s", i ? ", " : "", names[i]);
			}
			const char *near = suggest_nearest(category, names, c->p->nchoices);
			if (near)
				diag_add(c->d, DIAG_ERROR, c->file, line, "category '%s' is not one of the "
					 "protocol's categories (%s); did you mean '%s'?", category, list, near);
			else
				diag_add(c->d, DIAG_ERROR, c->file, line, "category '%s' is not one of the "
					 "protocol's categories (%s)", category, list);
			bad = 1;
		}
	}
	double level = 0;
	if (c->col_level >= 0) {
		const char *lv = c->row.f[c->col_level];
		char *end;
		errno = 0;
		if (!*lv) {
			diag_add(c->d, DIAG_ERROR, c->file, line, "empty cell in column 'level'");
			bad = 1;
		} else {
			level = strtod(lv, &end);
			if (!decimal_ok(lv) || *end || errno == ERANGE || !isfinite(level)) {
				diag_add(c->d, DIAG_ERROR, c->file, line, "level '%s' is not a number", lv);
				bad = 1;
			}
		}
	}
	for (size_t i = 0; i < c->l->nlabels; i++)
		if (!*c->row.f[c->label_col[i]])
			diag_add(c->d, DIAG_WARNING, c->file, line, "empty cell in column '%s'",
				 c->l->label_names[i]);
	if (bad)
		return;
	struct stimlist *l = c->l;
	l->items = xrealloc(l->items, (l->n + 1) * sizeof *l->items);
	struct stim *s = &l->items[l->n++];
	memset(s, 0, sizeof *s);
	s->image = xstrdup(image);
	s->path = resolve(c->dir, image);
	s->category = xstrdup(category);
	s->choice = choice;
	s->has_level = c->col_level >= 0;
	s->level = level;
	if (c->col_source >= 0 && *c->row.f[c->col_source]) {
		s->source = xstrdup(c->row.f[c->col_source]);
		s->source_path = resolve(c->dir, s->source);
	}
	s->labels = xcalloc(l->nlabels ? l->nlabels : 1, sizeof *s->labels);
	for (size_t i = 0; i < l->nlabels; i++)
		s->labels[i] = xstrdup(c->row.f[c->label_col[i]]);
	s->line = line;
}

static void on_row(int term, void *data)
{
	(void)term;
	struct lctx *c = data;
	c->row_ended = 1;
	if (c->too_many)
		diag_add(c->d, DIAG_ERROR, c->file, c->row_line, "row has more than %d fields",
			 MAX_COLUMNS);
	else if (!c->have_header)
		header(c);
	else
		data_row(c);
	row_reset(c);
}

/* 64-bit FNV-1a over a row's fields (with separators), for finding repeated rows. */
static uint64_t row_hash(const struct stimlist *l, const struct stim *s)
{
	uint64_t h = 1469598103934665603ULL;
	char buf[64];
	const char *parts[4] = {s->image, s->category,
				s->has_level ? (snprintf(buf, sizeof buf, "%.17g", s->level), buf) : "",
				s->source ? s->source : ""};
	for (size_t k = 0; k < 4 + l->nlabels; k++) {
		const char *p = k < 4 ? parts[k] : s->labels[k - 4];
		for (; *p; p++)
			h = (h ^ (unsigned char)*p) * 1099511628211ULL;
		h = (h ^ 0x1f) * 1099511628211ULL;
	}
	return h;
}

static int rows_equal(const struct stimlist *l, const struct stim *a, const struct stim *b)
{
	if (strcmp(a->image, b->image) || strcmp(a->category, b->category) ||
	    a->level != b->level || strcmp(a->source ? a->source : "", b->source ? b->source : ""))
		return 0;
	for (size_t i = 0; i < l->nlabels; i++)
		if (strcmp(a->labels[i], b->labels[i]))
			return 0;
	return 1;
}

struct keyed { uint64_t h; size_t i; };

static int cmp_keyed(const void *a, const void *b)
{
	const struct keyed *x = a, *y = b;
	if (x->h != y->h)
		return x->h < y->h ? -1 : 1;
	return x->i < y->i ? -1 : x->i > y->i;
}

static void find_duplicates(const char *file, struct stimlist *l, struct diag_list *d)
{
	if (l->n < 2)
		return;
	struct keyed *k = xmalloc(l->n * sizeof *k);
	for (size_t i = 0; i < l->n; i++) {
		k[i].h = row_hash(l, &l->items[i]);
		k[i].i = i;
	}
	qsort(k, l->n, sizeof *k, cmp_keyed);
	char *dup = xcalloc(l->n, 1);
	for (size_t a = 0; a < l->n; a++) {
		for (size_t b = a + 1; b < l->n && k[b].h == k[a].h; b++) {
			if (dup[k[b].i] || !rows_equal(l, &l->items[k[a].i], &l->items[k[b].i]))
				continue;
			dup[k[b].i] = 1;
			diag_add(d, DIAG_ERROR, file, l->items[k[b].i].line,
				 "duplicate row (same as line %d)", l->items[k[a].i].line);
		}
	}
	free(dup);
	free(k);
}

int stimlist_parse(const char *path, const char *data, size_t len, const struct protocol *p,
		   struct stimlist *l, struct diag_list *d)
{
	memset(l, 0, sizeof *l);
	l->path = xstrdup(path);
	sha256_hex(data, len, l->sha256);
	size_t errors0 = diag_count(d, DIAG_ERROR);
	const char *slash = strrchr(path, '/');
	char *dir = slash ? xasprintf("%.*s", (int)(slash - path), path) : xstrdup(".");
	if (slash == path)
		strcpy(dir, "/");
	struct lctx c = {.file = path, .dir = dir, .p = p, .l = l, .d = d};
	struct csv_parser parser;
	csv_init(&parser, CSV_STRICT | CSV_STRICT_FINI);
	csv_set_space_func(&parser, no_space);
	size_t pos = 0;
	int pending = 0, broken = 0;
	if (len >= 3 && !memcmp(data, "\xef\xbb\xbf", 3))
		pos = 3;   /* a UTF-8 byte order mark before the header */
	while (pos < len) {
		const char *nl = memchr(data + pos, '\n', len - pos);
		size_t n = nl ? (size_t)(nl - (data + pos)) + 1 : len - pos;
		const char *s = data + pos;
		c.line++;
		const char *nul = memchr(s, '\0', n);
		if (nul)
			diag_add(d, DIAG_ERROR, path, c.line, "a NUL byte (character %zu of the line); "
				 "a cell cannot hold one", (size_t)(nul - s) + 1);
		else if (!inifile_utf8_valid(s, n))
			diag_add(d, DIAG_ERROR, path, c.line, "line is not valid UTF-8 text");
		int blank = 1;
		for (size_t i = 0; i < n && blank; i++)
			blank = s[i] == '\n' || s[i] == '\r';
		if (!pending && !blank)
			c.row_line = c.line;
		c.row_ended = 0;
		if (csv_parse(&parser, s, n, on_field, on_row, &c) != n) {
			diag_add(d, DIAG_ERROR, path, c.line, "broken quoting: a quote inside an unquoted "
				 "field or text after a closing quote (RFC 4180: quote the whole field and "
				 "double the quotes inside it)");
			broken = 1;
			break;
		}
		if (c.row_ended)
			pending = 0;
		else if (!blank)
			pending = 1;
		pos += n;
	}
	if (!broken && csv_fini(&parser, on_field, on_row, &c) != 0)
		diag_add(d, DIAG_ERROR, path, c.row_line, "a quoted field is never closed");
	csv_free(&parser);
	row_reset(&c);
	free(c.row.f);
	free(c.label_col);
	free(dir);
	if (!c.have_header)
		diag_add(d, DIAG_ERROR, path, 0, "the list is empty (it needs a header row naming at "
			 "least the columns image and category)");
	else if (!l->n && diag_count(d, DIAG_ERROR) == errors0)
		diag_add(d, DIAG_ERROR, path, 0, "the list has a header but no rows");
	find_duplicates(path, l, d);
	return diag_count(d, DIAG_ERROR) > errors0 ? -1 : 0;
}

int stimlist_load(const char *path, const struct protocol *p, struct stimlist *l,
		  struct diag_list *d)
{
	char why[160];
	size_t n = 0;
	char *buf = infile_read(path, INFILE_MAX_LIST, &n, why, sizeof why);
	if (!buf) {
		memset(l, 0, sizeof *l);
		diag_add(d, DIAG_ERROR, path, 0, "cannot read the stimulus list: %s", why);
		return -1;
	}
	int rc = stimlist_parse(path, buf, n, p, l, d);
	free(buf);
	return rc;
}

void stimlist_clear(struct stimlist *l)
{
	if (!l)
		return;
	for (size_t i = 0; i < l->n; i++) {
		struct stim *s = &l->items[i];
		free(s->image);
		free(s->path);
		free(s->category);
		free(s->source);
		free(s->source_path);
		for (size_t k = 0; k < l->nlabels; k++)
			free(s->labels[k]);
		free(s->labels);
	}
	free(l->items);
	for (size_t k = 0; k < l->nlabels; k++)
		free(l->label_names[k]);
	free(l->label_names);
	free(l->path);
	memset(l, 0, sizeof *l);
}
