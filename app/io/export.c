/* export — trial tables out of the store (see export.h).
 *
 * Each row is built in a small growing buffer and written with one fwrite, so the cost per row is
 * the store's step plus the formatting; the buffer is the only memory that lives across rows.
 * Column order is fixed by DESIGN.md: the standard columns up to `source`, then the label columns
 * (the union over the exported sessions, in order of first appearance), then the rest. A label
 * whose name equals a standard column is written as `label_<name>`.
 *
 * Called by `tachist export` and the console's export screen. */
#include <errno.h>
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

static void buf_int(struct buf *b, int64_t v)
{
	char tmp[24];
	char *e = tmp + sizeof tmp, *q = e;
	uint64_t u = v < 0 ? (uint64_t)0 - (uint64_t)v : (uint64_t)v;
	do {
		*--q = (char)('0' + u % 10);
		u /= 10;
	} while (u);
	if (v < 0)
		*--q = '-';
	buf_put(b, q, (size_t)(e - q));
}

void export_number(char *buf, size_t len, double v)
{
	if (!isfinite(v)) {
		snprintf(buf, len, "%s", isnan(v) ? "NaN" : v > 0 ? "Infinity" : "-Infinity");
		return;
	}
	if (v == floor(v) && fabs(v) < 1e15) {
		snprintf(buf, len, "%.0f", v);
		return;
	}
	/* 15 significant digits reads back exactly for most values; 17 always does (IEEE 754
	 * binary64 needs at most 17 decimal digits to round-trip). */
	for (int prec = 15; prec <= 17; prec++) {
		snprintf(buf, len, "%.*g", prec, v);
		if (strtod(buf, NULL) == v)
			return;
	}
}

