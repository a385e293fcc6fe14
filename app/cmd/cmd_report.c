/* cmd_report — `tachist report`: reads trials from the store, turns them into analysis rows and
 * prints the tables (text or one JSON document), optionally writing SVG figures.
 *
 * Strings from the store's iterator are borrowed per row, so every text the analysis keeps is
 * interned here once (a small open-addressing set): memory grows with the number of distinct
 * texts, not with trials × texts. The options are the table cmd_report_opts below. */
#include <math.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <cJSON.h>

#include "adapt_history.h"
#include "analysis.h"
#include "cmd.h"
#include "store.h"
#include "svg.h"

/* ---- string interning ---- */

struct intern {
	char **slot;
	size_t cap, n;
};

static uint64_t hash_str(const char *s)
{
	uint64_t h = 1469598103934665603ULL;   /* FNV-1a 64 */
	for (; *s; s++)
		h = (h ^ (unsigned char)*s) * 1099511628211ULL;
	return h;
}

static const char *intern(struct intern *t, const char *s)
{
	if (!s)
		return NULL;
	if (t->n * 2 >= t->cap) {
		size_t nc = t->cap ? 2 * t->cap : 256;
		char **ns = xcalloc(nc, sizeof *ns);
		for (size_t i = 0; i < t->cap; i++)
			if (t->slot[i]) {
				size_t j = hash_str(t->slot[i]) & (nc - 1);
				while (ns[j])
					j = (j + 1) & (nc - 1);
				ns[j] = t->slot[i];
			}
		free(t->slot);
		t->slot = ns;
		t->cap = nc;
	}
	size_t j = hash_str(s) & (t->cap - 1);
	while (t->slot[j]) {
		if (!strcmp(t->slot[j], s))
			return t->slot[j];
		j = (j + 1) & (t->cap - 1);
	}
	t->slot[j] = xstrdup(s);
	t->n++;
	return t->slot[j];
}

static void intern_clear(struct intern *t)
{
	for (size_t i = 0; i < t->cap; i++)
		free(t->slot[i]);
	free(t->slot);
}

/* ---- options ---- */

struct ropts {
	const char *db, *schema, *session, *subject, *plots, *by;
	bool json, all;
	struct analysis_opts a;
	const char *shape, *lapse;
	double pc;
	long boot;
	unsigned long long seed;
	bool seed_set, nofit;
	enum stats_ci_method ci;
};

static int report_threads(void)
{
	long n = sysconf(_SC_NPROCESSORS_ONLN);
	return n < 1 ? 1 : n > 8 ? 8 : (int)n;
}

enum { O_DB, O_SCHEMA, O_SESSION, O_SUBJECT, O_ALL, O_BY, O_SHAPE, O_LAPSE, O_PC, O_BOOT, O_SEED, O_CI,
       O_NOFIT, O_JSON, O_PLOTS };
const struct opts_row cmd_report_opts[] = {
	[O_DB] = {"db", "FILE", "the database to read (default tachist.db), or a PostgreSQL server"},
	[O_SCHEMA] = {"schema", "NAME", "with --db SERVER: the schema to read (default tachist)"},
	[O_SESSION] = {"session", "ID", "only this session"},
	[O_SUBJECT] = {"subject", "ID", "only this subject's sessions"},
	[O_ALL] = {"all", NULL, "every session in the database (the default)"},
	[O_BY] = {"by", "COLUMNS", "label columns of the stimulus list that split conditions (a,b)"},
	[O_SHAPE] = {"shape", "SHAPE", "weibull, logistic or normal (default chosen from the data)"},
	[O_LAPSE] = {"lapse", "LAPSE", "free (fitted), 0, or a fixed rate in [0, 1) (default free)"},
	[O_PC] = {"pc", "P", "the threshold's proportion correct (default halfway from 1/m to 1)"},
	[O_BOOT] = {"boot", "N", "parametric bootstrap samples for the fit's intervals"},
	[O_SEED] = {"seed", "N", "the bootstrap's seed, for the same intervals again"},
	[O_CI] = {"ci", "METHOD", "wilson or exact binomial intervals for accuracy (default wilson)"},
	[O_NOFIT] = {"no-fit", NULL, "no psychometric fits"},
	[O_JSON] = {"json", NULL, "one JSON document on standard output"},
	[O_PLOTS] = {"plots", "DIR", "also write SVG figures and index.html into DIR"},
	OPTS_END,
};

