/* export — trial tables out of the store (see export.h).
 *
 * Every writer walks one list of output columns built from the store's column tables
 * (store.h): the session columns marked for every row, then the exported trial columns in
 * table order with the stimulus list's label columns (the union over the exported sessions, in
 * order of first appearance) after `source`. A label whose name equals a column is written as
 * `label_<name>`. Values are formatted by column type: indices kept from 0 are written from 1,
 * numbers in the shortest text that reads back to the same double. So a new column in the
 * table appears in CSV, TSV, JSON and BIDS (with its sidecar description) without an edit here.
 *
 * Each row is built in a small growing buffer and written with one fwrite, so the cost per row
 * is the store's step plus the formatting; the buffer is the only memory that lives across
 * rows. Called by `tachist export` and the console's export screen. */
#include <errno.h>
#include <stdint.h>
#include <inttypes.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include <cJSON.h>

#include "diag.h"
#include "export.h"
#include "rig_file.h"
#include "store.h"
#include "version.h"

/* ---- row buffer ---- */

struct buf {
	char *p;
	size_t n, cap;
};

static void buf_grow(struct buf *b, size_t more)
{
	if (b->n + more <= b->cap)
		return;
	size_t cap = b->cap ? b->cap : 1024;
	while (cap < b->n + more)
		cap *= 2;
	b->p = xrealloc(b->p, cap);
	b->cap = cap;
}

static void buf_put(struct buf *b, const char *s, size_t len)
{
	buf_grow(b, len);
	memcpy(b->p + b->n, s, len);
	b->n += len;
}

static void buf_str(struct buf *b, const char *s)
{
	buf_put(b, s, strlen(s));
}

static void buf_chr(struct buf *b, char c)
{
	buf_grow(b, 1);
	b->p[b->n++] = c;
}

/* Decimal text of V at the end of TMP (48 bytes); returns its start. Faster than printf, which
 * matters at millions of cells. */
static const char *int_text(char tmp[48], int64_t v)
{
	char *q = tmp + 47;
	*q = '\0';
	uint64_t u = v < 0 ? (uint64_t)0 - (uint64_t)v : (uint64_t)v;
	do {
		*--q = (char)('0' + u % 10);
		u /= 10;
	} while (u);
	if (v < 0)
		*--q = '-';
	return q;
}

void export_number(char *buf, size_t len, double v)
{
	if (!isfinite(v)) {
		snprintf(buf, len, "%s", isnan(v) ? "NaN" : v > 0 ? "Infinity" : "-Infinity");
		return;
	}
	if (v == floor(v) && fabs(v) < 1e15) {
		char tmp[48];
		snprintf(buf, len, "%s", int_text(tmp, (int64_t)v));
		if (v == 0 && signbit(v))
			snprintf(buf, len, "-0");
		return;
	}
	/* The shortest: any decimal of 15 or fewer significant digits survives a round trip
	 * through binary64 (DBL_DIG, C11 5.2.4.2.2), so when 15 digits read back exactly no
	 * shorter text could differ; 17 always read back (IEEE 754-2008 section 5.12.2). */
	for (int prec = 15; prec <= 17; prec++) {
		snprintf(buf, len, "%.*g", prec, v);
		if (strtod(buf, NULL) == v)
			return;
	}
}

/* OWASP "CSV Injection": cells starting with these are formulas to a spreadsheet. */
static bool dangerous(const char *s)
{
	return s && s[0] && strchr("=+-@\t\r", s[0]) != NULL;
}

static void buf_cell(struct buf *b, const char *cell, char delim, bool neutralise)
{
	if (!cell)
		return;
	bool guard = neutralise && dangerous(cell);
	bool quote = guard;
	for (const char *c = cell; *c && !quote; c++)
		if (*c == delim || *c == '"' || *c == '\r' || *c == '\n')
			quote = true;
	if (!quote) {
		buf_str(b, cell);
		return;
	}
	buf_chr(b, '"');
	if (guard)
		buf_chr(b, '\'');
	for (const char *c = cell; *c; c++) {
		if (*c == '"')
			buf_chr(b, '"');
		buf_chr(b, *c);
	}
	buf_chr(b, '"');
}

void export_cell(FILE *out, const char *cell, char delim, bool neutralise)
{
	struct buf b = {0};
	buf_cell(&b, cell, delim, neutralise);
	if (b.n)
		fwrite(b.p, 1, b.n, out);
	free(b.p);
}

