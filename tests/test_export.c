/* test_export — CSV/TSV/JSON tables parsed back (libcsv, cJSON) equal the database, cell quoting
 * (RFC 4180) and formula neutralisation (OWASP), number text that reads back exactly, and the
 * BIDS folder's files and conventions. The database is built by hand through the store. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>
#include <cmocka.h>

#include <cJSON.h>
#include <csv.h>

#include "export.h"
#include "protocol.h"
#include "stimlist.h"
#include "store.h"

static char dir[256];
static char *cats[3] = {"cat", "=cmd", "dog, \"big\""};
static char *keys[3] = {"f", "j", "k"};
static char *lnames[2] = {"set", "note"};
static char *notes[8] = {"plain", "has, comma", "quote \"q\"", "line\nbreak", "-minus", "@at",
			 "\ttab", "+plus"};

/* Builds DB with two sessions (subjects S1 and S2) of 8 and 3 trials. */
static int setup(void **state)
{
	const char *t = getenv("TMPDIR");
	snprintf(dir, sizeof dir, "%s/test_export.XXXXXX", t && *t ? t : "/tmp");
	if (!mkdtemp(dir))
		return -1;
	struct protocol p;
	memset(&p, 0, sizeof p);
	p.name = "unit-task_1";
	p.nchoices = 3;
	for (int i = 0; i < 3; i++) {
		p.choices[i].category = cats[i];
		p.choices[i].key = keys[i];
	}
	struct protocol_block blk = {0};
	blk.name = "main";
	p.blocks = &blk;
	p.nblocks = 1;
	struct stim items[8];
	char *labels[8][2];
	char img[8][32];
	for (int i = 0; i < 8; i++) {
		memset(&items[i], 0, sizeof items[i]);
		snprintf(img[i], sizeof img[i], i % 2 ? "im,%d.png" : "im\"%d\".png", i);
		items[i].image = img[i];
		items[i].choice = i % 3;
		items[i].category = cats[i % 3];
		items[i].has_level = i != 3;
		items[i].level = i == 5 ? -0.25 : 0.1 * i;
		items[i].source = i % 2 ? NULL : "clean.png";
		labels[i][0] = i % 2 ? "A" : "B";
		labels[i][1] = notes[i];
		items[i].labels = labels[i];
	}
	struct stimlist l;
	memset(&l, 0, sizeof l);
	l.label_names = lnames;
	l.nlabels = 2;
	l.items = items;
	l.n = 8;
	char *db = xasprintf("%s/x.db", dir);
	struct store *s;
	char *err = NULL;
	if (store_open(db, &s, &err))
		return -1;
	free(db);
	int64_t flips[3] = {10, 20, 30};
	for (int k = 0; k < 2; k++) {
		struct store_session ss = {0};
		ss.subject = xstrdup(k ? "S2" : "S1");
		ss.timing_mode = xstrdup("simulated");
		ss.protocol_name = xstrdup(p.name);
		if (k == 0) {
			ss.distance_cm = 57;
			ss.screen_width_cm = 50;
			ss.screen_height_cm = 30;
			ss.screen_width_px = 1600;
			ss.screen_height_px = 900;
			ss.nominal_hz = 100;
		} else {   /* settings only in the rig text, as a run that did not describe them */
			ss.rig_text = xstrdup("[screen]\nwidth_cm = 40\nheight_cm = 30\n"
					      "width_px = 1024\nheight_px = 768\ndistance_cm = 80\n"
					      "refresh_hz = 85\n");
		}
		if (store_session_begin(s, &ss, &err))
			return -1;
		for (int i = 0; i < (k ? 3 : 8); i++) {
			struct trial_record r;
			memset(&r, 0, sizeof r);
			r.trial = i;
			r.block_trial = i;
			r.stim = i;
			r.choice = i % 3;
			r.has_level = items[i].has_level;
			r.level = items[i].level;
			r.staircase = i == 2 ? 0 : -1;
			r.repeat_of = i == 7 ? 1 : -1;
			r.anticipation = i == 6;
			r.response = i == 4 ? -1 : (i + k) % 3;
			r.correct = r.response < 0 ? -1 : r.response == r.choice;
			r.timed_out = r.response < 0;
			if (r.response >= 0) {
				strcpy(r.response_key, keys[r.response]);
				r.has_rt = true;
				r.rt_ms = 0.1 + 300 * (i + 1) / 7.0;   /* needs 17 digits sometimes */
			}
			r.frames_planned = 20;
			r.frames_actual = 20;
			r.timing_ok = true;
			r.start_ns = 1000000000LL * (i + 1);
			r.onset_ns = r.start_ns + 500000000;
			r.offset_ns = r.onset_ns + 200000000;
			r.flips = flips;
			r.nflips = 3;
			if (store_trial_put(s, ss.id, &r, &p, &l, &err))
				return -1;
		}
		store_session_end(s, ss.id, STORE_COMPLETE, NULL);
		store_session_clear(&ss);
	}
	*state = s;
	return 0;
}