/* Parses the options into O. Returns 0, or EXIT_USAGE after the message. */
static int parse_args(int argc, char **argv, struct ropts *o)
{
	memset(o, 0, sizeof *o);
	o->db = "tachist.db";
	o->pc = NAN;
	o->boot = -1;
	o->ci = STATS_CI_WILSON;
	struct opts p;
	opts_begin(&p, "report", cmd_report_opts, argc, argv);
	const char *v;
	for (int k; (k = opts_next(&p, &v)) != OPTS_DONE;) {
		unsigned long long u;
		switch (k) {
		case O_JSON: o->json = true; break;
		case O_ALL: o->all = true; break;
		case O_NOFIT: o->nofit = true; break;
		case O_DB: o->db = v; break;
		case O_SCHEMA: o->schema = v; break;
		case O_SESSION: o->session = v; break;
		case O_SUBJECT: o->subject = v; break;
		case O_PLOTS: o->plots = v; break;
		case O_BY: o->by = v; break;
		case O_SHAPE: o->shape = v; break;
		case O_LAPSE: o->lapse = v; break;
		case O_CI:
			if (stats_ci_method_parse(v, &o->ci) < 0)
				return opts_usage("report", "--ci is wilson or exact (got '%s')", v);
			break;
		case O_PC:
			if (cmd_parse_double(v, &o->pc) < 0 || !(o->pc > 0 && o->pc < 1))
				return opts_usage("report", "--pc needs a proportion in (0, 1) (got '%s')", v);
			break;
		case O_BOOT:
			if (cmd_parse_u64(v, &u) < 0 || u > 1000000)
				return opts_usage("report", "--boot needs a number of samples (got '%s')", v);
			o->boot = (long)u;
			break;
		case O_SEED:
			if (cmd_parse_u64(v, &o->seed) < 0)
				return opts_usage("report", "--seed needs a whole number (got '%s')", v);
			o->seed_set = true;
			break;
		case OPTS_ARG: return opts_usage("report", "unexpected argument '%s'", v);
		default: return EXIT_USAGE;
		}
	}
	if (cmd_server_schema("report", "--db", o->db, o->schema))
		return EXIT_USAGE;
	if ((o->session != NULL) + (o->subject != NULL) + o->all > 1)
		return opts_usage("report", "choose one of --session, --subject and --all");
	enum psyfn_shape sh;
	if (o->shape && psyfn_shape_parse(o->shape, &sh) < 0)
		return opts_usage("report", "--shape is weibull, logistic or normal (got '%s')",
				  o->shape);
	struct fit_opts fo;
	fit_opts_default(&fo, 2);
	if (o->lapse && fit_lapse_parse(o->lapse, &fo) < 0)
		return opts_usage("report", "--lapse is free, 0 or a rate in [0, 1) (got '%s')",
				  o->lapse);
	return 0;
}

/* Fills the analysis options once m is known. */
static int setup_analysis(struct ropts *o, int m)
{
	analysis_opts_default(&o->a, m);
	o->a.ci = o->ci;
	o->a.fit = !o->nofit;
	o->a.shape_auto = o->shape == NULL;
	struct fit_opts *f = &o->a.fit_opts;
	if (o->shape)
		psyfn_shape_parse(o->shape, &f->shape);
	if (o->lapse)
		fit_lapse_parse(o->lapse, f);
	if (!isnan(o->pc)) {
		if (!(o->pc > 1.0 / m)) {
			fprintf(stderr, "tachist report: --pc must lie above the guess rate 1/%d\n", m);
			return -1;
		}
		f->pc_threshold = o->pc;
	}
	if (o->boot >= 0)
		f->nboot = (int)o->boot;
	if (o->seed_set)
		f->seed = o->seed;
	f->threads = report_threads();
	return 0;
}

/* ---- reading the store ---- */

struct loaded {
	struct intern strings;
	struct analysis_row *rows;
	size_t nrows, cap;
	struct analysis_session *sess;
	size_t nsess;
	double **frames;           /* per session, owned */
	int m;
	char **by;                 /* label columns chosen with --by */
	size_t nby;
};

static void loaded_clear(struct loaded *L)
{
	intern_clear(&L->strings);
	free(L->rows);
	for (size_t i = 0; i < L->nsess; i++)
		free(L->frames[i]);
	free(L->frames);
	free(L->sess);
	for (size_t i = 0; i < L->nby; i++)
		free(L->by[i]);
	free(L->by);
}

static void split_by(struct loaded *L, const char *by)
{
	if (!by)
		return;
	char *copy = xstrdup(by), *save = NULL;
	for (char *t = strtok_r(copy, ",", &save); t; t = strtok_r(NULL, ",", &save)) {
		while (*t == ' ')
			t++;
		if (!*t)
			continue;
		L->by = xrealloc(L->by, (L->nby + 1) * sizeof *L->by);
		L->by[L->nby++] = xstrdup(t);
	}
	free(copy);
}

/* The group text of a row: "col=value, col=value" for the --by columns. */
static const char *group_of(struct loaded *L, const struct store_trial *t, const int *col)
{
	if (!L->nby)
		return intern(&L->strings, "");
	char buf[1024];
	size_t len = 0;
	buf[0] = '\0';
	for (size_t i = 0; i < L->nby; i++) {
		const char *v = col[i] >= 0 ? t->label_values[col[i]] : NULL;
		int w = snprintf(buf + len, sizeof buf - len, "%s%s=%s", i ? ", " : "", L->by[i],
				 v ? v : "");
		if (w < 0 || (size_t)w >= sizeof buf - len)
			break;
		len += (size_t)w;
	}
	return intern(&L->strings, buf);
}

/* The number of choices must agree across the sessions pooled: sets L->m. Returns 0 or -1 after
 * a message. */
static int load_choices(struct store_iter *it, size_t nss, struct loaded *L)
{
	for (size_t i = 0; i < nss; i++) {
		size_t nc = 0;
		store_iter_choices(it, i, &nc);
		if (nc == 0)
			continue;
		if (L->m && (int)nc != L->m) {
			fprintf(stderr, "tachist report: the selected sessions have different numbers of "
				"choices (%d and %zu); report them separately with --session or --subject\n",
				L->m, nc);
			return -1;
		}
		L->m = (int)nc;
	}
	return 0;
}

/* COL[i] gets the label column of the i-th --by name. Returns 0 or -1 after a message. */
static int load_by_columns(struct store_iter *it, const struct loaded *L, int col[16])
{
	size_t nlab;
	const char *const *labs = store_iter_label_names(it, &nlab);
	if (L->nby > 16) {
		fprintf(stderr, "tachist report: --by takes at most 16 columns\n");
		return -1;
	}
	for (size_t i = 0; i < L->nby; i++) {
		col[i] = -1;
		for (size_t j = 0; j < nlab; j++)
			if (!strcmp(labs[j], L->by[i]))
				col[i] = (int)j;
		if (col[i] < 0) {
			fprintf(stderr, "tachist report: --by: no label column '%s' in the selected "
				"sessions (they have:", L->by[i]);
			for (size_t j = 0; j < nlab; j++)
				fprintf(stderr, " %s", labs[j]);
			fprintf(stderr, "%s)\n", nlab ? "" : " none");
			return -1;
		}
	}
	return 0;
}

