/* lumcsv — photometer readings from CSV (see include/lumcsv.h). Each physical line is fed to
 * libcsv on its own and finished, so every row knows its line; a quoted cell cannot span lines
 * (readings never need that). */
#include "lumcsv.h"

#include <csv.h>
#include <errno.h>
#include <math.h>
#include <stdbool.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#define MAX_CELL 256
#define MAX_FILE (16u << 20)   /* readings files are small; refuse anything huge */

struct ctx {
	const char *path;
	struct diag_list *d;
	int line;
	char cell[3][MAX_CELL];
	int ncell;
	bool header_done;
	int col_code, col_cd, col_channel;   /* -1 when absent */
	struct lumcsv_reading *v;
	size_t n, cap;
};

static void on_field(void *s, size_t len, void *user)
{
	struct ctx *c = user;
	if (c->ncell < 3) {
		size_t k = len < MAX_CELL - 1 ? len : MAX_CELL - 1;
		memcpy(c->cell[c->ncell], s, k);
		c->cell[c->ncell][k] = '\0';
		if (memchr(s, '\0', len))
			c->cell[c->ncell][0] = '\x01';   /* marks a NUL byte; refused below */
	}
	c->ncell++;
}

static int decimal(const char *s, double *out)
{
	if (!*s || strspn(s, "0123456789+-.eE") != strlen(s))
		return -1;
	char *end;
	errno = 0;
	double x = strtod(s, &end);
	if (*end || errno == ERANGE || !isfinite(x))
		return -1;
	*out = x;
	return 0;
}

/* The first row: a header when its first cell is not a number. Returns true when it was one. */
static bool take_header(struct ctx *c)
{
	double x;
	c->header_done = true;
	c->col_code = 0;
	c->col_cd = 1;
	c->col_channel = c->ncell >= 3 ? 2 : -1;
	if (decimal(c->cell[0], &x) == 0)
		return false;
	c->col_code = c->col_cd = c->col_channel = -1;
	for (int i = 0; i < c->ncell && i < 3; i++) {
		if (!strcmp(c->cell[i], "code"))
			c->col_code = i;
		else if (!strcmp(c->cell[i], "cd_m2"))
			c->col_cd = i;
		else if (!strcmp(c->cell[i], "channel"))
			c->col_channel = i;
	}
	if (c->col_code < 0 || c->col_cd < 0)
		diag_add(c->d, DIAG_ERROR, c->path, c->line, "the header must name the columns code "
			 "and cd_m2 (and optionally channel)");
	return true;
}

static void on_row(int term, void *user)
{
	(void)term;
	struct ctx *c = user;
	int ncell = c->ncell;
	c->ncell = 0;
	if (ncell == 1 && !c->cell[0][0])
		return;   /* blank line */
	c->ncell = ncell;
	if (!c->header_done && take_header(c)) {
		c->ncell = 0;
		return;
	}
	c->ncell = 0;
	if (c->col_code < 0 || c->col_cd < 0)
		return;
	if (ncell > 3 || ncell <= c->col_cd || ncell <= c->col_code) {
		diag_add(c->d, DIAG_ERROR, c->path, c->line, "%d cells: a reading is code,cd_m2"
			 "[,channel]", ncell);
		return;
	}
	for (int i = 0; i < ncell && i < 3; i++)
		if (c->cell[i][0] == '\x01') {
			diag_add(c->d, DIAG_ERROR, c->path, c->line, "a cell holds a NUL byte");
			return;
		}
	double code, cd;
	const char *cs = c->cell[c->col_code], *ls = c->cell[c->col_cd];
	if (decimal(cs, &code) || code != floor(code) || code < 0 || code > 255) {
		diag_add(c->d, DIAG_ERROR, c->path, c->line, "code '%s' is not a whole number from 0 "
			 "to 255", cs);
		return;
	}
	if (decimal(ls, &cd) || cd < 0) {
		diag_add(c->d, DIAG_ERROR, c->path, c->line, "reading '%s' is not a luminance (a "
			 "decimal number of 0 cd/m2 or more)", ls);
		return;
	}
	int ch = LUM_GREY;
	if (c->col_channel >= 0 && c->col_channel < ncell && c->cell[c->col_channel][0]) {
		ch = lum_channel_parse(c->cell[c->col_channel]);
		if (ch < 0) {
			diag_add(c->d, DIAG_ERROR, c->path, c->line, "channel '%s' is not grey, red, "
				 "green or blue", c->cell[c->col_channel]);
			return;
		}
	}
	for (size_t i = 0; i < c->n; i++)
		if (c->v[i].code == (int)code && (int)c->v[i].channel == ch) {
			diag_add(c->d, DIAG_ERROR, c->path, c->line, "code %d (%s) is read twice (first "
				 "on line %d)", (int)code, lum_channel_name(ch), c->v[i].line);
			return;
		}
	if (c->n == c->cap) {
		c->cap = c->cap ? c->cap * 2 : 32;
		c->v = xrealloc(c->v, c->cap * sizeof *c->v);
	}
	c->v[c->n++] = (struct lumcsv_reading){(int)code, cd, (enum lum_channel)ch, c->line};
}

int lumcsv_read(const char *path, struct lumcsv_reading **out, size_t *n, struct diag_list *d)
{
	*out = NULL;
	*n = 0;
	size_t errors0 = diag_count(d, DIAG_ERROR);
	FILE *f = fopen(path, "rb");
	if (!f) {
		diag_add(d, DIAG_ERROR, path, 0, "cannot read: %s", strerror(errno));
		return -1;
	}
	struct stat st;
	if (fstat(fileno(f), &st) || !S_ISREG(st.st_mode)) {
		diag_add(d, DIAG_ERROR, path, 0, "not a regular file");
		fclose(f);
		return -1;
	}
	struct ctx c = {.path = path, .d = d};
	struct csv_parser p;
	csv_init(&p, CSV_STRICT | CSV_STRICT_FINI);
	char *line = NULL;
	size_t cap = 0, total = 0;
	ssize_t len;
	while ((len = getline(&line, &cap, f)) > 0) {
		c.line++;
		total += (size_t)len;
		if (total > MAX_FILE) {
			diag_add(d, DIAG_ERROR, path, c.line, "the file is over %u MiB; readings files "
				 "are small", MAX_FILE >> 20);
			break;
		}
		size_t k = (size_t)len;
		while (k && (line[k - 1] == '\n' || line[k - 1] == '\r'))
			k--;
		if ((csv_parse(&p, line, k, on_field, on_row, &c) != k ||
		     csv_fini(&p, on_field, on_row, &c) != 0)) {
			diag_add(d, DIAG_ERROR, path, c.line, "not valid CSV (%s)",
				 csv_strerror(csv_error(&p)));
			c.ncell = 0;
			csv_free(&p);
			csv_init(&p, CSV_STRICT | CSV_STRICT_FINI);
		}
	}
	free(line);
	csv_free(&p);
	fclose(f);
	if (diag_count(d, DIAG_ERROR) > errors0) {
		free(c.v);
		return -1;
	}
	if (!c.n) {
		diag_add(d, DIAG_ERROR, path, 0, "no readings");
		free(c.v);
		return -1;
	}
	*out = c.v;
	*n = c.n;
	return 0;
}