static int teardown(void **state)
{
	store_close(*state);
	char cmd[400];
	snprintf(cmd, sizeof cmd, "rm -rf '%s'", dir);
	return system(cmd) == 0 ? 0 : -1;
}

/* ---- libcsv collection ---- */

struct table {
	char ***rows;
	size_t *ncols;
	size_t nrows;
	char **cur;
	size_t ncur;
};

static void on_field(void *f, size_t len, void *data)
{
	struct table *t = data;
	t->cur = xrealloc(t->cur, (t->ncur + 1) * sizeof *t->cur);
	char *v = xmalloc(len + 1);
	memcpy(v, f ? f : "", len);
	v[len] = '\0';
	t->cur[t->ncur++] = v;
}

static void on_row(int c, void *data)
{
	(void)c;
	struct table *t = data;
	t->rows = xrealloc(t->rows, (t->nrows + 1) * sizeof *t->rows);
	t->ncols = xrealloc(t->ncols, (t->nrows + 1) * sizeof *t->ncols);
	t->rows[t->nrows] = t->cur;
	t->ncols[t->nrows++] = t->ncur;
	t->cur = NULL;
	t->ncur = 0;
}

static int no_space(unsigned char c)
{
	(void)c;
	return 0;   /* keep every byte of unquoted cells (libcsv trims blanks by default) */
}

static void parse_table(const char *text, size_t len, char delim, struct table *t)
{
	memset(t, 0, sizeof *t);
	struct csv_parser p;
	assert_int_equal(csv_init(&p, CSV_STRICT | CSV_STRICT_FINI | CSV_APPEND_NULL), 0);
	csv_set_delim(&p, (unsigned char)delim);
	csv_set_space_func(&p, no_space);
	assert_int_equal(csv_parse(&p, text, len, on_field, on_row, t), len);
	assert_int_equal(csv_fini(&p, on_field, on_row, t), 0);
	csv_free(&p);
}

static void free_table(struct table *t)
{
	for (size_t i = 0; i < t->nrows; i++) {
		for (size_t j = 0; j < t->ncols[i]; j++)
			free(t->rows[i][j]);
		free(t->rows[i]);
	}
	free(t->rows);
	free(t->ncols);
}

static char *export_to_memory(struct store *s, enum export_format f, const char *session,
			      const char *subject, size_t *len)
{
	char *buf = NULL;
	FILE *m = open_memstream(&buf, len);
	assert_non_null(m);
	char *err = NULL;
	struct export_stats st;
	int rc = export_table(s, f, session, subject, m, &st, &err);
	if (rc)
		fprintf(stderr, "# %s\n", err);
	assert_int_equal(rc, 0);
	fclose(m);
	return buf;
}

/* Undoes the OWASP neutralisation: one leading apostrophe before = + - @ tab CR. */
static const char *unguard(const char *c)
{
	if (c[0] == '\'' && c[1] && strchr("=+-@\t\r", c[1]))
		return c + 1;
	return c;
}

static void expect_text(const char *cell, const char *db)
{
	assert_string_equal(unguard(cell), db ? db : "");
}

static void expect_num(const char *cell, bool has, double v)
{
	if (!has) {
		assert_string_equal(cell, "");
		return;
	}
	char *end;
	double got = strtod(cell, &end);
	assert_true(*end == '\0');
	assert_true(got == v);   /* exact: the text reads back as the stored double */
}

static void expect_int(const char *cell, bool has, long long v)
{
	if (!has) {
		assert_string_equal(cell, "");
		return;
	}
	char want[32];
	snprintf(want, sizeof want, "%lld", v);
	assert_string_equal(cell, want);
}