int export_format_parse(const char *name, enum export_format *out)
{
	static const char *const names[] = {"csv", "tsv", "json", "bids"};
	for (int i = 0; i < 4; i++)
		if (name && !strcmp(name, names[i])) {
			*out = (enum export_format)i;
			return 0;
		}
	return -1;
}

/* ---- output columns ---- */

/* One column of an exported table: a session column, a trial column or a label. */
struct outcol {
	const char *name;                 /* header (borrowed from the tables or from labels) */
	const struct store_column *col;   /* NULL for a label column */
	bool session;                     /* the value comes from the session row */
	size_t label;                     /* label index when COL is NULL */
};

struct layout {
	struct outcol *v;
	size_t n;
	char **labels;                    /* label headers */
	size_t nl;
};

static const char *const bids_own[] = {"onset", "duration", "response_time"};

/* True when NAME is the header of an exported column (a label of that name is renamed). */
static bool is_standard(const char *name)
{
	const struct store_table *tabs[] = {&store_sessions_table, &store_trials_table};
	for (size_t k = 0; k < 2; k++)
		for (size_t i = 0; i < tabs[k]->ncols; i++) {
			const char *e = tabs[k]->cols[i].export_name;
			if (e && !strcmp(e, name))
				return true;
		}
	for (size_t i = 0; i < sizeof bids_own / sizeof bids_own[0]; i++)
		if (!strcmp(name, bids_own[i]))
			return true;
	return false;
}

static void free_vec(char **v, size_t n)
{
	for (size_t i = 0; i < n; i++)
		free(v[i]);
	free(v);
}

static void layout_add(struct layout *L, const char *name, const struct store_column *c,
		       bool session, size_t label)
{
	L->v = xrealloc(L->v, (L->n + 1) * sizeof *L->v);
	L->v[L->n++] = (struct outcol){name, c, session, label};
}

/* The exported columns in order, with the label columns NAMES after `source`. */
static void layout_build(struct layout *L, const char *const *names, size_t nl)
{
	memset(L, 0, sizeof *L);
	L->nl = nl;
	L->labels = xcalloc(nl ? nl : 1, sizeof *L->labels);
	for (size_t i = 0; i < nl; i++)
		L->labels[i] = is_standard(names[i]) ? xasprintf("label_%s", names[i])
						     : xstrdup(names[i]);
	const struct store_table *st = &store_sessions_table, *tt = &store_trials_table;
	for (size_t i = 0; i < st->ncols; i++)
		if (st->cols[i].flags & STORE_COL_ROW)
			layout_add(L, st->cols[i].export_name, &st->cols[i], true, 0);
	for (size_t i = 0; i < tt->ncols; i++) {
		const struct store_column *c = &tt->cols[i];
		if (!c->export_name)
			continue;
		layout_add(L, c->export_name, c, false, 0);
		if (c->flags & STORE_COL_LABELS_AFTER)
			for (size_t k = 0; k < nl; k++)
				layout_add(L, L->labels[k], NULL, false, k);
	}
}

static void layout_free(struct layout *L)
{
	free(L->v);
	free_vec(L->labels, L->nl);
}

/* The value of column O on trial T of session SS. */
static void cell_value(const struct outcol *o, const struct store_trial *t,
		       const struct store_session *ss, struct store_value *v)
{
	if (!o->col) {
		memset(v, 0, sizeof *v);
		v->s = o->label < t->nlabels ? t->label_values[o->label] : NULL;
		v->missing = !v->s;
		return;
	}
	store_column_value(o->col, o->session ? (const void *)ss : (const void *)t, v);
}

/* Text of a present value V of column C (NULL = a label, text): numbers are formatted into
 * TMP, text is borrowed. *IS_TEXT says which; a number that is not finite gives NULL. */
static const char *value_text(const struct store_column *c, const struct store_value *v,
			      char tmp[48], bool *is_text)
{
	*is_text = false;
	switch (c ? c->type : STORE_TEXT) {
	case STORE_INT:
	case STORE_INT64:
	case STORE_BOOL:
		return int_text(tmp, v->i + ((c->flags & STORE_COL_ONE_BASED) ? 1 : 0));
	case STORE_SEED:
		snprintf(tmp, 48, "%" PRIu64, (uint64_t)v->i);
		return tmp;
	case STORE_REAL:
		if (!isfinite(v->r))
			return NULL;
		export_number(tmp, 48, v->r);
		return tmp;
	default:
		*is_text = true;
		return v->s;
	}
}