/* Appends the analysis row of stored trial T (strings interned). */
static struct analysis_row *load_row(struct loaded *L, const struct store_trial *t, const int *col)
{
	if (L->nrows == L->cap) {
		L->cap = L->cap ? 2 * L->cap : 1024;
		L->rows = xrealloc(L->rows, L->cap * sizeof *L->rows);
	}
	struct analysis_row *a = &L->rows[L->nrows++];
	a->session = intern(&L->strings, t->session_id);
	a->subject = intern(&L->strings, t->subject);
	a->block = t->block;
	a->block_name = intern(&L->strings, t->block_name);
	a->practice = t->practice;
	a->group = group_of(L, t, col);
	a->image = intern(&L->strings, t->image ? t->image : "");
	a->category = intern(&L->strings, t->category ? t->category : "");
	a->response = t->response_category ? intern(&L->strings, t->response_category)
		      : t->response >= 0 ? intern(&L->strings, "?") : NULL;
	a->has_level = t->has_level;
	a->level = t->level;
	a->correct = t->correct;
	a->timed_out = t->timed_out;
	a->anticipation = t->anticipation;
	a->has_rt = t->has_rt;
	a->rt_ms = t->rt_ms;
	a->frames_planned = t->frames_planned;
	a->frames_actual = t->frames_actual;
	a->dropped_frames = t->dropped_frames;
	a->timing_ok = t->timing_ok;
	return a;
}

/* Adds the frame intervals of stored trial T (row A) to its session's; *SI is the session index
 * the search starts from (rows come session by session), FCAP the capacities. */
static void load_frames(struct store *s, struct loaded *L, const struct store_trial *t,
			const struct analysis_row *a, size_t *si, size_t *fcap)
{
	while (*si < L->nsess && strcmp(L->sess[*si].id, a->session))
		(*si)++;
	if (*si == L->nsess)
		*si = 0;
	int64_t *flips = NULL;
	size_t nf = 0;
	char *err = NULL;
	if (store_frames_load(s, t->session_id, t->trial, &flips, &nf, &err) < 0) {
		fprintf(stderr, "tachist report: %s\n", err);
		free(err);
		return;
	}
	struct analysis_session *as = &L->sess[*si];
	for (size_t k = 1; k < nf; k++) {
		if (as->nframe_ms == fcap[*si]) {
			fcap[*si] = fcap[*si] ? 2 * fcap[*si] : 1024;
			L->frames[*si] = xrealloc(L->frames[*si], fcap[*si] * sizeof **L->frames);
		}
		L->frames[*si][as->nframe_ms++] = (double)(flips[k] - flips[k - 1]) / 1e6;
	}
	as->frame_ms = L->frames[*si];
	free(flips);
}

static int load(struct store *s, const struct ropts *o, struct loaded *L, bool want_frames)
{
	char *err = NULL;
	struct store_iter *it;
	memset(L, 0, sizeof *L);
	split_by(L, o->by);
	if (store_iter_open(s, o->session, o->subject, &it, &err) < 0) {
		fprintf(stderr, "tachist report: %s\n", err);
		free(err);
		return -1;
	}
	int rc = -1;
	size_t nss;
	const struct store_session *ss = store_iter_sessions(it, &nss);
	int col[16];
	if (nss == 0) {
		if (o->subject)
			fprintf(stderr, "tachist report: %s: no sessions for subject %s\n", o->db, o->subject);
		else
			fprintf(stderr, "tachist report: %s: the database holds no sessions yet\n", o->db);
		goto out;
	}
	if (load_choices(it, nss, L) || load_by_columns(it, L, col))
		goto out;
	L->sess = xcalloc(nss, sizeof *L->sess);
	L->frames = xcalloc(nss, sizeof *L->frames);
	L->nsess = nss;
	size_t *fcap = xcalloc(nss, sizeof *fcap);
	for (size_t i = 0; i < nss; i++) {
		L->sess[i].id = intern(&L->strings, ss[i].id);
		L->sess[i].subject = intern(&L->strings, ss[i].subject);
		L->sess[i].timing_mode = intern(&L->strings, ss[i].timing_mode);
		L->sess[i].refresh_hz = ss[i].refresh_hz;
	}
	const struct store_trial *t;
	int r;
	size_t si = 0;
	while ((r = store_iter_next(it, &t, NULL, &err)) == 1) {
		const struct analysis_row *a = load_row(L, t, col);
		if (want_frames)
			load_frames(s, L, t, a, &si, fcap);
	}
	free(fcap);
	if (r < 0) {
		fprintf(stderr, "tachist report: %s\n", err);
		free(err);
		goto out;
	}
	if (L->nrows == 0) {
		fprintf(stderr, "tachist report: %s: the selected sessions hold no trials yet\n", o->db);
		goto out;
	}
	if (L->m < 2) {
		fprintf(stderr, "tachist report: the sessions do not record their choices, so chance "
			"performance is unknown\n");
		goto out;
	}
	rc = 0;
out:
	store_iter_close(it);
	return rc;
}

/* ---- text output ---- */

static void print_num(double v, const char *fmt, int width)
{
	if (isfinite(v))
		printf(fmt, width, v);
	else
		printf("%*s", width, "-");
}

static const char *block_label(const char *name, int block, char *buf, size_t len)
{
	if (name && *name)
		snprintf(buf, len, "%s", name);
	else
		snprintf(buf, len, "%d", block + 1);
	return buf;
}

