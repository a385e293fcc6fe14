/* fitcsv — the `tachist fit` input reader (see fitcsv.h).
 *
 * The file is fed to libcsv one physical line at a time so that each record knows the line it
 * started on; fields of the current record collect in a small growing array. The first record is
 * a header when none of its cells is a number: it must then name level and correct, or level, n
 * and k (any order, case-insensitive). Without a header, two columns mean trial rows and three
 * mean grouped rows. */
#include "fitcsv.h"

#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <strings.h>

#include <csv.h>

#include "decimal.h"

struct reader {
	const char *path;
	struct diag_list *d;
	int line, rec_line;        /* current physical line; line the current record began on */
	char **field;
	size_t nfield, cap;
	int nrec;
	bool header_seen, layout_known;
	enum fitcsv_kind kind;
	int col_level, col_a, col_b;   /* trials: a = correct; grouped: a = n, b = k */
	size_t ncols;
	double *levels;
	unsigned long *n, *k;
	size_t nrows, caprows;
	int errors;
};

static void on_field(void *s, size_t len, void *data)
{
	struct reader *r = data;
	if (r->nfield == 0)
		r->rec_line = r->line;
	if (r->nfield == r->cap) {
		r->cap = r->cap ? 2 * r->cap : 8;
		r->field = xrealloc(r->field, r->cap * sizeof *r->field);
	}
	char *f = xmalloc(len + 1);
	memcpy(f, s, len);
	f[len] = '\0';
	r->field[r->nfield++] = f;
}

/* A plain decimal number with spaces around allowed (decimal_ok: no hex, inf or nan). */
static bool is_number(const char *s, double *v)
{
	char buf[64], *end;
	while (*s == ' ')
		s++;
	size_t n = strlen(s);
	while (n && s[n - 1] == ' ')
		n--;
	if (!n || n >= sizeof buf)
		return false;
	memcpy(buf, s, n);
	buf[n] = '\0';
	if (!decimal_ok(buf))
		return false;
	errno = 0;
	double x = strtod(buf, &end);
	if (errno || *end || !isfinite(x))
		return false;
	*v = x;
	return true;
}

static bool is_count(const char *s, unsigned long *v)
{
	double x;
	if (!is_number(s, &x) || x < 0 || x != floor(x) || x > 4e9)
		return false;
	*v = (unsigned long)x;
	return true;
}

static void err(struct reader *r, const char *fmt, const char *a, const char *b)
{
	diag_add(r->d, DIAG_ERROR, r->path, r->rec_line, fmt, a, b);
	r->errors++;
}

/* Finds the columns in a header record; returns false when it is not one we know. */
static bool take_header(struct reader *r)
{
	int lv = -1, co = -1, nn = -1, kk = -1;
	for (size_t i = 0; i < r->nfield; i++) {
		const char *f = r->field[i];
		while (*f == ' ')
			f++;
		if (!strcasecmp(f, "level"))
			lv = (int)i;
		else if (!strcasecmp(f, "correct"))
			co = (int)i;
		else if (!strcasecmp(f, "n"))
			nn = (int)i;
		else if (!strcasecmp(f, "k"))
			kk = (int)i;
	}
	r->ncols = r->nfield;
	if (lv >= 0 && nn >= 0 && kk >= 0) {
		r->kind = FITCSV_GROUPED;
		r->col_level = lv, r->col_a = nn, r->col_b = kk;
		return true;
	}
	if (lv >= 0 && co >= 0) {
		r->kind = FITCSV_TRIALS;
		r->col_level = lv, r->col_a = co, r->col_b = -1;
		return true;
	}
	return false;
}

static void push(struct reader *r, double level, unsigned long n, unsigned long k)
{
	if (r->nrows == r->caprows) {
		r->caprows = r->caprows ? 2 * r->caprows : 64;
		r->levels = xrealloc(r->levels, r->caprows * sizeof *r->levels);
		r->n = xrealloc(r->n, r->caprows * sizeof *r->n);
		r->k = xrealloc(r->k, r->caprows * sizeof *r->k);
	}
	r->levels[r->nrows] = level;
	r->n[r->nrows] = n;
	r->k[r->nrows] = k;
	r->nrows++;
}