static int write_buf(struct buf *b, FILE *out, char **err)
{
	if (b->n && fwrite(b->p, 1, b->n, out) != b->n) {
		if (err) {
			free(*err);
			*err = xasprintf("writing the table: %s", strerror(errno));
		}
		return -1;
	}
	b->n = 0;
	return 0;
}

/* ---- CSV and TSV ---- */

static void delimited_row(struct buf *b, const struct layout *L, const struct store_trial *t,
			  const struct store_session *ss, char d, const char *eol)
{
	for (size_t i = 0; i < L->n; i++) {
		if (i)
			buf_chr(b, d);
		struct store_value v;
		cell_value(&L->v[i], t, ss, &v);
		if (v.missing)
			continue;   /* missing values are empty cells */
		char tmp[48];
		bool text;
		const char *s = value_text(L->v[i].col, &v, tmp, &text);
		if (text)
			buf_cell(b, s, d, true);
		else if (s)
			buf_str(b, s);
	}
	buf_str(b, eol);
}

static void delimited_header(struct buf *b, const struct layout *L, char d, const char *eol)
{
	for (size_t i = 0; i < L->n; i++) {
		if (i)
			buf_chr(b, d);
		buf_cell(b, L->v[i].name, d, true);
	}
	buf_str(b, eol);
}

/* ---- JSON ---- */

/* Adds value V of column C (NULL = a label) to object O under K: null when missing, a string
 * for text and for the 64-bit seed (beyond a double's exact range), else a number written as
 * exact decimal text. */
static void json_add_value(cJSON *o, const char *k, const struct store_column *c,
			   const struct store_value *v)
{
	char tmp[48];
	bool text;
	const char *s = v->missing ? NULL : value_text(c, v, tmp, &text);
	if (!s)
		cJSON_AddNullToObject(o, k);
	else if (text || (c && c->type == STORE_SEED))
		cJSON_AddStringToObject(o, k, s);
	else
		cJSON_AddRawToObject(o, k, s);
}

static cJSON *json_row(const struct layout *L, const struct store_trial *t,
		       const struct store_session *ss)
{
	cJSON *o = cJSON_CreateObject();
	for (size_t i = 0; i < L->n; i++) {
		struct store_value v;
		cell_value(&L->v[i], t, ss, &v);
		json_add_value(o, L->v[i].name, L->v[i].col, &v);
	}
	return o;
}

/* The session's metadata: every session column marked STORE_COL_META, by exported name. */
static cJSON *json_session(const struct store_session *ss)
{
	cJSON *o = cJSON_CreateObject();
	const struct store_table *t = &store_sessions_table;
	for (size_t i = 0; i < t->ncols; i++) {
		const struct store_column *c = &t->cols[i];
		if (!(c->flags & STORE_COL_META))
			continue;
		struct store_value v;
		store_column_value(c, ss, &v);
		json_add_value(o, c->export_name, c, &v);
	}
	return o;
}

static void json_sessions(struct buf *b, struct store_iter *it)
{
	size_t n;
	const struct store_session *v = store_iter_sessions(it, &n);
	cJSON *a = cJSON_CreateArray();
	for (size_t i = 0; i < n; i++)
		cJSON_AddItemToArray(a, json_session(&v[i]));
	char *txt = cJSON_PrintUnformatted(a);
	cJSON_Delete(a);
	buf_str(b, "{\"sessions\": ");
	buf_str(b, txt);
	buf_str(b, ",\n\"trials\": [");
	cJSON_free(txt);
}

/* ---- tables ---- */