static void print_cells(const struct analysis *a, const char *subject, bool pooled)
{
	if (pooled)
		printf("\nAccuracy by condition, all subjects pooled\n");
	else
		printf("\nAccuracy by condition, subject %s\n", subject);
	printf("  %-12s %-18s %8s %6s %6s %6s %6s  %-15s %6s %7s %6s %7s %5s %5s\n", "block", "group",
	       "level", "trials", "resp", "corr", "pc", a->opts.ci == STATS_CI_EXACT ? "95% CI exact"
	       : "95% CI Wilson", "d'", "RT med", "IQR", "trim10", "ant", "t/o");
	for (size_t i = 0; i < a->ncells; i++) {
		const struct analysis_cell *c = &a->cells[i];
		if (pooled ? c->subject != NULL : (c->subject == NULL || strcmp(c->subject, subject)))
			continue;
		char b[64];
		printf("  %-12.12s %-18.18s ", block_label(c->block_name, c->block, b, sizeof b),
		       c->group && *c->group ? c->group : "-");
		if (c->has_level)
			printf("%8.4g", c->level);
		else
			printf("%8s", "-");
		printf(" %6lu %6lu %6lu ", c->trials, c->n, c->k);
		if (c->has_pc) {
			printf("%6.3f  [%.3f, %.3f]  ", c->pc, c->lower, c->upper);
			if (c->has_dprime)
				printf("%5.2f%s", c->dprime, c->dprime_corrected ? "*" : " ");
			else
				printf("%6s", "-");
		} else {
			printf("%6s  %-15s %6s", "-", "no responses", "-");
		}
		printf(" ");
		print_num(c->rt.median, "%*.0f", 7);
		printf(" ");
		print_num(c->rt.iqr, "%*.0f", 6);
		printf(" ");
		print_num(c->rt.trimmed, "%*.0f", 7);
		printf(" %5lu %5lu\n", c->anticipations, c->timeouts);
	}
}

static void print_fits(const struct analysis *a)
{
	const struct fit_opts *f = &a->opts.fit_opts;
	printf("\nPsychometric fits: %s, guess rate 1/%d, lapse %s, threshold at pc %.3g, "
	       "%d bootstrap samples (seed %llu)\n", a->opts.shape_auto ? "weibull where accuracy "
	       "rises with the level, logistic where it falls" : psyfn_shape_name(f->shape), a->opts.m,
	       f->lapse_free ? "free in [0, 0.06]" : "fixed", f->pc_threshold, f->nboot,
	       (unsigned long long)f->seed);
	for (size_t i = 0; i < a->nseries; i++) {
		const struct analysis_series *s = &a->series[i];
		const struct fit_result *r = &s->fit;
		char b[64];
		printf("  %s%s, block %s%s%s: ", s->subject ? "subject " : "pooled",
		       s->subject ? s->subject : "", block_label(s->block_name, s->block, b, sizeof b),
		       s->group && *s->group ? ", " : "", s->group ? s->group : "");
		if (r->status != FIT_OK) {
			printf("no fit: %s\n", r->reason);
			continue;
		}
		printf("%s alpha %.4g, beta %.4g%s, lambda %.3g, deviance %.3g on %d df\n",
		       psyfn_shape_name(r->f.shape), r->f.alpha, r->f.beta,
		       r->slope_bounded ? " (steepness bound)" : "", r->f.lambda, r->deviance,
		       r->dof);
		if (r->threshold_ok) {
			printf("      threshold %.4g", r->threshold);
			if (r->has_ci && isfinite(r->threshold_ci[0]))
				printf(" [%.4g, %.4g]", r->threshold_ci[0], r->threshold_ci[1]);
			else if (f->nboot > 0)
				printf(" (no interval: too many bootstrap fits failed)");
			printf("%s\n", r->nboot_failed ? " (some bootstrap fits failed)" : "");
		} else {
			printf("      threshold not reached: the fitted function stays below pc %.3g\n",
			       f->pc_threshold);
		}
	}
}

static void print_confusions(const struct analysis *a)
{
	size_t K = a->ncat;
	for (size_t i = 0; i < a->nconf; i++) {
		const struct analysis_confusion *c = &a->conf[i];
		if (c->has_level)
			printf("\nConfusions at level %g (rows: true category; columns: chosen; counts)\n",
			       c->level);
		else
			printf("\nConfusions (rows: true category; columns: chosen; counts)\n");
		printf("  %-12s", "");
		for (size_t ch = 0; ch < K; ch++)
			printf(" %8.8s", a->cats[ch]);
		printf(" %8s\n", "correct");
		for (size_t t = 0; t < K; t++) {
			if (!c->row_n[t])
				continue;
			printf("  %-12.12s", a->cats[t]);
			for (size_t ch = 0; ch < K; ch++)
				printf(" %8lu", c->counts[t * K + ch]);
			printf(" %7.0f%%\n", 100.0 * (double)c->counts[t * K + t] / (double)c->row_n[t]);
		}
		if (c->ntop) {
			printf("  most confused:");
			for (size_t p = 0; p < c->ntop; p++)
				printf("%s %s -> %s %lu (%.0f%%)", p ? "," : "", a->cats[c->top[p].truth],
				       a->cats[c->top[p].chosen], c->top[p].count, 100 * c->top[p].share);
			printf("\n");
		}
	}
}