/* The header is the exported trial columns of docs/storage.md with the labels after source. */
static const char *const want_header[] = {
	"session_id", "subject", "protocol", "started_utc", "block", "block_name", "practice",
	"block_trial", "trial", "image", "category", "level", "source", "set", "note",
	"response_key", "response", "correct", "rt_ms", "rt_clock", "timed_out", "anticipation",
	"frames_planned", "frames_actual", "dropped_frames", "timing_ok", "onset_ns", "staircase",
	"repeat_of",
#ifdef TACHIST_TEST_COLUMN
	"test_column",
#endif
};
#define NCOLS (sizeof want_header / sizeof want_header[0])

/* Index of column NAME in want_header. */
static size_t col(const char *name)
{
	for (size_t j = 0; j < NCOLS; j++)
		if (!strcmp(want_header[j], name))
			return j;
	fail_msg("no column %s", name);
	return 0;
}

/* One exported row against the trial and session it came from: every column, indices from 1. */
static void compare_row(char **c, const struct store_trial *r, const struct store_session *ss)
{
	expect_text(c[col("session_id")], r->session_id);
	expect_text(c[col("subject")], r->subject);
	expect_text(c[col("protocol")], ss->protocol_name);
	expect_text(c[col("started_utc")], ss->started_utc);
	expect_int(c[col("block")], true, r->block + 1);
	expect_text(c[col("block_name")], r->block_name);
	expect_int(c[col("practice")], true, r->practice);
	expect_int(c[col("block_trial")], true, r->block_trial + 1);
	expect_int(c[col("trial")], true, r->trial + 1);
	expect_text(c[col("image")], r->image);
	expect_text(c[col("category")], r->category);
	expect_num(c[col("level")], r->has_level, r->level);
	expect_text(c[col("source")], r->source);
	expect_text(c[col("set")], r->label_values[0]);
	expect_text(c[col("note")], r->label_values[1]);
	expect_text(c[col("response_key")], r->response_key);
	expect_text(c[col("response")], r->response_category);
	expect_int(c[col("correct")], r->correct >= 0, r->correct);
	expect_num(c[col("rt_ms")], r->has_rt, r->rt_ms);
	expect_text(c[col("rt_clock")], "frame");
	expect_int(c[col("timed_out")], true, r->timed_out);
	expect_int(c[col("anticipation")], true, r->anticipation);
	expect_int(c[col("frames_planned")], true, r->frames_planned);
	expect_int(c[col("frames_actual")], true, r->frames_actual);
	expect_int(c[col("dropped_frames")], true, r->dropped_frames);
	expect_int(c[col("timing_ok")], true, r->timing_ok);
	expect_int(c[col("onset_ns")], true, r->onset_ns);
	expect_int(c[col("staircase")], r->staircase >= 0, r->staircase);
	expect_int(c[col("repeat_of")], r->repeat_of >= 0, r->repeat_of + 1);
#ifdef TACHIST_TEST_COLUMN
	/* The column-table test build: the extra column's value is 7 * trial + 3 (0-based). */
	expect_int(c[col("test_column")], true, 7 * r->trial + 3);
#endif
}

static void compare_with_db(struct store *s, struct table *t)
{
	assert_true(t->nrows >= 1);
	assert_int_equal(t->ncols[0], NCOLS);
	for (size_t j = 0; j < NCOLS; j++)
		assert_string_equal(t->rows[0][j], want_header[j]);
	struct store_session *v;
	size_t nsess;
	assert_int_equal(store_sessions_list(s, NULL, &v, &nsess, NULL), 0);
	size_t row = 1;
	for (size_t k = 0; k < nsess; k++) {
		struct store_trial *tr;
		size_t n;
		assert_int_equal(store_trials_load(s, v[k].id, &tr, &n, NULL), 0);
		for (size_t i = 0; i < n; i++, row++) {
			assert_true(row < t->nrows);
			assert_int_equal(t->ncols[row], NCOLS);
			compare_row(t->rows[row], &tr[i], &v[k]);
		}
		store_trials_free(tr, n);
	}
	assert_int_equal(row, t->nrows);
	store_sessions_free(v, nsess);
}

/* ---- tests ---- */