int export_table(struct store *s, enum export_format f, const char *session, const char *subject,
		 FILE *out, struct export_stats *st, char **err)
{
	struct export_stats stats = {0};
	if (f == EXPORT_BIDS) {
		if (err)
			*err = xstrdup("BIDS is a folder, not a table: use export_bids");
		return -1;
	}
	struct store_iter *it;
	if (store_iter_open(s, session, subject, &it, err))
		return -1;
	size_t nl;
	const char *const *names = store_iter_label_names(it, &nl);
	struct layout L;
	layout_build(&L, names, nl);
	char d = f == EXPORT_TSV ? '\t' : ',';
	/* RFC 4180 section 2 rule 1: records end with CRLF. TSV (IANA text/tab-separated-values)
	 * lines end with LF. */
	const char *eol = f == EXPORT_CSV ? "\r\n" : "\n";
	struct buf b = {0};
	int ret = -1;
	if (f == EXPORT_JSON)
		json_sessions(&b, it);
	else
		delimited_header(&b, &L, d, eol);
	const struct store_trial *t;
	const struct store_session *cur = NULL, *ss;
	int rc;
	while ((rc = store_iter_next(it, &t, &ss, err)) == 1) {
		if (ss != cur) {
			stats.sessions++;
			cur = ss;
		}
		if (f == EXPORT_JSON) {
			cJSON *o = json_row(&L, t, ss);
			char *txt = cJSON_PrintUnformatted(o);
			cJSON_Delete(o);
			buf_str(&b, stats.rows ? ",\n" : "\n");
			buf_str(&b, txt);
			cJSON_free(txt);
		} else {
			delimited_row(&b, &L, t, ss, d, eol);
		}
		stats.rows++;
		if (b.n >= 65536 && write_buf(&b, out, err))
			goto done;
	}
	if (rc < 0)
		goto done;
	if (f == EXPORT_JSON)
		buf_str(&b, stats.rows ? "\n]}\n" : "]}\n");
	if (write_buf(&b, out, err))
		goto done;
	if (fflush(out)) {
		if (err)
			*err = xasprintf("writing the table: %s", strerror(errno));
		goto done;
	}
	ret = 0;
done:
	free(b.p);
	layout_free(&L);
	store_iter_close(it);
	if (st)
		*st = stats;
	return ret;
}

/* ---- BIDS ---- */

static int mkdirs(const char *path, char **err)
{
	char *p = xstrdup(path);
	for (char *c = p + 1; ; c++) {
		if (*c == '/' || *c == '\0') {
			char keep = *c;
			*c = '\0';
			if (mkdir(p, 0777) && errno != EEXIST) {
				if (err)
					*err = xasprintf("%s: cannot create folder: %s", p, strerror(errno));
				free(p);
				return -1;
			}
			*c = keep;
			if (!keep)
				break;
		}
	}
	free(p);
	return 0;
}

/* Letters and digits of S (BIDS labels are alphanumeric); FALLBACK when none. */
static char *bids_label(const char *s, const char *fallback)
{
	size_t n = s ? strlen(s) : 0;
	char *v = xmalloc(n + 1), *q = v;
	for (size_t i = 0; i < n; i++) {
		char c = s[i];
		if ((c >= 'a' && c <= 'z') || (c >= 'A' && c <= 'Z') || (c >= '0' && c <= '9'))
			*q++ = c;
	}
	*q = '\0';
	if (!*v) {
		free(v);
		v = xstrdup(fallback);
	}
	return v;
}

static char *uuid_hex(const char *id, size_t ndigits)
{
	char *v = xmalloc(33), *q = v;
	for (const char *c = id; *c && (size_t)(q - v) < ndigits; c++)
		if (*c != '-')
			*q++ = *c;
	*q = '\0';
	return v;
}

static int write_text_file(const char *path, const char *text, char **err)
{
	FILE *f = fopen(path, "w");
	if (!f) {
		if (err)
			*err = xasprintf("%s: %s", path, strerror(errno));
		return -1;
	}
	size_t n = strlen(text);
	bool bad = fwrite(text, 1, n, f) != n;
	if (fclose(f) || bad) {
		if (err)
			*err = xasprintf("%s: %s", path, strerror(errno));
		return -1;
	}
	return 0;
}

static int write_json_file(const char *path, cJSON *doc, char **err)
{
	char *txt = cJSON_Print(doc);
	char *with_nl = xasprintf("%s\n", txt);
	cJSON_free(txt);
	int rc = write_text_file(path, with_nl, err);
	free(with_nl);
	return rc;
}

static cJSON *column(cJSON *doc, const char *name, const char *desc, const char *units)
{
	cJSON *c = cJSON_AddObjectToObject(doc, name);
	cJSON_AddStringToObject(c, "Description", desc);
	if (units)
		cJSON_AddStringToObject(c, "Units", units);
	return c;
}

static void levels_from(cJSON *c, const char *const *values, size_t n, const char *what)
{
	if (!c || !n)
		return;
	cJSON *lv = cJSON_AddObjectToObject(c, "Levels");
	for (size_t i = 0; i < n; i++) {
		if (cJSON_GetObjectItemCaseSensitive(lv, values[i]))
			continue;
		char *d = xasprintf("%s %s", what, values[i]);
		cJSON_AddStringToObject(lv, values[i], d);
		free(d);
	}
}

