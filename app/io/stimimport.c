/* stimimport — building a stimulus list from a folder tree (see stimimport.h).
 *
 * collect() walks one category folder recursively (bounded depth, which also stops link loops)
 * and probes every file with the image loader; match_names() applies the file-name pattern and
 * looks each {source} up among the images of the same category, same folder first; the labels
 * file is read with libcsv one physical line at a time so that each row knows its line. */
#include "stimimport.h"

#include <errno.h>
#include <limits.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <csv.h>

#include "csvout.h"
#include "diag.h"
#include "fspath.h"
#include "image.h"
#include "stimproto.h"

#define MAX_DEPTH 32

/* Records MSG; PROBLEM says whether it makes the import fail. */
static void note(struct stimimport *s, char *msg, int problem)
{
	s->nproblems += problem != 0;
	s->notes = xrealloc(s->notes, (s->nnotes + 1) * sizeof *s->notes);
	s->notes[s->nnotes++] = msg;
}

struct walk {
	struct stimimport *s;
	const char *dir;
	const char *skip;   /* resolved path of the list being written, or NULL */
	const char *skip2;  /* resolved path of the labels file, or NULL */
	long max_side;
};

static int skipped(const struct walk *w, const char *path)
{
	char real[PATH_MAX];
	if (!realpath(path, real))
		return 0;
	return (w->skip && !strcmp(real, w->skip)) || (w->skip2 && !strcmp(real, w->skip2));
}

static void add_image(struct walk *w, char *path, const char *category)
{
	struct stimimport *s = w->s;
	s->v = xrealloc(s->v, (s->n + 1) * sizeof *s->v);
	struct stimimport_image *f = &s->v[s->n++];
	memset(f, 0, sizeof *f);
	f->path = path;
	size_t dl = strlen(w->dir);
	f->rel = xstrdup(path + dl + (path[dl] == '/'));
	f->category = xstrdup(category);
	f->stem = fspath_stem(path);
	f->folder = fspath_dir(path);
	f->src = -1;
}

/* Collects the images below FOLDER for CATEGORY, at most DEPTH folders down. */
static void collect(struct walk *w, const char *folder, const char *category, int depth)
{
	if (depth <= 0) {
		note(w->s, xasprintf("%s: skipped: folders nested too deep (a link loop?)", folder), 1);
		return;
	}
	size_t n;
	char **names = fspath_list(folder, &n);
	if (!names) {
		note(w->s, xasprintf("%s: cannot read the folder: %s", folder, strerror(errno)), 1);
		return;
	}
	for (size_t i = 0; i < n; i++) {
		if (names[i][0] == '.')
			continue;   /* hidden files and folders are not stimuli */
		char *p = xasprintf("%s/%s", folder, names[i]);
		if (fspath_is_dir(p)) {
			collect(w, p, category, depth - 1);
			free(p);
			continue;
		}
		struct image_info info;
		char err[1024];
		if (skipped(w, p)) {
			free(p);
		} else if (image_probe_max(p, w->max_side, &info, err, sizeof err)) {
			note(w->s, xasprintf("%s: skipped: %s", p, err), 1);
			free(p);
		} else {
			add_image(w, p, category);
		}
	}
	fspath_free_names(names, n);
}

/* The index of the image with stem STEM in CATEGORY, preferring folder FOLDER; -1 when none. */
static int find_source(const struct stimimport *s, const char *category, const char *folder,
		       const char *stem)
{
	int any = -1;
	for (size_t i = 0; i < s->n; i++) {
		const struct stimimport_image *f = &s->v[i];
		if (strcmp(f->category, category) || strcmp(f->stem, stem))
			continue;
		if (!strcmp(f->folder, folder))
			return (int)i;
		if (any < 0)
			any = (int)i;
	}
	return any;
}