/* RFC 4180 section 2: fields with commas, quotes or line breaks are quoted, quotes doubled. */
static void export_testCellQuoting(void **state)
{
	(void)state;
	char *buf = NULL;
	size_t len = 0;
	FILE *m = open_memstream(&buf, &len);
	export_cell(m, "plain", ',', true);
	fputc('|', m);
	export_cell(m, "a,b", ',', true);
	fputc('|', m);
	export_cell(m, "say \"hi\"", ',', true);
	fputc('|', m);
	export_cell(m, "two\nlines", ',', true);
	fputc('|', m);
	export_cell(m, "a\tb", '\t', false);
	fputc('|', m);
	export_cell(m, "a\tb", ',', false);
	fclose(m);
	assert_string_equal(buf, "plain|\"a,b\"|\"say \"\"hi\"\"\"|\"two\nlines\"|\"a\tb\"|a\tb");
	free(buf);
}

/* OWASP "CSV Injection": a cell starting with = + - @ tab or CR gets a leading apostrophe (and is
 * quoted); other cells and unneutralised output are untouched. */
static void export_testNeutralise(void **state)
{
	(void)state;
	const char *in[] = {"=1+2", "+SUM(A1)", "-3", "@x", "\tx", "\rx", "a=b", "'q"};
	const char *out[] = {"\"'=1+2\"", "\"'+SUM(A1)\"", "\"'-3\"", "\"'@x\"", "\"'\tx\"",
			     "\"'\rx\"", "a=b", "'q"};
	for (size_t i = 0; i < sizeof in / sizeof in[0]; i++) {
		char *buf = NULL;
		size_t len = 0;
		FILE *m = open_memstream(&buf, &len);
		export_cell(m, in[i], ',', true);
		fclose(m);
		assert_string_equal(buf, out[i]);
		free(buf);
	}
	char *buf = NULL;
	size_t len = 0;
	FILE *m = open_memstream(&buf, &len);
	export_cell(m, "=raw", ',', false);
	fclose(m);
	assert_string_equal(buf, "=raw");
	free(buf);
}

/* Numbers: the shortest text of at most 17 significant digits that reads back exactly (IEEE 754
 * binary64 round trip needs at most 17, IEEE 754-2008 section 5.12.2). */
static void export_testNumbers(void **state)
{
	(void)state;
	char b[40];
	export_number(b, sizeof b, 0.1);
	assert_string_equal(b, "0.1");
	export_number(b, sizeof b, 12);
	assert_string_equal(b, "12");
	export_number(b, sizeof b, -0.25);
	assert_string_equal(b, "-0.25");
	double hard[] = {1.0 / 3.0, 0.1 + 0.2, 300.0 / 7.0 + 0.1, 5e-324, 1.7976931348623157e308,
			 -2.5e-7};
	for (size_t i = 0; i < sizeof hard / sizeof hard[0]; i++) {
		export_number(b, sizeof b, hard[i]);
		assert_true(strtod(b, NULL) == hard[i]);
	}
	export_number(b, sizeof b, 0.1 + 0.2);
	assert_string_equal(b, "0.30000000000000004");
}

/* The CSV, parsed back with libcsv, equals the database cell for cell (after undoing the
 * documented neutralisation), including commas, quotes, newlines and a category "=cmd". */
static void export_testCsvRoundTrip(void **state)
{
	struct store *s = *state;
	size_t len;
	char *text = export_to_memory(s, EXPORT_CSV, NULL, NULL, &len);
	/* RFC 4180 section 2 rule 1: CRLF ends each record. */
	char *eol = xasprintf("%s\r\n", want_header[NCOLS - 1]);
	assert_non_null(strstr(text, eol));
	free(eol);
	assert_non_null(strstr(text, "\"'=cmd\""));
	struct table t;
	parse_table(text, len, ',', &t);
	assert_int_equal(t.nrows, 1 + 8 + 3);
	compare_with_db(s, &t);
	free_table(&t);
	free(text);
}

static void export_testTsvRoundTrip(void **state)
{
	struct store *s = *state;
	size_t len;
	char *text = export_to_memory(s, EXPORT_TSV, NULL, NULL, &len);
	assert_null(strstr(text, "\r\n"));
	struct table t;
	parse_table(text, len, '\t', &t);
	compare_with_db(s, &t);
	free_table(&t);
	free(text);
}