static void print_items(const struct analysis *a)
{
	printf("\nCategories (all levels)\n");
	for (size_t i = 0; i < a->ncatacc; i++) {
		const struct analysis_category *c = &a->catacc[i];
		printf("  %-16.16s %6lu of %6lu", c->category, c->k, c->n);
		if (c->n)
			printf("  %.3f [%.3f, %.3f]\n", c->pc, c->lower, c->upper);
		else
			printf("  no responses\n");
	}
	size_t ceil_n = 0, floor_n = 0;
	for (size_t i = 0; i < a->nitems; i++) {
		ceil_n += a->items[i].ceiling;
		floor_n += a->items[i].floor;
	}
	printf("\nItems: %zu images; %zu at ceiling (pc >= %.2f), %zu at floor (pc <= chance %.3g)\n",
	       a->nitems, ceil_n, a->opts.ceiling, floor_n, 1.0 / a->opts.m);
	size_t shown = 0;
	for (size_t i = 0; i < a->nitems && shown < 20; i++) {
		const struct analysis_item *it = &a->items[i];
		if (!it->floor)
			continue;
		printf("  floor: %-40.40s %-12.12s %lu of %lu", it->image, it->category, it->k, it->n);
		if (isfinite(it->median_rt))
			printf(", median RT %.0f ms", it->median_rt);
		printf("\n");
		shown++;
	}
	if (floor_n > shown)
		printf("  ... %zu more at floor (all items are in --json)\n", floor_n - shown);
}

static void print_timing(const struct analysis *a)
{
	printf("\nTiming\n  %-10s %-10s %-9s %9s %7s %10s %8s %8s %6s %5s\n", "session", "subject",
	       "mode", "refresh", "trials", "exact", "faults", "dropped", "antic", "t/o");
	for (size_t i = 0; i < a->ntiming; i++) {
		const struct analysis_timing *t = &a->timing[i];
		printf("  %-10.8s %-10.10s %-9.9s ", t->session, t->subject ? t->subject : "",
		       t->timing_mode ? t->timing_mode : "?");
		if (t->refresh_hz > 0)
			printf("%6.2f Hz", t->refresh_hz);
		else
			printf("%9s", "-");
		printf(" %7lu %9.1f%% %8lu %8lu %6lu %5lu\n", t->trials,
		       t->trials ? 100.0 * (double)t->exact / (double)t->trials : 0.0, t->timing_faults,
		       t->dropped_frames, t->anticipations, t->timeouts);
		if (t->timing_mode && !strcmp(t->timing_mode, "simulated"))
			printf("  (simulated timing: this session ran on a virtual display clock; its "
			       "exposures were not measured on a screen)\n");
	}
}

static void print_text(const struct analysis *a, const struct ropts *o, const struct loaded *L)
{
	printf("tachist report: %s, %zu session%s, %zu subject%s, %zu trials", o->db, L->nsess,
	       L->nsess == 1 ? "" : "s", a->nsubjects, a->nsubjects == 1 ? "" : "s", a->nrows);
	if (a->npractice)
		printf(" (%zu practice, left out)", a->npractice);
	printf(", %d choices (chance %.3g)\n", a->opts.m, 1.0 / a->opts.m);
	size_t nresp = 0;
	for (size_t i = 0; i < a->ncells; i++)
		if (a->cells[i].subject)
			nresp += a->cells[i].n;
	if (a->nrows > a->npractice && nresp == 0)
		printf("\nNo responses were recorded in the selected trials: there is no accuracy to "
		       "report.\n");
	/* Per subject (cells are grouped by subject, in order). */
	const char *last = NULL;
	for (size_t i = 0; i < a->ncells; i++) {
		const char *s = a->cells[i].subject;
		if (s && (!last || strcmp(s, last))) {
			print_cells(a, s, false);
			last = s;
		}
	}
	if (a->nsubjects > 1)
		print_cells(a, NULL, true);
	printf("  (d' from proportion correct for %d-AFC; * = 0 or all correct, 1/(2N) rule; RT in ms "
	       "of correct trials >= %.0f ms)\n", a->opts.m, STATS_ANTICIPATION_MS);
	if (a->opts.fit && a->nseries)
		print_fits(a);
	else if (a->opts.fit)
		printf("\nPsychometric fits: none (the trials carry no levels)\n");
	if (a->nconf)
		print_confusions(a);
	if (a->nitems)
		print_items(a);
	printf("\nReaction times, correct trials: ");
	if (a->rt.n)
		printf("n %zu, median %.0f ms, IQR %.0f ms (%.0f to %.0f), 10%%-trimmed mean %.0f ms\n",
		       a->rt.n, a->rt.median, a->rt.iqr, a->rt.q25, a->rt.q75, a->rt.trimmed);
	else
		printf("none\n");
	print_timing(a);
}

/* ---- JSON output ---- */

static cJSON *jnum(double v)
{
	return isfinite(v) ? cJSON_CreateNumber(v) : cJSON_CreateNull();
}

static cJSON *jstr(const char *s)
{
	return s ? cJSON_CreateString(s) : cJSON_CreateNull();
}

static cJSON *json_interval(const double ci[2], bool ok)
{
	cJSON *a = cJSON_CreateArray();
	cJSON_AddItemToArray(a, jnum(ok ? ci[0] : NAN));
	cJSON_AddItemToArray(a, jnum(ok ? ci[1] : NAN));
	return a;
}