static void levels_binary(cJSON *c, const char *one, const char *zero)
{
	cJSON *lv = cJSON_AddObjectToObject(c, "Levels");
	cJSON_AddStringToObject(lv, "1", one);
	cJSON_AddStringToObject(lv, "0", zero);
}

/* Distinct values seen in one label column, kept while there are few (a categorical label). */
#define LEVELS_MAX 64
struct seen {
	char **v;
	size_t n;
	bool many;
};

static void seen_add(struct seen *s, const char *v)
{
	if (!v || s->many)
		return;
	for (size_t i = 0; i < s->n; i++)
		if (!strcmp(s->v[i], v))
			return;
	if (s->n == LEVELS_MAX) {
		s->many = true;
		return;
	}
	s->v = xrealloc(s->v, (s->n + 1) * sizeof *s->v);
	s->v[s->n++] = xstrdup(v);
}

/* A text cell of a BIDS table: one physical line whatever it holds. The IANA definition of
 * text/tab-separated-values allows no tab inside a field and BIDS forbids CSV quoting in its
 * tables, so tab, newline, carriage return and backslash are written as the two-character
 * escapes \t \n \r \\ (the usual TSV escape convention; the sidecar says so). */
static void bids_text(struct buf *b, const char *v)
{
	for (const char *c = v; *c; c++) {
		switch (*c) {
		case '\t':
			buf_str(b, "\\t");
			break;
		case '\n':
			buf_str(b, "\\n");
			break;
		case '\r':
			buf_str(b, "\\r");
			break;
		case '\\':
			buf_str(b, "\\\\");
			break;
		default:
			buf_chr(b, *c);
		}
	}
}

/* Seconds from nanosecond clocks: nine decimals at most (the clocks' resolution), trailing zeros
 * dropped, so 0.55028358 s is not printed as 0.5502835810000001. */
static void buf_seconds(struct buf *b, double v)
{
	char tmp[48];
	snprintf(tmp, sizeof tmp, "%.9f", v);
	char *e = tmp + strlen(tmp);
	while (e > tmp && e[-1] == '0')
		*--e = '\0';
	if (e > tmp && e[-1] == '.')
		*--e = '\0';
	if (!strcmp(tmp, "-0"))
		strcpy(tmp, "0");
	buf_str(b, tmp);
}

static void bids_seconds(struct buf *b, bool has, double v)
{
	if (has && isfinite(v))
		buf_seconds(b, v);
	else
		buf_str(b, "n/a");   /* BIDS "Tabular files": missing values are n/a */
}

/* One _beh.tsv row: BIDS's own onset, duration and response_time, then the exported columns. */
static void bids_row(struct buf *b, const struct layout *L, const struct store_trial *t,
		     const struct store_session *ss, int64_t t0, struct seen *seen)
{
	bool timed = t->onset_ns != 0;
	bids_seconds(b, timed, (double)(t->onset_ns - t0) / 1e9);
	buf_chr(b, '\t');
	bids_seconds(b, timed && t->offset_ns > t->onset_ns,
		     (double)(t->offset_ns - t->onset_ns) / 1e9);
	buf_chr(b, '\t');
	bids_seconds(b, t->has_rt, t->rt_ms / 1000.0);
	for (size_t i = 0; i < L->n; i++) {
		buf_chr(b, '\t');
		struct store_value v;
		cell_value(&L->v[i], t, ss, &v);
		if (!L->v[i].col)
			seen_add(&seen[L->v[i].label], v.s);
		char tmp[48];
		bool text;
		const char *s = v.missing ? NULL : value_text(L->v[i].col, &v, tmp, &text);
		if (!s)
			buf_str(b, "n/a");
		else if (text)
			bids_text(b, s);
		else
			buf_str(b, s);
	}
	buf_chr(b, '\n');
}

/* Describes column O of the _beh.tsv in DOC, with levels where the values are few. */
static void sidecar_column(cJSON *doc, const struct outcol *o, struct seen *seen,
			   const char *const *choices, size_t nch)
{
	if (!o->col) {
		cJSON *c = column(doc, o->name, "Label column carried over from the stimulus list",
				  NULL);
		if (!seen[o->label].many && seen[o->label].n)
			levels_from(c, (const char *const *)seen[o->label].v, seen[o->label].n,
				    "value");
		return;
	}
	cJSON *c = column(doc, o->name, o->col->description, o->col->units);
	if (o->col->type == STORE_BOOL)
		levels_binary(c, "yes", "no");
	else if (!strcmp(o->col->name, "correct"))
		levels_binary(c, "correct", "incorrect");
	else if (!strcmp(o->col->name, "category"))
		levels_from(c, choices, nch, "category");
	else if (!strcmp(o->col->name, "response_category"))
		levels_from(c, choices, nch, "chose category");
}