/* Selection by subject and by session prefix. */
static void export_testSelect(void **state)
{
	struct store *s = *state;
	size_t len;
	char *text = export_to_memory(s, EXPORT_CSV, NULL, "S2", &len);
	struct table t;
	parse_table(text, len, ',', &t);
	assert_int_equal(t.nrows, 1 + 3);
	for (size_t i = 1; i < t.nrows; i++)
		assert_string_equal(t.rows[i][1], "S2");
	char prefix[9];
	snprintf(prefix, sizeof prefix, "%s", t.rows[1][0]);
	free_table(&t);
	free(text);
	text = export_to_memory(s, EXPORT_CSV, prefix, NULL, &len);
	parse_table(text, len, ',', &t);
	assert_int_equal(t.nrows, 1 + 3);
	free_table(&t);
	free(text);
	text = export_to_memory(s, EXPORT_CSV, NULL, "nobody", &len);
	parse_table(text, len, ',', &t);
	assert_int_equal(t.nrows, 1);   /* the header alone */
	free_table(&t);
	free(text);
}

/* JSON: an object with the sessions' metadata and one array of trial objects with the same keys
 * in the table's order; missing values are null (docs/storage.md). */
/* A JSON value as the table cell compare_row reads: null is empty, a number in 17 significant
 * digits (reads back as the same double), true and false as 1 and 0. */
static char *json_cell(const cJSON *f)
{
	if (cJSON_IsString(f))
		return xstrdup(f->valuestring);
	if (cJSON_IsNumber(f))
		return xasprintf("%.17g", f->valuedouble);
	if (cJSON_IsBool(f))
		return xstrdup(cJSON_IsTrue(f) ? "1" : "0");
	assert_true(cJSON_IsNull(f));
	return xstrdup("");
}

static void export_testJson(void **state)
{
	struct store *s = *state;
	size_t len;
	char *text = export_to_memory(s, EXPORT_JSON, NULL, "S1", &len);
	cJSON *doc = cJSON_Parse(text);
	assert_non_null(doc);
	cJSON *sessions = cJSON_GetObjectItem(doc, "sessions");
	cJSON *trials = cJSON_GetObjectItem(doc, "trials");
	assert_true(cJSON_IsArray(sessions) && cJSON_IsArray(trials));
	assert_int_equal(cJSON_GetArraySize(sessions), 1);
	assert_int_equal(cJSON_GetArraySize(trials), 8);
	struct store_session *v;
	size_t nsess;
	assert_int_equal(store_sessions_list(s, "S1", &v, &nsess, NULL), 0);
	cJSON *meta = cJSON_GetArrayItem(sessions, 0);
	assert_string_equal(cJSON_GetObjectItem(meta, "session_id")->valuestring, v[0].id);
	assert_string_equal(cJSON_GetObjectItem(meta, "status")->valuestring, "complete");
	assert_string_equal(cJSON_GetObjectItem(meta, "timing_mode")->valuestring, "simulated");
	assert_true(cJSON_GetObjectItem(meta, "distance_cm")->valuedouble == 57);
	assert_true(cJSON_IsString(cJSON_GetObjectItem(meta, "seed")));   /* 64 bits: as text */
	assert_null(cJSON_GetObjectItem(meta, "protocol_text"));
	struct store_trial *tr;
	size_t n;
	assert_int_equal(store_trials_load(s, v[0].id, &tr, &n, NULL), 0);
	size_t i = 0;
	for (cJSON *o = trials->child; o; o = o->next, i++) {
		int k = 0;
		for (cJSON *f = o->child; f; f = f->next, k++)
			assert_string_equal(f->string, want_header[k]);
		assert_int_equal(k, NCOLS);
		struct store_trial *r = &tr[i];
		/* Every column equals the database, read as the cells of a table. */
		char *cells[NCOLS];
		k = 0;
		for (cJSON *f = o->child; f; f = f->next, k++)
			cells[k] = json_cell(f);
		compare_row(cells, r, &v[0]);
		for (size_t j = 0; j < NCOLS; j++)
			free(cells[j]);
		assert_string_equal(cJSON_GetObjectItem(o, "category")->valuestring, r->category);
		assert_string_equal(cJSON_GetObjectItem(o, "note")->valuestring, r->label_values[1]);
		assert_string_equal(cJSON_GetObjectItem(o, "image")->valuestring, r->image);
		assert_int_equal(cJSON_GetObjectItem(o, "trial")->valueint, r->trial + 1);
		assert_int_equal(cJSON_GetObjectItem(o, "block")->valueint, r->block + 1);
		cJSON *lv = cJSON_GetObjectItem(o, "level");
		if (r->has_level)
			assert_true(lv->valuedouble == r->level);
		else
			assert_true(cJSON_IsNull(lv));
		cJSON *rt = cJSON_GetObjectItem(o, "rt_ms");
		if (r->has_rt)
			assert_true(rt->valuedouble == r->rt_ms);
		else
			assert_true(cJSON_IsNull(rt));
		assert_true(cJSON_IsNull(cJSON_GetObjectItem(o, "source")) == (r->source == NULL));
		assert_true(cJSON_GetObjectItem(o, "onset_ns")->valuedouble == (double)r->onset_ns);
		cJSON *rep = cJSON_GetObjectItem(o, "repeat_of");
		if (r->repeat_of >= 0)
			assert_int_equal(rep->valueint, r->repeat_of + 1);
		else
			assert_true(cJSON_IsNull(rep));
	}
	assert_int_equal(i, 8);
	store_trials_free(tr, n);
	store_sessions_free(v, nsess);
	cJSON_Delete(doc);
	free(text);
}