static void buf_num(struct buf *b, double v)
{
	char tmp[40];
	export_number(tmp, sizeof tmp, v);
	buf_str(b, tmp);
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

/* ---- columns ---- */

static const char *const head_cols[] = {
	"session_id", "subject", "block", "block_trial", "trial", "image", "category", "level",
	"source",
};
static const char *const tail_cols[] = {
	"response_key", "response", "correct", "rt_ms", "timed_out", "frames_planned",
	"frames_actual", "dropped_frames", "timing_ok", "onset_ns", "staircase",
};
#define NHEAD (sizeof head_cols / sizeof head_cols[0])
#define NTAIL (sizeof tail_cols / sizeof tail_cols[0])

static bool is_standard(const char *name)
{
	static const char *const more[] = {"onset", "duration", "trial_type", "stim_file",
					   "response_time"};
	for (size_t i = 0; i < NHEAD; i++)
		if (!strcmp(name, head_cols[i]))
			return true;
	for (size_t i = 0; i < NTAIL; i++)
		if (!strcmp(name, tail_cols[i]))
			return true;
	for (size_t i = 0; i < sizeof more / sizeof more[0]; i++)
		if (!strcmp(name, more[i]))
			return true;
	return false;
}

/* Header names of the label columns (malloc'd vector of malloc'd strings). */
static char **label_headers(const char *const *names, size_t n)
{
	char **v = xcalloc(n ? n : 1, sizeof *v);
	for (size_t i = 0; i < n; i++)
		v[i] = is_standard(names[i]) ? xasprintf("label_%s", names[i]) : xstrdup(names[i]);
	return v;
}

static void free_vec(char **v, size_t n)
{
	for (size_t i = 0; i < n; i++)
		free(v[i]);
	free(v);
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

static void delimited_row(struct buf *b, const struct store_trial *t, char d, const char *eol)
{
	const bool z = true;   /* neutralise text cells */
	buf_cell(b, t->session_id, d, z);
	buf_chr(b, d);
	buf_cell(b, t->subject, d, z);
	buf_chr(b, d);
	buf_int(b, t->block);
	buf_chr(b, d);
	buf_int(b, t->block_trial);
	buf_chr(b, d);
	buf_int(b, t->trial);
	buf_chr(b, d);
	buf_cell(b, t->image, d, z);
	buf_chr(b, d);
	buf_cell(b, t->category, d, z);
	buf_chr(b, d);
	if (t->has_level)
		buf_num(b, t->level);
	buf_chr(b, d);
	buf_cell(b, t->source, d, z);
	for (size_t k = 0; k < t->nlabels; k++) {
		buf_chr(b, d);
		buf_cell(b, t->label_values[k], d, z);
	}
	buf_chr(b, d);
	buf_cell(b, t->response_key, d, z);
	buf_chr(b, d);
	buf_cell(b, t->response_category, d, z);
	buf_chr(b, d);
	if (t->correct >= 0)
		buf_int(b, t->correct);
	buf_chr(b, d);
	if (t->has_rt)
		buf_num(b, t->rt_ms);
	buf_chr(b, d);
	buf_int(b, t->timed_out);
	buf_chr(b, d);
	buf_int(b, t->frames_planned);
	buf_chr(b, d);
	buf_int(b, t->frames_actual);
	buf_chr(b, d);
	buf_int(b, t->dropped_frames);
	buf_chr(b, d);
	buf_int(b, t->timing_ok);
	buf_chr(b, d);
	buf_int(b, t->onset_ns);
	buf_chr(b, d);
	if (t->staircase >= 0)
		buf_int(b, t->staircase);
	buf_str(b, eol);
}

static void delimited_header(struct buf *b, char **labels, size_t nl, char d, const char *eol)
{
	for (size_t i = 0; i < NHEAD; i++) {
		if (i)
			buf_chr(b, d);
		buf_str(b, head_cols[i]);
	}
	for (size_t i = 0; i < nl; i++) {
		buf_chr(b, d);
		buf_cell(b, labels[i], d, true);
	}
	for (size_t i = 0; i < NTAIL; i++) {
		buf_chr(b, d);
		buf_str(b, tail_cols[i]);
	}
	buf_str(b, eol);
}

/* ---- JSON ---- */

static void json_add_text(cJSON *o, const char *k, const char *v)
{
	if (v)
		cJSON_AddStringToObject(o, k, v);
	else
		cJSON_AddNullToObject(o, k);
}

/* int64 as its exact decimal text (a JSON number; cJSON's doubles would round above 2^53). */
static void json_add_int(cJSON *o, const char *k, int64_t v)
{
	char tmp[24];
	snprintf(tmp, sizeof tmp, "%" PRId64, v);
	cJSON_AddRawToObject(o, k, tmp);
}

static void json_add_num(cJSON *o, const char *k, bool has, double v)
{
	if (!has || !isfinite(v)) {
		cJSON_AddNullToObject(o, k);
		return;
	}
	char tmp[40];
	export_number(tmp, sizeof tmp, v);
	cJSON_AddRawToObject(o, k, tmp);
}

static cJSON *json_row(const struct store_trial *t, char **labels)
{
	cJSON *o = cJSON_CreateObject();
	json_add_text(o, "session_id", t->session_id);
	json_add_text(o, "subject", t->subject);
	json_add_int(o, "block", t->block);
	json_add_int(o, "block_trial", t->block_trial);
	json_add_int(o, "trial", t->trial);
	json_add_text(o, "image", t->image);
	json_add_text(o, "category", t->category);
	json_add_num(o, "level", t->has_level, t->level);
	json_add_text(o, "source", t->source);
	for (size_t k = 0; k < t->nlabels; k++)
		json_add_text(o, labels[k], t->label_values[k]);
	json_add_text(o, "response_key", t->response_key);
	json_add_text(o, "response", t->response_category);
	if (t->correct >= 0)
		json_add_int(o, "correct", t->correct);
	else
		cJSON_AddNullToObject(o, "correct");
	json_add_num(o, "rt_ms", t->has_rt, t->rt_ms);
	json_add_int(o, "timed_out", t->timed_out);
	json_add_int(o, "frames_planned", t->frames_planned);
	json_add_int(o, "frames_actual", t->frames_actual);
	json_add_int(o, "dropped_frames", t->dropped_frames);
	json_add_int(o, "timing_ok", t->timing_ok);
	json_add_int(o, "onset_ns", t->onset_ns);
	if (t->staircase >= 0)
		json_add_int(o, "staircase", t->staircase);
	else
		cJSON_AddNullToObject(o, "staircase");
	return o;
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
	char **labels = label_headers(names, nl);
	char d = f == EXPORT_TSV ? '\t' : ',';
	/* RFC 4180 section 2 rule 1: records end with CRLF. TSV (IANA text/tab-separated-values)
	 * lines end with LF. */
	const char *eol = f == EXPORT_CSV ? "\r\n" : "\n";
	struct buf b = {0};
	int ret = -1;
	if (f == EXPORT_JSON)
		buf_str(&b, "[");
	else
		delimited_header(&b, labels, nl, d, eol);
	const struct store_trial *t;
	const struct store_session *cur = NULL, *ss;
	int rc;
	while ((rc = store_iter_next(it, &t, &ss, err)) == 1) {
		if (ss != cur) {
			stats.sessions++;
			cur = ss;
		}
		if (f == EXPORT_JSON) {
			cJSON *o = json_row(t, labels);
			char *txt = cJSON_PrintUnformatted(o);
			cJSON_Delete(o);
			buf_str(&b, stats.rows ? ",\n" : "\n");
			buf_str(&b, txt);
			cJSON_free(txt);
		} else {
			delimited_row(&b, t, d, eol);
		}
		stats.rows++;
		if (b.n >= 65536 && write_buf(&b, out, err))
			goto done;
	}
	if (rc < 0)
		goto done;
	if (f == EXPORT_JSON)
		buf_str(&b, stats.rows ? "\n]\n" : "]\n");
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
	free_vec(labels, nl);
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

static void column(cJSON *doc, const char *name, const char *desc, const char *units)
{
	cJSON *c = cJSON_AddObjectToObject(doc, name);
	cJSON_AddStringToObject(c, "Description", desc);
	if (units)
		cJSON_AddStringToObject(c, "Units", units);
}

static void levels_from(cJSON *doc, const char *name, const char *const *values, size_t n,
			const char *what)
{
	cJSON *c = cJSON_GetObjectItemCaseSensitive(doc, name);
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

static void levels_binary(cJSON *doc, const char *name, const char *one, const char *zero)
{
	cJSON *c = cJSON_GetObjectItemCaseSensitive(doc, name);
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

static const char bids_eol[] = "\n";

static void bids_cell_text(struct buf *b, const char *v)
{
	buf_chr(b, '\t');
	if (v)
		buf_cell(b, v, '\t', false);
	else
		buf_str(b, "n/a");   /* BIDS "Tabular files": missing values are n/a */
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

static void bids_cell_seconds(struct buf *b, bool has, double v)
{
	buf_chr(b, '\t');
	if (has && isfinite(v))
		buf_seconds(b, v);
	else
		buf_str(b, "n/a");
}

static void bids_cell_num(struct buf *b, bool has, double v)
{
	buf_chr(b, '\t');
	if (has && isfinite(v))
		buf_num(b, v);
	else
		buf_str(b, "n/a");
}

static void bids_cell_int(struct buf *b, bool has, int64_t v)
{
	buf_chr(b, '\t');
	if (has)
		buf_int(b, v);
	else
		buf_str(b, "n/a");
}

/* The sidecar: column descriptions with units and levels, then the presentation settings. */
static cJSON *bids_sidecar(const struct store_session *ss, const char *task, char **labels,
			   size_t nl, struct seen *seen, const char *const *choices, size_t nch)
{
	cJSON *doc = cJSON_CreateObject();
	cJSON_AddStringToObject(doc, "TaskName", task);
	column(doc, "onset", "Stimulus onset (first flip showing the image), from the first flip "
	       "of the session's first trial", "s");
	column(doc, "duration", "Stimulus exposure from its onset flip to its offset flip", "s");
	column(doc, "trial_type", "True category of the image (the stimulus list's category)",
	       NULL);
	column(doc, "stim_file", "Image as written in the stimulus list (relative to the list "
	       "file; images are not copied into this dataset)", NULL);
	column(doc, "block", "Block index in the session plan, from 0", NULL);
	column(doc, "block_trial", "Trial index within the block, from 0", NULL);
	column(doc, "trial", "Trial index within the session, from 0, in the order shown", NULL);
	column(doc, "level", "Graded variable of the image (for example a perturbation budget), "
	       "as given in the stimulus list", "arbitrary");
	column(doc, "source", "Clean image the shown one was made from, as in the stimulus list",
	       NULL);
	for (size_t i = 0; i < nl; i++) {
		column(doc, labels[i], "Label column carried over from the stimulus list", NULL);
		if (!seen[i].many && seen[i].n)
			levels_from(doc, labels[i], (const char *const *)seen[i].v, seen[i].n,
				    "value");
	}
	column(doc, "response_key", "Key the observer pressed (n/a when no answer)", NULL);
	column(doc, "response", "Category the observer chose (n/a when no answer)", NULL);
	column(doc, "correct", "Whether the chosen category was the true one (n/a when no answer)",
	       NULL);
	column(doc, "response_time", "Time from the stimulus onset flip to the key press", "s");
	column(doc, "timed_out", "The response window closed without an answer", NULL);
	column(doc, "frames_planned", "Stimulus frames planned", "frames");
	column(doc, "frames_actual", "Stimulus frames shown, from the flip times", "frames");
	column(doc, "dropped_frames", "Frames lost during the trial (an interval over 1.5 refresh "
	       "periods)", "frames");
	column(doc, "timing_ok", "Exposure exact and no frame dropped during the stimulus epochs",
	       NULL);
	column(doc, "staircase", "Adaptive staircase that chose the level (n/a for fixed levels)",
	       NULL);
	levels_from(doc, "trial_type", choices, nch, "category");
	levels_from(doc, "response", choices, nch, "chose category");
	levels_binary(doc, "correct", "correct", "incorrect");
	levels_binary(doc, "timed_out", "no answer in the response window", "answered in time");
	levels_binary(doc, "timing_ok", "exposure exact", "timing fault");

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
	cJSON_AddStringToObject(doc, "TimingMode", ss->timing_mode ? ss->timing_mode : "unknown");
	if (ss->refresh_hz > 0)
		cJSON_AddNumberToObject(doc, "MeasuredRefreshRate", ss->refresh_hz);
	if (ss->nominal_hz > 0)
		cJSON_AddNumberToObject(doc, "NominalRefreshRate", ss->nominal_hz);
	if (ss->stim_deg > 0)
		cJSON_AddNumberToObject(doc, "StimulusSizeDegrees", ss->stim_deg);
	cJSON_AddStringToObject(doc, "SessionID", ss->id);
	cJSON_AddStringToObject(doc, "SessionStatus", store_status_name(ss->status));
	if (ss->started_utc)
		cJSON_AddStringToObject(doc, "SessionStart", ss->started_utc);
	if (ss->ended_utc)
		cJSON_AddStringToObject(doc, "SessionEnd", ss->ended_utc);
	char seed[24];
	snprintf(seed, sizeof seed, "%" PRIu64, ss->seed);
	cJSON_AddStringToObject(doc, "Seed", seed);
	if (ss->protocol_sha256[0])
		cJSON_AddStringToObject(doc, "ProtocolSHA256", ss->protocol_sha256);
	if (ss->stimuli_sha256[0])
		cJSON_AddStringToObject(doc, "StimuliSHA256", ss->stimuli_sha256);
	if (ss->observer)
		cJSON_AddStringToObject(doc, "Observer", ss->observer);
	return doc;
}

/* One session's _beh.tsv (streamed) and its sidecar. */
static int bids_session(struct store *s, const struct store_session *ss, const char *dir,
			const char *sub, const char *ses, const char *task, size_t *rows,
			char **err)
{
	char *folder = xasprintf("%s/sub-%s/ses-%s/beh", dir, sub, ses);
	char *base = xasprintf("%s/sub-%s_ses-%s_task-%s_beh", folder, sub, ses, task);
	char *tsv = xasprintf("%s.tsv", base), *json = xasprintf("%s.json", base);
	struct store_iter *it = NULL;
	FILE *f = NULL;
	char **labels = NULL;
	size_t nl = 0;
	struct seen *seen = NULL;
	struct buf b = {0};
	int ret = -1;
	if (mkdirs(folder, err))
		goto done;
	if (store_iter_open(s, ss->id, NULL, &it, err))
		goto done;
	const char *const *names = store_iter_label_names(it, &nl);
	labels = label_headers(names, nl);
	seen = xcalloc(nl ? nl : 1, sizeof *seen);
	f = fopen(tsv, "w");
	if (!f) {
		if (err)
			*err = xasprintf("%s: %s", tsv, strerror(errno));
		goto done;
	}
	/* BIDS "Tabular files": a header row, tab separated; onset and duration come first. */
	buf_str(&b, "onset\tduration\ttrial_type\tstim_file\tblock\tblock_trial\ttrial\tlevel"
		"\tsource");
	for (size_t i = 0; i < nl; i++) {
		buf_chr(&b, '\t');
		buf_cell(&b, labels[i], '\t', false);
	}
	buf_str(&b, "\tresponse_key\tresponse\tcorrect\tresponse_time\ttimed_out\tframes_planned"
		"\tframes_actual\tdropped_frames\ttiming_ok\tstaircase");
	buf_str(&b, bids_eol);
	const struct store_trial *t;
	bool first = true;
	int64_t t0 = 0;
	int rc;
	while ((rc = store_iter_next(it, &t, NULL, err)) == 1) {
		if (first) {
			t0 = t->start_ns ? t->start_ns : t->onset_ns;
			first = false;
		}
		bool timed = t->onset_ns != 0;
		if (timed)
			buf_seconds(&b, (double)(t->onset_ns - t0) / 1e9);
		else
			buf_str(&b, "n/a");
		bids_cell_seconds(&b, timed && t->offset_ns > t->onset_ns,
				  (double)(t->offset_ns - t->onset_ns) / 1e9);
		bids_cell_text(&b, t->category);
		bids_cell_text(&b, t->image);
		bids_cell_int(&b, true, t->block);
		bids_cell_int(&b, true, t->block_trial);
		bids_cell_int(&b, true, t->trial);
		bids_cell_num(&b, t->has_level, t->level);
		bids_cell_text(&b, t->source);
		for (size_t k = 0; k < nl; k++) {
			bids_cell_text(&b, t->label_values[k]);
			seen_add(&seen[k], t->label_values[k]);
		}
		bids_cell_text(&b, t->response_key);
		bids_cell_text(&b, t->response_category);
		bids_cell_int(&b, t->correct >= 0, t->correct);
		bids_cell_seconds(&b, t->has_rt, t->rt_ms / 1000.0);
		bids_cell_int(&b, true, t->timed_out);
		bids_cell_int(&b, true, t->frames_planned);
		bids_cell_int(&b, true, t->frames_actual);
		bids_cell_int(&b, true, t->dropped_frames);
		bids_cell_int(&b, true, t->timing_ok);
		bids_cell_int(&b, t->staircase >= 0, t->staircase);
		buf_str(&b, bids_eol);
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
	cJSON *doc = bids_sidecar(ss, task, labels, nl, seen, choices, nch);
	ret = write_json_file(json, doc, err);
	cJSON_Delete(doc);
done:
	if (f)
		fclose(f);
	for (size_t i = 0; seen && i < nl; i++)
		free_vec(seen[i].v, seen[i].n);
	free(seen);
	free_vec(labels, nl);
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
	char **ses = xcalloc(n ? n : 1, sizeof *ses);
	if (mkdirs(dir, err))
		goto done;
	/* Session labels: 8 hex digits of the UUID, all 32 when a subject has two alike. */
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
	if (rc)
		goto done;
	stats.files++;
	/* participants.tsv: participant_id first (BIDS "Participants file"), one row per subject. */
	struct buf b = {0};
	buf_str(&b, "participant_id\n");
	for (size_t i = 0; i < n; i++) {
		bool dup = false;
		for (size_t j = 0; j < i && !dup; j++)
			dup = !strcmp(v[i].subject, v[j].subject);
		if (dup)
			continue;
		buf_str(&b, "sub-");
		buf_str(&b, v[i].subject);
		buf_chr(&b, '\n');
	}
	buf_chr(&b, '\0');
	path = xasprintf("%s/participants.tsv", dir);
	rc = write_text_file(path, b.p, err);
	free(path);
	free(b.p);
	if (rc)
		goto done;
	stats.files++;
	cJSON *pj = cJSON_CreateObject();
	column(pj, "participant_id", "Pseudonymous subject ID as stored by tachist (letters and "
	       "digits)", NULL);
	path = xasprintf("%s/participants.json", dir);
	rc = write_json_file(path, pj, err);
	free(path);
	cJSON_Delete(pj);
	if (rc)
		goto done;
	stats.files++;
	for (size_t i = 0; i < n; i++) {
		if (!store_subject_valid(v[i].subject)) {
			if (err)
				*err = xasprintf("session %s: subject '%s' is not a valid BIDS label",
						 v[i].id, v[i].subject);
			goto done;
		}
		fill_from_rig(&v[i]);
		char *task = bids_label(v[i].protocol_name, "task");
		rc = bids_session(s, &v[i], dir, v[i].subject, ses[i], task, &stats.rows, err);
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