/* The sidecar: every column described, the presentation settings, the session's metadata. */
static cJSON *bids_sidecar(const struct store_session *ss, const char *task,
			   const struct layout *L, struct seen *seen, const char *const *choices,
			   size_t nch)
{
	cJSON *doc = cJSON_CreateObject();
	cJSON_AddStringToObject(doc, "TaskName", task);
	column(doc, "onset", "Stimulus onset (first flip showing the image), from the first flip "
	       "of the session's first trial", "s");
	column(doc, "duration", "Stimulus exposure from its onset flip to its offset flip", "s");
	column(doc, "response_time", "Time from the stimulus onset flip to the key press", "s");
	for (size_t i = 0; i < L->n; i++)
		sidecar_column(doc, &L->v[i], seen, choices, nch);
	cJSON_AddStringToObject(doc, "TextEscapes", "In text cells a tab, newline, carriage return "
				"and backslash are written as \\t, \\n, \\r and \\\\");
	/* Presentation settings (BIDS "Task" metadata, StimulusPresentation object: distances in
	 * metres, resolution in pixels; field names recalled from the specification, v1.8+). */
	cJSON *sp = cJSON_AddObjectToObject(doc, "StimulusPresentation");
	cJSON_AddStringToObject(sp, "SoftwareName", "tachist");
	cJSON_AddStringToObject(sp, "SoftwareVersion", ss->version ? ss->version : TACHIST_VERSION);
	if (ss->distance_cm > 0)
		cJSON_AddNumberToObject(sp, "ScreenDistance", ss->distance_cm / 100.0);
	double hz = ss->refresh_hz > 0 ? ss->refresh_hz : ss->nominal_hz;
	if (hz > 0)
		cJSON_AddNumberToObject(sp, "ScreenRefreshRate", hz);
	if (ss->screen_width_px > 0 && ss->screen_height_px > 0) {
		int px[2] = {ss->screen_width_px, ss->screen_height_px};
		cJSON_AddItemToObject(sp, "ScreenResolution", cJSON_CreateIntArray(px, 2));
	}
	if (ss->screen_width_cm > 0 && ss->screen_height_cm > 0) {
		double m[2] = {ss->screen_width_cm / 100.0, ss->screen_height_cm / 100.0};
		cJSON_AddItemToObject(sp, "ScreenSize", cJSON_CreateDoubleArray(m, 2));
	}
	cJSON_AddItemToObject(doc, "Session", json_session(ss));
	return doc;
}

/* Opens the session's _beh.tsv; writes its header. */
static FILE *bids_open(const char *tsv, const struct layout *L, struct buf *b, char **err)
{
	FILE *f = fopen(tsv, "w");
	if (!f) {
		if (err)
			*err = xasprintf("%s: %s", tsv, strerror(errno));
		return NULL;
	}
	/* BIDS "Tabular files": a header row, tab separated; onset and duration come first. */
	buf_str(b, "onset\tduration\tresponse_time");
	for (size_t i = 0; i < L->n; i++) {
		buf_chr(b, '\t');
		bids_text(b, L->v[i].name);
	}
	buf_chr(b, '\n');
	return f;
}