/* The condition cells: proportion correct, d', RTs. */
static void json_conditions(cJSON *j, const struct analysis *a)
{
	cJSON *cells = cJSON_AddArrayToObject(j, "conditions");
	for (size_t i = 0; i < a->ncells; i++) {
		const struct analysis_cell *c = &a->cells[i];
		cJSON *e = cJSON_CreateObject();
		cJSON_AddItemToObject(e, "subject", jstr(c->subject));
		cJSON_AddNumberToObject(e, "block", c->block);
		cJSON_AddItemToObject(e, "block_name", jstr(c->block_name));
		cJSON_AddStringToObject(e, "group", c->group ? c->group : "");
		cJSON_AddItemToObject(e, "level", c->has_level ? cJSON_CreateNumber(c->level)
							       : cJSON_CreateNull());
		cJSON_AddNumberToObject(e, "trials", (double)c->trials);
		cJSON_AddNumberToObject(e, "responses", (double)c->n);
		cJSON_AddNumberToObject(e, "correct", (double)c->k);
		cJSON_AddItemToObject(e, "pc", jnum(c->pc));
		cJSON_AddItemToObject(e, "pc_lower", jnum(c->lower));
		cJSON_AddItemToObject(e, "pc_upper", jnum(c->upper));
		cJSON_AddItemToObject(e, "dprime", jnum(c->has_dprime ? c->dprime : NAN));
		cJSON_AddBoolToObject(e, "dprime_corrected", c->dprime_corrected);
		cJSON_AddNumberToObject(e, "rt_n", (double)c->rt.n);
		cJSON_AddItemToObject(e, "rt_median", jnum(c->rt.median));
		cJSON_AddItemToObject(e, "rt_iqr", jnum(c->rt.iqr));
		cJSON_AddItemToObject(e, "rt_trimmed_mean", jnum(c->rt.trimmed));
		cJSON_AddNumberToObject(e, "anticipations", (double)c->anticipations);
		cJSON_AddNumberToObject(e, "timeouts", (double)c->timeouts);
		cJSON_AddItemToArray(cells, e);
	}
}

/* One psychometric fit with its points. */
static cJSON *json_fit(const struct analysis_series *s)
{
	const struct fit_result *r = &s->fit;
	bool ok = r->status == FIT_OK;
	cJSON *e = cJSON_CreateObject();
	cJSON_AddItemToObject(e, "subject", jstr(s->subject));
	cJSON_AddNumberToObject(e, "block", s->block);
	cJSON_AddItemToObject(e, "block_name", jstr(s->block_name));
	cJSON_AddStringToObject(e, "group", s->group ? s->group : "");
	cJSON_AddStringToObject(e, "status", ok ? "ok" : r->status == FIT_NO_CONVERGENCE ?
					     "no_convergence" : "unsupported");
	if (!ok)
		cJSON_AddStringToObject(e, "message", r->reason);
	cJSON_AddStringToObject(e, "shape", psyfn_shape_name(r->f.shape));
	cJSON_AddItemToObject(e, "alpha", jnum(ok ? r->f.alpha : NAN));
	cJSON_AddItemToObject(e, "beta", jnum(ok ? r->f.beta : NAN));
	cJSON_AddBoolToObject(e, "slope_bounded", ok && r->slope_bounded);
	cJSON_AddItemToObject(e, "lambda", jnum(ok ? r->f.lambda : NAN));
	cJSON_AddNumberToObject(e, "pc", r->pc_threshold);
	cJSON_AddItemToObject(e, "threshold", jnum(ok && r->threshold_ok ? r->threshold : NAN));
	bool ci = ok && r->has_ci;
	cJSON_AddItemToObject(e, "threshold_lower", jnum(ci ? r->threshold_ci[0] : NAN));
	cJSON_AddItemToObject(e, "threshold_upper", jnum(ci ? r->threshold_ci[1] : NAN));
	cJSON_AddItemToObject(e, "alpha_interval", json_interval(r->alpha_ci, ci));
	cJSON_AddItemToObject(e, "beta_interval", json_interval(r->beta_ci, ci));
	cJSON_AddItemToObject(e, "lambda_interval", json_interval(r->lambda_ci, ci));
	cJSON_AddItemToObject(e, "deviance", jnum(ok ? r->deviance : NAN));
	cJSON_AddItemToObject(e, "dof", ok ? cJSON_CreateNumber(r->dof) : cJSON_CreateNull());
	cJSON_AddNumberToObject(e, "bootstrap_samples", r->nboot);
	cJSON_AddNumberToObject(e, "bootstrap_failed", r->nboot_failed);
	cJSON *pts = cJSON_AddArrayToObject(e, "points");
	for (size_t p = 0; p < s->npts; p++) {
		cJSON *q = cJSON_CreateObject();
		cJSON_AddNumberToObject(q, "level", s->pts[p].level);
		cJSON_AddNumberToObject(q, "n", (double)s->pts[p].n);
		cJSON_AddNumberToObject(q, "k", (double)s->pts[p].k);
		cJSON_AddItemToArray(pts, q);
	}
	return e;
}

/* The psychometric fits and the categories. */
static void json_fits(cJSON *j, const struct analysis *a)
{
	cJSON *fits = cJSON_AddArrayToObject(j, "fits");
	for (size_t i = 0; i < a->nseries; i++)
		cJSON_AddItemToArray(fits, json_fit(&a->series[i]));
	cJSON *cats = cJSON_AddArrayToObject(j, "categories");
	for (size_t i = 0; i < a->ncat; i++)
		cJSON_AddItemToArray(cats, cJSON_CreateString(a->cats[i]));
}