static char *slurp(const char *path, size_t *len)
{
	FILE *f = fopen(path, "rb");
	assert_non_null(f);
	fseek(f, 0, SEEK_END);
	long n = ftell(f);
	fseek(f, 0, SEEK_SET);
	char *b = xmalloc((size_t)n + 1);
	assert_int_equal(fread(b, 1, (size_t)n, f), (size_t)n);
	b[n] = '\0';
	fclose(f);
	*len = (size_t)n;
	return b;
}

/* A BIDS table split on newlines and tabs only (no quoting: cells are escaped instead). */
static void split_tsv(const char *text, struct table *t)
{
	memset(t, 0, sizeof *t);
	const char *line = text;
	while (*line) {
		const char *end = strchr(line, '\n');
		assert_non_null(end);
		const char *c = line;
		for (;;) {
			const char *e = c;
			while (e < end && *e != '\t')
				e++;
			on_field((void *)c, (size_t)(e - c), t);
			if (e == end)
				break;
			c = e + 1;
		}
		on_row(0, t);
		line = end + 1;
	}
}

/* Undoes the \t \n \r \\ escapes of a BIDS text cell (into a static buffer). */
static const char *unescape(const char *c)
{
	static char out[512];
	size_t k = 0;
	for (; *c && k + 1 < sizeof out; c++) {
		if (*c == '\\' && c[1]) {
			c++;
			out[k++] = *c == 't' ? '\t' : *c == 'n' ? '\n' : *c == 'r' ? '\r' : *c;
		} else {
			out[k++] = *c;
		}
	}
	out[k] = '\0';
	return out;
}

/* BIDS folder: names, required fields and the tabular conventions (BIDS specification v1.9,
 * "Common principles: Tabular files", "Modality agnostic files", "Behavioral experiments"). */