/* One session's _beh.tsv (streamed) and its sidecar. */
static int bids_session(struct store *s, const struct store_session *ss, const char *dir,
			const char *ses, const char *task, size_t *rows, char **err)
{
	char *folder = xasprintf("%s/sub-%s/ses-%s/beh", dir, ss->subject, ses);
	char *base = xasprintf("%s/sub-%s_ses-%s_task-%s_beh", folder, ss->subject, ses, task);
	char *tsv = xasprintf("%s.tsv", base), *json = xasprintf("%s.json", base);
	struct store_iter *it = NULL;
	FILE *f = NULL;
	struct layout L = {0};
	struct seen *seen = NULL;
	struct buf b = {0};
	int ret = -1;
	if (mkdirs(folder, err) || store_iter_open(s, ss->id, NULL, &it, err))
		goto done;
	size_t nl;
	const char *const *names = store_iter_label_names(it, &nl);
	layout_build(&L, names, nl);
	seen = xcalloc(nl ? nl : 1, sizeof *seen);
	if (!(f = bids_open(tsv, &L, &b, err)))
		goto done;
	const struct store_trial *t;
	const struct store_session *cs;
	bool first = true;
	int64_t t0 = 0;
	int rc;
	while ((rc = store_iter_next(it, &t, &cs, err)) == 1) {
		if (first) {
			t0 = t->start_ns ? t->start_ns : t->onset_ns;
			first = false;
		}
		bids_row(&b, &L, t, cs, t0, seen);
		(*rows)++;
		if (b.n >= 65536 && write_buf(&b, f, err))
			goto done;
	}
	if (rc < 0 || write_buf(&b, f, err))
		goto done;
	int cr = fclose(f);
	f = NULL;
	if (cr) {
		if (err)
			*err = xasprintf("%s: %s", tsv, strerror(errno));
		goto done;
	}
	size_t nch;
	const char *const *choices = store_iter_choices(it, 0, &nch);
	cJSON *doc = bids_sidecar(ss, task, &L, seen, choices, nch);
	ret = write_json_file(json, doc, err);
	cJSON_Delete(doc);
done:
	if (f)
		fclose(f);
	for (size_t i = 0; seen && i < L.nl; i++)
		free_vec(seen[i].v, seen[i].n);
	free(seen);
	layout_free(&L);
	store_iter_close(it);
	free(b.p);
	free(folder);
	free(base);
	free(tsv);
	free(json);
	return ret;
}

/* A session whose presentation settings were not recorded gets them from its stored rig text. */
static void fill_from_rig(struct store_session *ss)
{
	if (ss->distance_cm > 0 || !ss->rig_text)
		return;
	struct rig r;
	struct diag_list d;
	diag_init(&d);
	if (rig_parse("rig", ss->rig_text, &r, &d) == 0) {
		ss->screen_width_cm = r.width_cm;
		ss->screen_height_cm = r.height_cm;
		ss->screen_width_px = r.width_px;
		ss->screen_height_px = r.height_px;
		ss->distance_cm = r.distance_cm;
		if (ss->nominal_hz <= 0)
			ss->nominal_hz = r.refresh_hz;
	}
	rig_clear(&r);
	diag_clear(&d);
}

static int write_description(const char *dir, const struct store_session *v, size_t n,
			     char **err)
{
	/* dataset_description.json (BIDS "Modality agnostic files": Name and BIDSVersion are
	 * required). */
	cJSON *dd = cJSON_CreateObject();
	const char *name = n && v[0].protocol_name ? v[0].protocol_name : "tachist sessions";
	for (size_t i = 1; i < n; i++)
		if (!v[i].protocol_name || !v[0].protocol_name ||
		    strcmp(v[i].protocol_name, v[0].protocol_name))
			name = "tachist sessions";
	cJSON_AddStringToObject(dd, "Name", name);
	cJSON_AddStringToObject(dd, "BIDSVersion", "1.9.0");
	cJSON_AddStringToObject(dd, "DatasetType", "raw");
	cJSON *gb = cJSON_AddArrayToObject(dd, "GeneratedBy");
	cJSON *me = cJSON_CreateObject();
	cJSON_AddStringToObject(me, "Name", "tachist");
	cJSON_AddStringToObject(me, "Version", TACHIST_VERSION);
	cJSON_AddItemToArray(gb, me);
	char *path = xasprintf("%s/dataset_description.json", dir);
	int rc = write_json_file(path, dd, err);
	free(path);
	cJSON_Delete(dd);
	return rc;
}

/* Reads a whole small text file; NULL when it does not exist. *ERR on other failures. */
static char *slurp(const char *path, bool *failed, char **err)
{
	*failed = false;
	FILE *f = fopen(path, "r");
	if (!f) {
		if (errno == ENOENT)
			return NULL;
		*failed = true;
		if (err)
			*err = xasprintf("%s: %s", path, strerror(errno));
		return NULL;
	}
	struct buf b = {0};
	char tmp[4096];
	size_t k;
	while ((k = fread(tmp, 1, sizeof tmp, f)) > 0)
		buf_put(&b, tmp, k);
	fclose(f);
	buf_chr(&b, '\0');
	return b.p;
}

/* True when TEXT (a participants.tsv) has a row whose first cell is ID. */
static bool has_participant(const char *text, const char *id)
{
	size_t n = strlen(id);
	for (const char *line = text; line && *line; line = strchr(line, '\n'), line = line ? line + 1 : NULL)
		if (!strncmp(line, id, n) && (line[n] == '\t' || line[n] == '\n' || line[n] == '\r' ||
					      !line[n]))
			return true;
	return false;
}