/* One confusion matrix (counts, row proportions, the most confused pairs). */
static cJSON *json_confusion(const struct analysis *a, const struct analysis_confusion *c)
{
	cJSON *e = cJSON_CreateObject();
	cJSON_AddItemToObject(e, "level", c->has_level ? cJSON_CreateNumber(c->level)
						       : cJSON_CreateNull());
	cJSON *rows = cJSON_AddArrayToObject(e, "counts");
	cJSON *props = cJSON_AddArrayToObject(e, "row_proportions");
	for (size_t t = 0; t < a->ncat; t++) {
		cJSON *r = cJSON_CreateArray(), *p = cJSON_CreateArray();
		for (size_t ch = 0; ch < a->ncat; ch++) {
			unsigned long n = c->counts[t * a->ncat + ch];
			cJSON_AddItemToArray(r, cJSON_CreateNumber((double)n));
			cJSON_AddItemToArray(p, jnum(c->row_n[t] ? (double)n / (double)c->row_n[t]
								  : NAN));
		}
		cJSON_AddItemToArray(rows, r);
		cJSON_AddItemToArray(props, p);
	}
	cJSON *top = cJSON_AddArrayToObject(e, "most_confused");
	for (size_t p = 0; p < c->ntop; p++) {
		cJSON *q = cJSON_CreateObject();
		cJSON_AddStringToObject(q, "true", a->cats[c->top[p].truth]);
		cJSON_AddStringToObject(q, "chosen", a->cats[c->top[p].chosen]);
		cJSON_AddNumberToObject(q, "count", (double)c->top[p].count);
		cJSON_AddNumberToObject(q, "share", c->top[p].share);
		cJSON_AddItemToArray(top, q);
	}
	return e;
}

/* Confusion matrices, accuracy per category and per image. */
static void json_confusions(cJSON *j, const struct analysis *a)
{
	cJSON *confs = cJSON_AddArrayToObject(j, "confusions");
	for (size_t i = 0; i < a->nconf; i++)
		cJSON_AddItemToArray(confs, json_confusion(a, &a->conf[i]));
	cJSON *ca = cJSON_AddArrayToObject(j, "category_accuracy");
	for (size_t i = 0; i < a->ncatacc; i++) {
		const struct analysis_category *c = &a->catacc[i];
		cJSON *e = cJSON_CreateObject();
		cJSON_AddStringToObject(e, "category", c->category);
		cJSON_AddNumberToObject(e, "responses", (double)c->n);
		cJSON_AddNumberToObject(e, "correct", (double)c->k);
		cJSON_AddItemToObject(e, "pc", jnum(c->pc));
		cJSON_AddItemToObject(e, "pc_lower", jnum(c->lower));
		cJSON_AddItemToObject(e, "pc_upper", jnum(c->upper));
		cJSON_AddItemToArray(ca, e);
	}
	cJSON *items = cJSON_AddArrayToObject(j, "items");
	for (size_t i = 0; i < a->nitems; i++) {
		const struct analysis_item *it = &a->items[i];
		cJSON *e = cJSON_CreateObject();
		cJSON_AddStringToObject(e, "image", it->image);
		cJSON_AddStringToObject(e, "category", it->category);
		cJSON_AddNumberToObject(e, "responses", (double)it->n);
		cJSON_AddNumberToObject(e, "correct", (double)it->k);
		cJSON_AddItemToObject(e, "pc", jnum(it->pc));
		cJSON_AddItemToObject(e, "rt_median", jnum(it->median_rt));
		cJSON_AddBoolToObject(e, "ceiling", it->ceiling);
		cJSON_AddBoolToObject(e, "floor", it->floor);
		cJSON_AddItemToArray(items, e);
	}
}

/* Reaction times and the timing figures of each session. */
static void json_timing(cJSON *j, const struct analysis *a)
{
	cJSON *rt = cJSON_AddObjectToObject(j, "rt");
	cJSON_AddNumberToObject(rt, "n", (double)a->rt.n);
	cJSON_AddItemToObject(rt, "median", jnum(a->rt.median));
	cJSON_AddItemToObject(rt, "q25", jnum(a->rt.q25));
	cJSON_AddItemToObject(rt, "q75", jnum(a->rt.q75));
	cJSON_AddItemToObject(rt, "iqr", jnum(a->rt.iqr));
	cJSON_AddItemToObject(rt, "trimmed_mean", jnum(a->rt.trimmed));
	cJSON *tm = cJSON_AddArrayToObject(j, "timing");
	for (size_t i = 0; i < a->ntiming; i++) {
		const struct analysis_timing *t = &a->timing[i];
		cJSON *e = cJSON_CreateObject();
		cJSON_AddStringToObject(e, "session", t->session);
		cJSON_AddItemToObject(e, "subject", jstr(t->subject));
		cJSON_AddItemToObject(e, "timing_mode", jstr(t->timing_mode));
		cJSON_AddItemToObject(e, "refresh_hz", jnum(t->refresh_hz > 0 ? t->refresh_hz : NAN));
		cJSON_AddNumberToObject(e, "trials", (double)t->trials);
		cJSON_AddNumberToObject(e, "exact_exposures", (double)t->exact);
		cJSON_AddItemToObject(e, "exact_share",
				      jnum(t->trials ? (double)t->exact / (double)t->trials : NAN));
		cJSON_AddNumberToObject(e, "timing_faults", (double)t->timing_faults);
		cJSON_AddNumberToObject(e, "dropped_frames", (double)t->dropped_frames);
		cJSON_AddNumberToObject(e, "trials_with_drops", (double)t->trials_with_drops);
		cJSON_AddNumberToObject(e, "anticipations", (double)t->anticipations);
		cJSON_AddNumberToObject(e, "timeouts", (double)t->timeouts);
		cJSON_AddItemToArray(tm, e);
	}
}

static cJSON *json_doc(const struct analysis *a, const struct ropts *o, const struct loaded *L)
{
	cJSON *j = cJSON_CreateObject();
	cJSON_AddStringToObject(j, "database", o->db);
	cJSON_AddNumberToObject(j, "choices", a->opts.m);
	cJSON_AddNumberToObject(j, "chance", 1.0 / a->opts.m);
	cJSON_AddNumberToObject(j, "trials", (double)a->nrows);
	cJSON_AddNumberToObject(j, "practice_trials", (double)a->npractice);
	cJSON_AddNumberToObject(j, "subjects", (double)a->nsubjects);
	cJSON_AddStringToObject(j, "interval_method", stats_ci_method_name(a->opts.ci));
	cJSON_AddNumberToObject(j, "interval_level", a->opts.conf);
	cJSON *by = cJSON_AddArrayToObject(j, "by");
	for (size_t i = 0; i < L->nby; i++)
		cJSON_AddItemToArray(by, cJSON_CreateString(L->by[i]));
	json_conditions(j, a);
	json_fits(j, a);
	json_confusions(j, a);
	json_timing(j, a);
	return j;
}