static void export_testBids(void **state)
{
	struct store *s = *state;
	char *out = xasprintf("%s/bids", dir);
	struct export_stats st;
	char *err = NULL;
	/* A participants.tsv already in the folder (from another export) is merged, not lost. */
	assert_int_equal(mkdir(out, 0777), 0);
	char *pre = xasprintf("%s/participants.tsv", out);
	FILE *pf = fopen(pre, "w");
	fputs("participant_id\tage\nsub-P0\t31\nsub-S2\t40\n", pf);
	fclose(pf);
	free(pre);
	int rc = export_bids(s, NULL, NULL, out, &st, &err);
	if (rc)
		fprintf(stderr, "# %s\n", err);
	assert_int_equal(rc, 0);
	assert_int_equal(st.sessions, 2);
	assert_int_equal(st.rows, 11);
	size_t len;
	char *p = xasprintf("%s/dataset_description.json", out);
	char *text = slurp(p, &len);
	cJSON *dd = cJSON_Parse(text);
	/* "Modality agnostic files > dataset_description.json": Name and BIDSVersion REQUIRED. */
	assert_non_null(cJSON_GetStringValue(cJSON_GetObjectItem(dd, "Name")));
	assert_non_null(cJSON_GetStringValue(cJSON_GetObjectItem(dd, "BIDSVersion")));
	cJSON_Delete(dd);
	free(text);
	free(p);
	/* "Participants file": participant_id is the first column, values sub-<label>. */
	p = xasprintf("%s/participants.tsv", out);
	text = slurp(p, &len);
	assert_string_equal(text, "participant_id\tage\nsub-P0\t31\nsub-S2\t40\nsub-S1\tn/a\n");
	free(text);
	free(p);

	struct store_session *v;
	size_t nsess;
	assert_int_equal(store_sessions_list(s, "S1", &v, &nsess, NULL), 0);
	char ses[9];
	for (int i = 0, k = 0; k < 8; i++)
		if (v[0].id[i] != '-')
			ses[k++] = v[0].id[i];
	ses[8] = '\0';
	/* File naming: sub-<label>/ses-<label>/beh/sub-<label>_ses-<label>_task-<label>_beh.tsv
	 * ("Behavioral experiments (with no neural recordings)"); labels alphanumeric. */
	p = xasprintf("%s/sub-S1/ses-%s/beh/sub-S1_ses-%s_task-unittask1_beh.tsv", out, ses, ses);
	text = slurp(p, &len);
	struct table t;
	split_tsv(text, &t);
	/* One physical line per trial whatever the labels hold (tabs, newlines, quotes). */
	assert_int_equal(t.nrows, 9);
	/* "Tabular files": first row is the header; onset then duration come first. */
	assert_string_equal(t.rows[0][0], "onset");
	assert_string_equal(t.rows[0][1], "duration");
	size_t ncol = t.ncols[0];
	int col_rt = -1, col_level = -1, col_src = -1;
	for (size_t j = 0; j < ncol; j++) {
		if (!strcmp(t.rows[0][j], "response_time"))
			col_rt = (int)j;
		if (!strcmp(t.rows[0][j], "level"))
			col_level = (int)j;
		if (!strcmp(t.rows[0][j], "source"))
			col_src = (int)j;
	}
	/* BIDS's own onset, duration and response_time (seconds), then the exported columns. */
	assert_int_equal(ncol, 3 + NCOLS);
	assert_string_equal(t.rows[0][2], "response_time");
	for (size_t j = 0; j < NCOLS; j++)
		assert_string_equal(t.rows[0][3 + j], want_header[j]);
	assert_true(col_rt > 0 && col_level > 0 && col_src > 0);
	struct store_trial *tr;
	size_t n;
	assert_int_equal(store_trials_load(s, v[0].id, &tr, &n, NULL), 0);
	for (size_t i = 1; i < t.nrows; i++) {
		struct store_trial *r = &tr[i - 1];
		assert_int_equal(t.ncols[i], ncol);
		for (size_t j = 0; j < ncol; j++)
			assert_true(t.rows[i][j][0] != '\0');   /* "n/a", never empty */
		/* onset in seconds from the first trial's first flip. */
		double onset = strtod(t.rows[i][0], NULL);
		assert_true(fabs(onset - (double)(r->onset_ns - tr[0].start_ns) / 1e9) < 1e-9);
		assert_true(fabs(strtod(t.rows[i][1], NULL) - 0.2) < 1e-9);
		if (r->has_rt)
			/* seconds rounded to the nanosecond */
			assert_true(fabs(strtod(t.rows[i][col_rt], NULL) - r->rt_ms / 1000) <= 5e-10);
		else
			assert_string_equal(t.rows[i][col_rt], "n/a");   /* "Tabular files": n/a */
		if (!r->has_level)
			assert_string_equal(t.rows[i][col_level], "n/a");
		if (!r->source)
			assert_string_equal(t.rows[i][col_src], "n/a");
		/* Every exported column equals the database (n/a read as missing). */
		char *cells[NCOLS];
		for (size_t j = 0; j < NCOLS; j++) {
			const char *c = t.rows[i][3 + j];
			cells[j] = xstrdup(strcmp(c, "n/a") ? unescape(c) : "");
		}
		compare_row(cells, r, &v[0]);
		for (size_t j = 0; j < NCOLS; j++)
			free(cells[j]);
		/* Text cells are exact after undoing the escapes; trial counts from 1. */
		for (size_t j = 0; j < ncol; j++) {
			if (!strcmp(t.rows[0][j], "note"))
				assert_string_equal(unescape(t.rows[i][j]), r->label_values[1]);
			if (!strcmp(t.rows[0][j], "image"))
				assert_string_equal(unescape(t.rows[i][j]), r->image);
			if (!strcmp(t.rows[0][j], "trial"))
				assert_int_equal(atoi(t.rows[i][j]), r->trial + 1);
		}
	}
	store_trials_free(tr, n);
	free(text);
	free(p);
	/* The sidecar describes every column, with units for times and levels for categories. */
	p = xasprintf("%s/sub-S1/ses-%s/beh/sub-S1_ses-%s_task-unittask1_beh.json", out, ses, ses);
	text = slurp(p, &len);
	cJSON *sc = cJSON_Parse(text);
	assert_non_null(sc);
	assert_string_equal(cJSON_GetObjectItem(cJSON_GetObjectItem(sc, "onset"), "Units")->valuestring,
			    "s");
	assert_string_equal(
		cJSON_GetObjectItem(cJSON_GetObjectItem(sc, "response_time"), "Units")->valuestring, "s");
	cJSON *lv = cJSON_GetObjectItem(cJSON_GetObjectItem(sc, "category"), "Levels");
	assert_int_equal(cJSON_GetArraySize(lv), 3);
	assert_non_null(cJSON_GetObjectItem(lv, "=cmd"));
	cJSON *sp = cJSON_GetObjectItem(sc, "StimulusPresentation");
	assert_true(cJSON_GetObjectItem(sp, "ScreenDistance")->valuedouble == 0.57);
	assert_true(cJSON_GetObjectItem(sp, "ScreenRefreshRate")->valuedouble == 100);
	assert_int_equal(cJSON_GetArraySize(cJSON_GetObjectItem(sp, "ScreenResolution")), 2);
	assert_int_equal(cJSON_GetArraySize(cJSON_GetObjectItem(sp, "ScreenSize")), 2);
	for (cJSON *c = sc->child; c; c = c->next)
		if (cJSON_IsObject(c) && strcmp(c->string, "StimulusPresentation") &&
		    strcmp(c->string, "Session"))
			assert_non_null(cJSON_GetObjectItem(c, "Description"));
	/* Every column of the table is described. */
	for (size_t j = 0; j < ncol; j++)
		assert_non_null(cJSON_GetObjectItem(cJSON_GetObjectItem(sc, t.rows[0][j]),
						    "Description"));
	cJSON *sm = cJSON_GetObjectItem(sc, "Session");
	assert_string_equal(cJSON_GetObjectItem(sm, "session_id")->valuestring, v[0].id);
	assert_string_equal(cJSON_GetObjectItem(sm, "status")->valuestring, "complete");
	free_table(&t);
	cJSON_Delete(sc);
	free(text);
	free(p);
	store_sessions_free(v, nsess);
	/* The second session's settings come from its stored rig text. */
	assert_int_equal(store_sessions_list(s, "S2", &v, &nsess, NULL), 0);
	for (int i = 0, k = 0; k < 8; i++)
		if (v[0].id[i] != '-')
			ses[k++] = v[0].id[i];
	p = xasprintf("%s/sub-S2/ses-%s/beh/sub-S2_ses-%s_task-unittask1_beh.json", out, ses, ses);
	text = slurp(p, &len);
	sc = cJSON_Parse(text);
	sp = cJSON_GetObjectItem(sc, "StimulusPresentation");
	assert_true(cJSON_GetObjectItem(sp, "ScreenDistance")->valuedouble == 0.8);
	assert_true(cJSON_GetObjectItem(sp, "ScreenRefreshRate")->valuedouble == 85);
	assert_int_equal(cJSON_GetArrayItem(cJSON_GetObjectItem(sp, "ScreenResolution"), 0)->valueint,
			 1024);
	cJSON_Delete(sc);
	free(text);
	free(p);
	store_sessions_free(v, nsess);
	free(out);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(export_testCellQuoting),
		cmocka_unit_test(export_testNeutralise),
		cmocka_unit_test(export_testNumbers),
		cmocka_unit_test(export_testCsvRoundTrip),
		cmocka_unit_test(export_testTsvRoundTrip),
		cmocka_unit_test(export_testSelect),
		cmocka_unit_test(export_testJson),
		cmocka_unit_test(export_testBids),
	};
	return cmocka_run_group_tests(tests, setup, teardown);
}