/* participants.tsv (BIDS "Participants file": participant_id first, one row per subject):
 * the rows already in the folder are kept, with their columns, and subjects not yet listed are
 * added (n/a in the other columns). */
static int write_participants(const char *dir, const struct store_session *v, size_t n,
			      char **err)
{
	char *path = xasprintf("%s/participants.tsv", dir);
	bool failed;
	char *old = slurp(path, &failed, err);
	int rc = -1;
	if (failed)
		goto done;
	if (old && strncmp(old, "participant_id", 14)) {
		if (err)
			*err = xasprintf("%s: does not start with participant_id; not merged", path);
		goto done;
	}
	struct buf b = {0};
	size_t ncols = 1;
	if (old) {
		buf_str(&b, old);
		if (b.n && b.p[b.n - 1] != '\n')
			buf_chr(&b, '\n');
		for (const char *c = old; *c && *c != '\n'; c++)
			ncols += *c == '\t';
	} else {
		buf_str(&b, "participant_id\n");
	}
	for (size_t i = 0; i < n; i++) {
		char *id = xasprintf("sub-%s", v[i].subject);
		buf_chr(&b, '\0');
		b.n--;
		if (!has_participant(b.p, id)) {
			buf_str(&b, id);
			for (size_t k = 1; k < ncols; k++)
				buf_str(&b, "\tn/a");
			buf_chr(&b, '\n');
		}
		free(id);
	}
	buf_chr(&b, '\0');
	rc = write_text_file(path, b.p, err);
	free(b.p);
	if (rc)
		goto done;
	/* participants.json: kept when present (it may describe more columns). */
	char *jpath = xasprintf("%s/participants.json", dir);
	char *jold = slurp(jpath, &failed, NULL);
	cJSON *pj = jold ? cJSON_Parse(jold) : NULL;
	if (!cJSON_IsObject(pj)) {
		cJSON_Delete(pj);
		pj = cJSON_CreateObject();
	}
	if (!cJSON_GetObjectItemCaseSensitive(pj, "participant_id"))
		column(pj, "participant_id", "Pseudonymous subject ID as stored by tachist (letters "
		       "and digits)", NULL);
	rc = write_json_file(jpath, pj, err);
	cJSON_Delete(pj);
	free(jold);
	free(jpath);
done:
	free(old);
	free(path);
	return rc;
}

/* Session labels: 8 hex digits of the UUID, all 32 when a subject has two alike. */
static char **session_labels(const struct store_session *v, size_t n)
{
	char **ses = xcalloc(n ? n : 1, sizeof *ses);
	for (size_t i = 0; i < n; i++) {
		ses[i] = uuid_hex(v[i].id, 8);
		for (size_t j = 0; j < n; j++)
			if (j != i && !strcmp(v[i].subject, v[j].subject) &&
			    !strncmp(v[i].id, v[j].id, 8)) {
				free(ses[i]);
				ses[i] = uuid_hex(v[i].id, 32);
				break;
			}
	}
	return ses;
}

int export_bids(struct store *s, const char *session, const char *subject, const char *dir,
		struct export_stats *st, char **err)
{
	struct export_stats stats = {0};
	struct store_session *v = NULL;
	size_t n = 0;
	if (session) {
		v = xcalloc(1, sizeof *v);
		if (store_session_get(s, session, v, err)) {
			free(v);
			return -1;
		}
		n = 1;
	} else if (store_sessions_list(s, subject, &v, &n, err)) {
		return -1;
	}
	int ret = -1;
	char **ses = session_labels(v, n);
	for (size_t i = 0; i < n; i++)
		if (!store_subject_valid(v[i].subject)) {
			if (err)
				*err = xasprintf("session %s: subject '%s' is not a valid BIDS label",
						 v[i].id, v[i].subject);
			goto done;
		}
	if (mkdirs(dir, err) || write_description(dir, v, n, err))
		goto done;
	stats.files++;
	if (write_participants(dir, v, n, err))
		goto done;
	stats.files += 2;
	for (size_t i = 0; i < n; i++) {
		fill_from_rig(&v[i]);
		char *task = bids_label(v[i].protocol_name, "task");
		int rc = bids_session(s, &v[i], dir, ses[i], task, &stats.rows, err);
		free(task);
		if (rc)
			goto done;
		stats.sessions++;
		stats.files += 2;
	}
	ret = 0;
done:
	free_vec(ses, n);
	store_sessions_free(v, n);
	if (st)
		*st = stats;
	return ret;
}