static void match_names(struct stimimport *s, const struct namepat *pt)
{
	for (size_t i = 0; i < s->n; i++) {
		struct stimimport_image *f = &s->v[i];
		struct namepat_match m;
		if (!namepat_match(pt, f->stem, &m)) {
			s->unmatched++;
			continue;
		}
		f->matched = 1;
		f->level = m.level;
		if (!m.source)
			continue;
		f->src_stem = xmalloc(m.source_len + 1);
		memcpy(f->src_stem, m.source, m.source_len);
		f->src_stem[m.source_len] = '\0';
		f->src = find_source(s, f->category, f->folder, f->src_stem);
		if (f->src < 0 || f->src == (int)i) {
			f->src = -1;
			note(s, xasprintf("%s: no clean source named '%s' in category '%s'; listed "
					  "without a source", f->path, f->src_stem, f->category), 1);
		}
	}
}

/* ---- the labels file -------------------------------------------------------------------- */

struct csvrow {
	char **cells;
	size_t n;
	int line;
};

struct csvread {
	struct csvrow *rows;
	size_t nrows;
	struct csvrow cur;
	int line;
};

static void on_field(void *data, size_t len, void *user)
{
	struct csvread *r = user;
	if (!r->cur.n)
		r->cur.line = r->line;
	if (!r->nrows && !r->cur.n && len >= 3 && !memcmp(data, "\xEF\xBB\xBF", 3)) {
		data = (char *)data + 3;   /* a UTF-8 byte order mark */
		len -= 3;
	}
	r->cur.cells = xrealloc(r->cur.cells, (r->cur.n + 1) * sizeof *r->cur.cells);
	char *c = xmalloc(len + 1);
	memcpy(c, data, len);
	c[len] = '\0';
	r->cur.cells[r->cur.n++] = c;
}

static void on_row(int term, void *user)
{
	(void)term;
	struct csvread *r = user;
	r->rows = xrealloc(r->rows, (r->nrows + 1) * sizeof *r->rows);
	r->rows[r->nrows++] = r->cur;
	memset(&r->cur, 0, sizeof r->cur);
}

static void csvread_clear(struct csvread *r)
{
	for (size_t i = 0; i < r->nrows; i++) {
		for (size_t k = 0; k < r->rows[i].n; k++)
			free(r->rows[i].cells[k]);
		free(r->rows[i].cells);
	}
	free(r->rows);
	for (size_t k = 0; k < r->cur.n; k++)
		free(r->cur.cells[k]);
	free(r->cur.cells);
}

/* Reads PATH as CSV into R (rows with their first lines). Returns 0 or -1 with ERR. */
static int csvread_load(const char *path, struct csvread *r, char *err, size_t errlen)
{
	memset(r, 0, sizeof *r);
	FILE *f = fopen(path, "rb");
	if (!f) {
		snprintf(err, errlen, "cannot read %s: %s", path, strerror(errno));
		return -1;
	}
	struct csv_parser p;
	csv_init(&p, CSV_STRICT);
	char *line = NULL;
	size_t cap = 0;
	ssize_t len;
	int rc = 0;
	while ((len = getline(&line, &cap, f)) > 0) {
		r->line++;
		if (csv_parse(&p, line, (size_t)len, on_field, on_row, r) != (size_t)len) {
			snprintf(err, errlen, "%s:%d: %s", path, r->line, csv_strerror(csv_error(&p)));
			rc = -1;
			break;
		}
	}
	if (!rc && csv_fini(&p, on_field, on_row, r)) {
		snprintf(err, errlen, "%s:%d: %s", path, r->line, csv_strerror(csv_error(&p)));
		rc = -1;
	}
	csv_free(&p);
	free(line);
	fclose(f);
	return rc;
}

static int reserved_column(const char *name)
{
	static const char *const words[] = {"image", "category", "level", "source"};
	for (size_t i = 0; i < sizeof words / sizeof words[0]; i++)
		if (!strcmp(name, words[i]))
			return 1;
	return 0;
}