/* ---- staircases (adaptive blocks) ---- */

static void print_staircases(const struct adapt_history *h)
{
	if (!h->n)
		return;
	printf("\nStaircases (adaptive blocks; threshold: up-down mean of the last reversals on the "
	       "axis ± their SD, QUEST posterior mean ± SD)\n");
	printf("  %-10s %-10s %-12s %-8s %3s %-10s %9s %6s %9s %11s %19s %6s\n", "session",
	       "subject", "block", "rule", "#", "category", "start", "trials", "reversals",
	       "threshold", "± SD (levels)", "pc");
	for (size_t i = 0; i < h->n; i++) {
		const struct adapt_history_row *r = &h->rows[i];
		printf("  %-10.8s %-10.10s %-12.12s %-8s %3d %-10.10s %9.4g %6d %9d ", r->session,
		       r->subject ? r->subject : "", r->block_name, adapt_rule_name(r->rule),
		       r->staircase, r->category ? r->category : "any", r->start, r->est.ntrials,
		       r->est.nreversals);
		if (!r->est.valid)
			printf("%11s %19s %6s\n", "none yet", "", "");
		else if (isnan(r->est.lower))
			printf("%11.4g %19s %6.3f\n", r->est.threshold, "", r->est.pc);
		else
			printf("%11.4g %9.4g to %-7.4g %6.3f\n", r->est.threshold, r->est.lower,
			       r->est.upper, r->est.pc);
	}
}

static void json_staircases(cJSON *j, const struct adapt_history *h)
{
	cJSON *arr = cJSON_AddArrayToObject(j, "staircases");
	for (size_t i = 0; i < h->n; i++) {
		const struct adapt_history_row *r = &h->rows[i];
		cJSON *e = cJSON_CreateObject();
		cJSON_AddStringToObject(e, "session", r->session);
		cJSON_AddItemToObject(e, "subject", jstr(r->subject));
		cJSON_AddNumberToObject(e, "block", r->block);
		cJSON_AddStringToObject(e, "block_name", r->block_name);
		cJSON_AddStringToObject(e, "adaptive", r->section);
		cJSON_AddStringToObject(e, "rule", adapt_rule_name(r->rule));
		cJSON_AddNumberToObject(e, "staircase", r->staircase);
		cJSON_AddItemToObject(e, "category", jstr(r->category));
		cJSON_AddNumberToObject(e, "start", r->start);
		cJSON_AddNumberToObject(e, "trials", r->est.ntrials);
		cJSON_AddNumberToObject(e, "reversals", r->est.nreversals);
		cJSON_AddItemToObject(e, "threshold", jnum(r->est.valid ? r->est.threshold : NAN));
		cJSON_AddItemToObject(e, "axis_mean", jnum(r->est.valid ? r->est.axis_mean : NAN));
		cJSON_AddItemToObject(e, "axis_sd", jnum(r->est.valid ? r->est.axis_sd : NAN));
		cJSON_AddItemToObject(e, "threshold_lower", jnum(r->est.valid ? r->est.lower : NAN));
		cJSON_AddItemToObject(e, "threshold_upper", jnum(r->est.valid ? r->est.upper : NAN));
		cJSON_AddNumberToObject(e, "pc", r->est.pc);
		cJSON_AddNumberToObject(e, "used", r->est.nused);
		cJSON_AddItemToArray(arr, e);
	}
}

int cmd_report(int argc, char **argv)
{
	struct ropts o;
	if (parse_args(argc, argv, &o))
		return EXIT_USAGE;
	struct store *s;
	char *err = NULL;
	if (store_open_reader(o.db, o.schema, &s, &err) < 0) {
		fprintf(stderr, "tachist report: %s (run a session first, or name one with --db)\n",
			err);
		free(err);
		return EXIT_PROBLEMS;
	}
	struct loaded L;
	int rc = EXIT_PROBLEMS;
	struct analysis *a = NULL;
	if (load(s, &o, &L, o.plots != NULL) < 0)
		goto out;
	if (setup_analysis(&o, L.m) < 0) {
		rc = EXIT_USAGE;
		goto out;
	}
	a = analysis_run(L.rows, L.nrows, L.sess, L.nsess, &o.a);
	if (!a)
		goto out;
	if (o.plots) {
		int nf = svg_report(a, o.plots, &err);
		if (nf < 0) {
			fprintf(stderr, "tachist report: %s\n", err);
			free(err);
			goto out;
		}
		if (!o.json)
			fprintf(stderr, "tachist report: wrote %d figures and index.html to %s\n", nf,
				o.plots);
	}
	struct adapt_history H;
	if (adapt_history_load(s, o.session, o.subject, &H, &err) < 0) {
		fprintf(stderr, "tachist report: %s\n", err);
		free(err);
		goto out;
	}
	if (o.json) {
		cJSON *j = json_doc(a, &o, &L);
		json_staircases(j, &H);
		char *txt = cJSON_Print(j);
		printf("%s\n", txt);
		free(txt);
		cJSON_Delete(j);
	} else {
		print_text(a, &o, &L);
		print_staircases(&H);
	}
	adapt_history_clear(&H);
	rc = EXIT_OK;
out:
	analysis_destroy(a);
	loaded_clear(&L);
	store_close(s);
	return rc;
}