static void on_record(int c, void *data)
{
	(void)c;
	struct reader *r = data;
	if (r->nfield == 0)
		goto done;
	if (r->nfield == 1 && r->field[0][0] == '\0')
		goto done;   /* blank line */
	r->nrec++;
	if (!r->layout_known) {
		double v;
		bool any_num = false;
		for (size_t i = 0; i < r->nfield; i++)
			any_num |= is_number(r->field[i], &v);
		r->layout_known = true;
		if (!any_num) {
			r->header_seen = true;
			if (!take_header(r)) {
				err(r, "the header must name the columns level,correct (one row per trial) "
				       "or level,n,k (counts per level)%s%s", "", "");
				r->ncols = 0;
			}
			goto done;
		}
		if (r->nfield == 2) {
			r->kind = FITCSV_TRIALS;
			r->col_level = 0, r->col_a = 1, r->col_b = -1;
		} else if (r->nfield == 3) {
			r->kind = FITCSV_GROUPED;
			r->col_level = 0, r->col_a = 1, r->col_b = 2;
		} else {
			err(r, "expected 2 columns (level,correct) or 3 (level,n,k) without a header%s%s",
			    "", "");
			r->ncols = 0;
			goto done;
		}
		r->ncols = r->nfield;
	}
	if (r->ncols == 0)
		goto done;   /* layout unknown: the first error said why */
	if (r->nfield != r->ncols) {
		char a[32], b[32];
		snprintf(a, sizeof a, "%zu", r->nfield);
		snprintf(b, sizeof b, "%zu", r->ncols);
		err(r, "%s columns where the first row has %s", a, b);
		goto done;
	}
	double level;
	const char *lv = r->field[r->col_level];
	if (!is_number(lv, &level)) {
		err(r, "level '%s' is not a number%s", lv, "");
		goto done;
	}
	if (r->kind == FITCSV_TRIALS) {
		const char *cs = r->field[r->col_a];
		unsigned long c1;
		if (!is_count(cs, &c1) || c1 > 1) {
			err(r, "correct '%s' must be 0 or 1%s", cs, "");
			goto done;
		}
		push(r, level, 1, c1);
	} else {
		const char *ns = r->field[r->col_a], *ks = r->field[r->col_b];
		unsigned long n, k;
		bool ok = true;
		if (!is_count(ns, &n)) {
			err(r, "n '%s' is not a whole number of trials%s", ns, "");
			ok = false;
		}
		if (!is_count(ks, &k)) {
			err(r, "k '%s' is not a whole number of correct trials%s", ks, "");
			ok = false;
		}
		if (ok && k > n) {
			err(r, "k (%s) is larger than n (%s)", ks, ns);
			ok = false;
		}
		if (ok)
			push(r, level, n, k);
	}
done:
	for (size_t i = 0; i < r->nfield; i++)
		free(r->field[i]);
	r->nfield = 0;
}

static int cmp_pt(const void *a, const void *b)
{
	double x = ((const struct fit_point *)a)->level, y = ((const struct fit_point *)b)->level;
	return (x > y) - (x < y);
}

int fitcsv_read(const char *path, struct fit_point **pts, size_t *npts, enum fitcsv_kind *kind,
		struct diag_list *d)
{
	*pts = NULL;
	*npts = 0;
	FILE *f = fopen(path, "r");
	if (!f) {
		diag_add(d, DIAG_ERROR, path, 0, "cannot open: %s", strerror(errno));
		return -1;
	}
	struct reader r = {.path = path, .d = d};
	struct csv_parser p;
	csv_init(&p, CSV_APPEND_NULL);
	char *buf = NULL;
	size_t cap = 0;
	ssize_t len;
	while ((len = getline(&buf, &cap, f)) > 0) {
		r.line++;
		if (csv_parse(&p, buf, (size_t)len, on_field, on_record, &r) != (size_t)len) {
			diag_add(d, DIAG_ERROR, path, r.line, "malformed CSV: %s",
				 csv_strerror(csv_error(&p)));
			r.errors++;
			break;
		}
	}
	if (ferror(f)) {
		diag_add(d, DIAG_ERROR, path, 0, "read error: %s", strerror(errno));
		r.errors++;
	}
	csv_fini(&p, on_field, on_record, &r);
	csv_free(&p);
	free(buf);
	fclose(f);
	for (size_t i = 0; i < r.nfield; i++)
		free(r.field[i]);
	free(r.field);
	if (!r.errors && r.nrows == 0) {
		diag_add(d, DIAG_ERROR, path, 0, "no data rows");
		r.errors++;
	}
	int rc = -1;
	if (!r.errors) {
		struct fit_point *v = xmalloc(r.nrows * sizeof *v);
		for (size_t i = 0; i < r.nrows; i++)
			v[i] = (struct fit_point){r.levels[i], r.n[i], r.k[i]};
		qsort(v, r.nrows, sizeof *v, cmp_pt);
		size_t m = 0;
		for (size_t i = 0; i < r.nrows; i++) {
			if (m && v[m - 1].level == v[i].level) {
				v[m - 1].n += v[i].n;
				v[m - 1].k += v[i].k;
			} else {
				v[m++] = v[i];
			}
		}
		*pts = v;
		*npts = m;
		*kind = r.kind;
		rc = 0;
	}
	free(r.levels);
	free(r.n);
	free(r.k);
	return rc;
}