/* Joins the label columns of PATH (first column `image`, relative to DIR) into S. */
static int join_labels(struct stimimport *s, const char *path, char *err, size_t errlen)
{
	struct csvread r;
	if (csvread_load(path, &r, err, errlen))
		return -1;
	int rc = -1;
	const struct csvrow *h = r.nrows ? &r.rows[0] : NULL;
	if (!h || h->n < 2 || strcmp(h->cells[0], "image")) {
		snprintf(err, errlen, "%s:1: the first column must be 'image', followed by label "
			 "columns", path);
		goto done;
	}
	for (size_t k = 1; k < h->n; k++)
		for (size_t j = 0; j < k; j++)
			if (!*h->cells[k] || reserved_column(h->cells[k]) || !strcmp(h->cells[j], h->cells[k])) {
				snprintf(err, errlen, "%s:%d: column '%s' is empty, named twice or one of "
					 "image, category, level and source", path, h->line, h->cells[k]);
				goto done;
			}
	s->labels_path = xstrdup(path);
	s->nlabels = h->n - 1;
	s->label_names = xcalloc(s->nlabels, sizeof *s->label_names);
	for (size_t k = 0; k < s->nlabels; k++)
		s->label_names[k] = xstrdup(h->cells[k + 1]);
	for (size_t i = 0; i < s->n; i++)
		s->v[i].labels = xcalloc(s->nlabels, sizeof *s->v[i].labels);
	for (size_t q = 1; q < r.nrows; q++) {
		const struct csvrow *row = &r.rows[q];
		size_t i;
		for (i = 0; i < s->n && strcmp(s->v[i].rel, row->cells[0]); i++)
			;
		if (row->n != h->n)
			note(s, xasprintf("%s:%d: %zu fields where the header has %zu; row ignored", path,
					  row->line, row->n, h->n), 1);
		else if (i == s->n)
			note(s, xasprintf("%s:%d: no imported image '%s'; row ignored", path, row->line,
					  row->cells[0]), 1);
		else if (s->v[i].labels[0])
			note(s, xasprintf("%s:%d: a second row for '%s'; row ignored", path, row->line,
					  row->cells[0]), 1);
		else
			for (size_t k = 0; k < s->nlabels; k++)
				s->v[i].labels[k] = xstrdup(row->cells[k + 1]);
	}
	size_t missing = 0;
	for (size_t i = 0; i < s->n; i++)
		for (size_t k = 0; k < s->nlabels; k++)
			if (!s->v[i].labels[k]) {
				s->v[i].labels[k] = xstrdup("");
				missing += k == 0;
			}
	if (missing)
		note(s, xasprintf("%s: %zu image%s no row; their labels are left empty", path, missing,
				  missing == 1 ? " has" : "s have"), 0);
	rc = 0;
done:
	csvread_clear(&r);
	return rc;
}

/* ---- the whole import ----------------------------------------------------------------------- */

static void count_categories(struct stimimport *s)
{
	for (size_t i = 0; i < s->n; i++) {
		const char *c = s->v[i].category;
		size_t k;
		for (k = 0; k < s->ncategories && strcmp(s->categories[k], c); k++)
			;
		if (k == s->ncategories) {
			s->categories = xrealloc(s->categories, (k + 1) * sizeof *s->categories);
			s->category_counts = xrealloc(s->category_counts, (k + 1) * sizeof(size_t));
			s->categories[k] = xstrdup(c);
			s->category_counts[k] = 0;
			s->ncategories++;
		}
		s->category_counts[k]++;
	}
}

int stimimport_scan(const struct stimimport_opts *o, struct stimimport *s, char *err,
		    size_t errlen)
{
	memset(s, 0, sizeof *s);
	if (!fspath_is_dir(o->dir)) {
		snprintf(err, errlen, "%s is not a folder", o->dir);
		return -1;
	}
	char *labels = o->labels ? xstrdup(o->labels) : xasprintf("%s/%s", o->dir, STIMIMPORT_LABELS);
	FILE *lf = fopen(labels, "rb");
	if (!lf && o->labels) {
		snprintf(err, errlen, "cannot read %s: %s", labels, strerror(errno));
		free(labels);
		return -1;
	}
	if (lf)
		fclose(lf);
	char out_real[PATH_MAX], lab_real[PATH_MAX];
	struct walk w = {s, o->dir, realpath(o->out, out_real) ? out_real : NULL,
			 lf && realpath(labels, lab_real) ? lab_real : NULL, o->max_side};
	size_t n;
	char **top = fspath_list(o->dir, &n);
	for (size_t i = 0; top && i < n; i++) {
		if (top[i][0] == '.')
			continue;
		char *p = xasprintf("%s/%s", o->dir, top[i]);
		if (fspath_is_dir(p))
			collect(&w, p, top[i], MAX_DEPTH);
		else if (!skipped(&w, p))
			note(s, xasprintf("%s: ignored: not inside a category folder", p), 0);
		free(p);
	}
	fspath_free_names(top, n);
	s->have_pattern = o->pattern != NULL;
	if (o->pattern)
		match_names(s, o->pattern);
	count_categories(s);
	int rc = 0;
	if (lf && join_labels(s, labels, err, errlen)) {
		stimimport_clear(s);
		rc = -1;
	}
	free(labels);
	return rc;
}

int stimimport_write_list(const struct stimimport *s, const char *path, char *err, size_t errlen)
{
	FILE *fo = fopen(path, "w");
	if (!fo) {
		snprintf(err, errlen, "cannot write %s: %s", path, strerror(errno));
		return -1;
	}
	char *outdir = fspath_dir(path);
	size_t fixed = s->have_pattern ? 4 : 2, ncol = fixed + s->nlabels;
	const char **cells = xcalloc(4 + s->nlabels, sizeof *cells);
	const char *head[] = {"image", "category", "level", "source"};
	for (size_t k = 0; k < fixed; k++)
		cells[k] = head[k];
	for (size_t k = 0; k < s->nlabels; k++)
		cells[fixed + k] = s->label_names[k];
	int ok = csvout_row(fo, cells, ncol) == 0;
	for (size_t i = 0; i < s->n && ok; i++) {
		const struct stimimport_image *f = &s->v[i];
		char *img = fspath_relative(f->path, outdir);
		char *src = f->src >= 0 ? fspath_relative(s->v[f->src].path, outdir) : NULL;
		char lev[64];
		snprintf(lev, sizeof lev, "%.17g", f->matched ? f->level : 0.0);
		cells[0] = img;
		cells[1] = f->category;
		if (s->have_pattern) {
			cells[2] = lev;
			cells[3] = src ? src : "";
		}
		for (size_t k = 0; k < s->nlabels; k++)
			cells[fixed + k] = f->labels[k];
		ok = csvout_row(fo, cells, ncol) == 0;
		free(img);
		free(src);
	}
	free(cells);
	free(outdir);
	if (fclose(fo) || !ok) {
		snprintf(err, errlen, "cannot write %s: %s", path, strerror(errno));
		return -1;
	}
	return 0;
}

int stimimport_write_protocol(const struct stimimport *s, const char *list, const char *path,
			      const char *keys, char *err, size_t errlen)
{
	char **practice = xcalloc(s->ncategories ? s->ncategories : 1, sizeof *practice);
	char *listdir = fspath_dir(list);
	size_t have = 0;
	for (size_t i = 0; i < s->n; i++) {
		const struct stimimport_image *f = &s->v[i];
		size_t k;
		for (k = 0; strcmp(s->categories[k], f->category); k++)
			;
		if (!practice[k] && (!f->matched || f->level == 0) && f->src < 0) {
			practice[k] = fspath_relative(f->path, listdir);
			have++;
		}
	}
	struct stimproto_input in = {path, list, s->categories, s->category_counts, s->ncategories,
				     s->have_pattern, have == s->ncategories ? practice : NULL, keys};
	int rc = stimproto_write(&in, err, errlen);
	for (size_t k = 0; k < s->ncategories; k++)
		free(practice[k]);
	free(practice);
	free(listdir);
	return rc;
}

void stimimport_clear(struct stimimport *s)
{
	if (!s)
		return;
	for (size_t i = 0; i < s->n; i++) {
		struct stimimport_image *f = &s->v[i];
		free(f->path);
		free(f->rel);
		free(f->category);
		free(f->stem);
		free(f->folder);
		free(f->src_stem);
		for (size_t k = 0; f->labels && k < s->nlabels; k++)
			free(f->labels[k]);
		free(f->labels);
	}
	free(s->v);
	for (size_t i = 0; i < s->nnotes; i++)
		free(s->notes[i]);
	free(s->notes);
	for (size_t k = 0; k < s->nlabels; k++)
		free(s->label_names[k]);
	free(s->label_names);
	for (size_t k = 0; k < s->ncategories; k++)
		free(s->categories[k]);
	free(s->categories);
	free(s->category_counts);
	free(s->labels_path);
	memset(s, 0, sizeof *s);
}
