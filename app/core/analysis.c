/* analysis — the report's tables from an array of trial rows (see analysis.h).
 *
 * Rows are sorted as an array of pointers by the key each table needs (condition, series, level,
 * item, session) and walked once per table; every table is an owned array of small structs that
 * point back into the caller's rows for their strings. Memory is linear in the number of rows.
 * Fits run per series through fit_run (which owns the bootstrap and its threads). */
#include "analysis.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "diag.h"

void analysis_opts_default(struct analysis_opts *o, int m)
{
	memset(o, 0, sizeof *o);
	o->m = m;
	o->ci = STATS_CI_WILSON;
	o->conf = 0.95;
	o->fit = true;
	fit_opts_default(&o->fit_opts, m);
	o->ceiling = 0.95;
	o->floor_margin = 0.0;
}

static int strcmp0(const char *a, const char *b)
{
	return strcmp(a ? a : "", b ? b : "");
}

static int cmp_level(const struct analysis_row *a, const struct analysis_row *b)
{
	if (a->has_level != b->has_level)
		return a->has_level ? 1 : -1;
	if (!a->has_level)
		return 0;
	return (a->level > b->level) - (a->level < b->level);
}

/* Series key: block, group (then level, for conditions). */
static int cmp_series_nosubj(const void *pa, const void *pb)
{
	const struct analysis_row *a = *(const struct analysis_row *const *)pa;
	const struct analysis_row *b = *(const struct analysis_row *const *)pb;
	if (a->block != b->block)
		return a->block < b->block ? -1 : 1;
	int c = strcmp0(a->group, b->group);
	if (c)
		return c;
	return cmp_level(a, b);
}

static int cmp_series_subj(const void *pa, const void *pb)
{
	const struct analysis_row *a = *(const struct analysis_row *const *)pa;
	const struct analysis_row *b = *(const struct analysis_row *const *)pb;
	int c = strcmp0(a->subject, b->subject);
	return c ? c : cmp_series_nosubj(pa, pb);
}

static bool same_series(const struct analysis_row *a, const struct analysis_row *b, bool subj)
{
	return (!subj || !strcmp0(a->subject, b->subject)) && a->block == b->block &&
	       !strcmp0(a->group, b->group);
}

static bool is_anticipation(const struct analysis_row *r)
{
	return r->anticipation || (r->has_rt && r->rt_ms < STATS_ANTICIPATION_MS);
}

static void fill_cell(struct analysis_cell *c, const struct analysis_row *const *v, size_t n,
		      const struct analysis_opts *o, bool subj, double *scratch)
{
	const struct analysis_row *r0 = v[0];
	memset(c, 0, sizeof *c);
	c->subject = subj ? r0->subject : NULL;
	c->block = r0->block;
	c->block_name = r0->block_name;
	c->group = r0->group;
	c->has_level = r0->has_level;
	c->level = r0->level;
	size_t nrt = 0;
	for (size_t i = 0; i < n; i++) {
		const struct analysis_row *r = v[i];
		c->trials++;
		if (r->timed_out)
			c->timeouts++;
		if (is_anticipation(r))
			c->anticipations++;
		if (r->correct >= 0) {
			c->n++;
			c->k += r->correct == 1;
		}
		if (r->correct == 1 && r->has_rt && r->rt_ms >= STATS_ANTICIPATION_MS)
			scratch[nrt++] = r->rt_ms;
	}
	c->pc = c->lower = c->upper = c->dprime = NAN;
	if (c->n > 0) {
		c->has_pc = true;
		c->pc = (double)c->k / (double)c->n;
		stats_ci(o->ci, c->k, c->n, o->conf, &c->lower, &c->upper);
		double p = stats_pc_corrected(c->k, c->n, &c->dprime_corrected);
		c->has_dprime = stats_dprime_mafc(p, o->m, &c->dprime) == 0;
	}
	stats_rt_summary(scratch, nrt, &c->rt);
}

/* Cells and series for one sort order (per subject when SUBJ, else pooled). */
static void conditions(struct analysis *a, const struct analysis_row **v, size_t n, bool subj,
		       double *scratch, size_t *cap_cells, size_t *cap_series)
{
	qsort(v, n, sizeof *v, subj ? cmp_series_subj : cmp_series_nosubj);
	const struct analysis_opts *o = &a->opts;
	for (size_t s = 0; s < n;) {
		size_t e = s + 1;
		while (e < n && same_series(v[s], v[e], subj))
			e++;
		/* Cells: runs of equal level inside the series. */
		size_t nlev = 0;
		for (size_t i = s; i < e;) {
			size_t j = i + 1;
			while (j < e && cmp_level(v[i], v[j]) == 0)
				j++;
			if (a->ncells == *cap_cells) {
				*cap_cells = *cap_cells ? 2 * *cap_cells : 64;
				a->cells = xrealloc(a->cells, *cap_cells * sizeof *a->cells);
			}
			fill_cell(&a->cells[a->ncells++], v + i, j - i, o, subj, scratch);
			nlev += v[i]->has_level;
			i = j;
		}
		if (o->fit && nlev > 0) {
			if (a->nseries == *cap_series) {
				*cap_series = *cap_series ? 2 * *cap_series : 16;
				a->series = xrealloc(a->series, *cap_series * sizeof *a->series);
			}
			struct analysis_series *se = &a->series[a->nseries++];
			memset(se, 0, sizeof *se);
			se->subject = subj ? v[s]->subject : NULL;
			se->block = v[s]->block;
			se->block_name = v[s]->block_name;
			se->group = v[s]->group;
			se->pts = xcalloc(nlev, sizeof *se->pts);
			for (size_t i = s; i < e; i++) {
				const struct analysis_row *r = v[i];
				if (!r->has_level || r->correct < 0)
					continue;
				if (se->npts == 0 || se->pts[se->npts - 1].level != r->level)
					se->pts[se->npts++].level = r->level;
				se->pts[se->npts - 1].n++;
				se->pts[se->npts - 1].k += r->correct == 1;
			}
			struct fit_opts fo = o->fit_opts;
			if (o->shape_auto)
				fo.shape = fit_direction(se->pts, se->npts) < 0 ? PSYFN_LOGISTIC
										 : PSYFN_WEIBULL;
			fit_run(se->pts, se->npts, &fo, &se->fit);
		}
		s = e;
	}
}

static int cmp_str(const void *pa, const void *pb)
{
	return strcmp(*(const char *const *)pa, *(const char *const *)pb);
}

static size_t cat_index(const struct analysis *a, const char *name)
{
	const char **hit = bsearch(&name, a->cats, a->ncat, sizeof *a->cats, cmp_str);
	return hit ? (size_t)(hit - a->cats) : (size_t)-1;
}

static int cmp_level_only(const void *pa, const void *pb)
{
	return cmp_level(*(const struct analysis_row *const *)pa,
			 *(const struct analysis_row *const *)pb);
}

static int cmp_pair(const void *pa, const void *pb)
{
	const struct analysis_pair *a = pa, *b = pb;
	if (a->count != b->count)
		return a->count > b->count ? -1 : 1;
	if (a->share != b->share)
		return a->share > b->share ? -1 : 1;
	return a->truth != b->truth ? (a->truth < b->truth ? -1 : 1) : (a->chosen < b->chosen ? -1 : 1);
}

static void confusions(struct analysis *a, const struct analysis_row **v, size_t n)
{
	/* The category list: every true and chosen category, sorted and unique. */
	const char **names = xmalloc((2 * n + 1) * sizeof *names);
	size_t nn = 0;
	for (size_t i = 0; i < n; i++) {
		names[nn++] = v[i]->category ? v[i]->category : "";
		if (v[i]->response)
			names[nn++] = v[i]->response;
	}
	qsort(names, nn, sizeof *names, cmp_str);
	a->cats = xmalloc((nn + 1) * sizeof *a->cats);
	for (size_t i = 0; i < nn; i++)
		if (a->ncat == 0 || strcmp(a->cats[a->ncat - 1], names[i]))
			a->cats[a->ncat++] = names[i];
	free(names);
	size_t K = a->ncat;
	qsort(v, n, sizeof *v, cmp_level_only);
	for (size_t s = 0; s < n;) {
		size_t e = s + 1;
		while (e < n && cmp_level(v[s], v[e]) == 0)
			e++;
		a->conf = xrealloc(a->conf, (a->nconf + 1) * sizeof *a->conf);
		struct analysis_confusion *c = &a->conf[a->nconf++];
		memset(c, 0, sizeof *c);
		c->has_level = v[s]->has_level;
		c->level = v[s]->level;
		c->counts = xcalloc(K > 0 ? K * K : 1, sizeof *c->counts);
		c->row_n = xcalloc(K ? K : 1, sizeof *c->row_n);
		for (size_t i = s; i < e; i++) {
			if (!v[i]->response)
				continue;
			size_t t = cat_index(a, v[i]->category ? v[i]->category : "");
			size_t ch = cat_index(a, v[i]->response);
			c->counts[t * K + ch]++;
			c->row_n[t]++;
		}
		struct analysis_pair *pairs = xmalloc((K * K + 1) * sizeof *pairs);
		size_t np = 0;
		for (size_t t = 0; t < K; t++)
			for (size_t ch = 0; ch < K; ch++)
				if (t != ch && c->counts[t * K + ch] > 0)
					pairs[np++] = (struct analysis_pair){
						t, ch, c->counts[t * K + ch],
						(double)c->counts[t * K + ch] / (double)c->row_n[t]};
		qsort(pairs, np, sizeof *pairs, cmp_pair);
		c->ntop = np < 5 ? np : 5;
		memcpy(c->top, pairs, c->ntop * sizeof *pairs);
		free(pairs);
		s = e;
	}
}

static int cmp_item(const void *pa, const void *pb)
{
	const struct analysis_row *a = *(const struct analysis_row *const *)pa;
	const struct analysis_row *b = *(const struct analysis_row *const *)pb;
	int c = strcmp0(a->category, b->category);
	return c ? c : strcmp0(a->image, b->image);
}

static void items(struct analysis *a, const struct analysis_row **v, size_t n, double *scratch)
{
	qsort(v, n, sizeof *v, cmp_item);
	const struct analysis_opts *o = &a->opts;
	for (size_t s = 0; s < n;) {
		size_t e = s + 1;
		while (e < n && !strcmp0(v[s]->category, v[e]->category))
			e++;
		a->catacc = xrealloc(a->catacc, (a->ncatacc + 1) * sizeof *a->catacc);
		struct analysis_category *ca = &a->catacc[a->ncatacc++];
		memset(ca, 0, sizeof *ca);
		ca->category = v[s]->category;
		ca->pc = ca->lower = ca->upper = NAN;
		for (size_t i = s; i < e;) {
			size_t j = i + 1;
			while (j < e && !strcmp0(v[i]->image, v[j]->image))
				j++;
			a->items = xrealloc(a->items, (a->nitems + 1) * sizeof *a->items);
			struct analysis_item *it = &a->items[a->nitems++];
			memset(it, 0, sizeof *it);
			it->image = v[i]->image;
			it->category = v[i]->category;
			size_t nrt = 0;
			for (size_t q = i; q < j; q++) {
				if (v[q]->correct < 0)
					continue;
				it->n++;
				it->k += v[q]->correct == 1;
				if (v[q]->correct == 1 && v[q]->has_rt &&
				    v[q]->rt_ms >= STATS_ANTICIPATION_MS)
					scratch[nrt++] = v[q]->rt_ms;
			}
			it->median_rt = stats_median(scratch, nrt);
			it->pc = it->n ? (double)it->k / (double)it->n : NAN;
			/* A flag needs evidence as well as the proportion: the item's Wilson 95%
			 * interval must lie wholly above (ceiling) or below (floor) the point halfway
			 * between chance and 1, so "0 of 1" or "1 of 1" flags nothing (rule: ours,
			 * common practice, no source; docs/methods.md "Items"). */
			double lo = 0, hi = 1, mid = 1.0 / o->m + (1 - 1.0 / o->m) / 2;
			if (it->n)
				stats_ci(STATS_CI_WILSON, it->k, it->n, 0.95, &lo, &hi);
			it->ceiling = it->n && it->pc >= o->ceiling && lo > mid;
			it->floor = it->n && it->pc <= 1.0 / o->m + o->floor_margin && hi < mid;
			ca->n += it->n;
			ca->k += it->k;
			i = j;
		}
		if (ca->n) {
			ca->pc = (double)ca->k / (double)ca->n;
			stats_ci(o->ci, ca->k, ca->n, o->conf, &ca->lower, &ca->upper);
		}
		s = e;
	}
}

static int cmp_session(const void *pa, const void *pb)
{
	const struct analysis_row *a = *(const struct analysis_row *const *)pa;
	const struct analysis_row *b = *(const struct analysis_row *const *)pb;
	return strcmp0(a->session, b->session);
}

/* Timing per session; counts every trial including practice (timing does not care). */
static void timing(struct analysis *a, const struct analysis_row **v, size_t n,
		   const struct analysis_session *ss, size_t nss)
{
	qsort(v, n, sizeof *v, cmp_session);
	for (size_t s = 0; s < n;) {
		size_t e = s + 1;
		while (e < n && !strcmp0(v[s]->session, v[e]->session))
			e++;
		a->timing = xrealloc(a->timing, (a->ntiming + 1) * sizeof *a->timing);
		struct analysis_timing *t = &a->timing[a->ntiming++];
		memset(t, 0, sizeof *t);
		t->session = v[s]->session;
		t->subject = v[s]->subject;
		for (size_t i = 0; i < nss; i++)
			if (!strcmp0(ss[i].id, t->session)) {
				t->timing_mode = ss[i].timing_mode;
				t->refresh_hz = ss[i].refresh_hz;
				t->frame_ms = ss[i].frame_ms;
				t->nframe_ms = ss[i].nframe_ms;
			}
		for (size_t i = s; i < e; i++) {
			const struct analysis_row *r = v[i];
			t->trials++;
			t->exact += r->frames_actual == r->frames_planned;
			t->timing_faults += !r->timing_ok;
			t->dropped_frames += r->dropped_frames > 0 ? (unsigned long)r->dropped_frames : 0;
			t->trials_with_drops += r->dropped_frames > 0;
			t->anticipations += is_anticipation(r);
			t->timeouts += r->timed_out;
		}
		s = e;
	}
}

struct analysis *analysis_run(const struct analysis_row *rows, size_t nrows,
			      const struct analysis_session *sessions, size_t nsessions,
			      const struct analysis_opts *o)
{
	if (o->m < 2)
		return NULL;
	struct analysis *a = xcalloc(1, sizeof *a);
	a->opts = *o;
	a->opts.fit_opts.m = o->m;
	a->nrows = nrows;
	const struct analysis_row **all = xmalloc((nrows + 1) * sizeof *all);
	const struct analysis_row **v = xmalloc((nrows + 1) * sizeof *v);
	double *scratch = xmalloc((nrows + 1) * sizeof *scratch);
	size_t n = 0;
	for (size_t i = 0; i < nrows; i++) {
		all[i] = &rows[i];
		if (rows[i].practice)
			a->npractice++;
		else
			v[n++] = &rows[i];
	}
	timing(a, all, nrows, sessions, nsessions);
	for (size_t i = 0; i < n; i++)
		a->has_levels |= v[i]->has_level;
	/* Subjects: count distinct names. */
	qsort(v, n, sizeof *v, cmp_series_subj);
	for (size_t i = 0; i < n; i++)
		a->nsubjects += i == 0 || strcmp0(v[i - 1]->subject, v[i]->subject) != 0;
	size_t cap_cells = 0, cap_series = 0;
	if (n > 0) {
		conditions(a, v, n, true, scratch, &cap_cells, &cap_series);
		if (a->nsubjects > 1)
			conditions(a, v, n, false, scratch, &cap_cells, &cap_series);
		confusions(a, v, n);
		items(a, v, n, scratch);
	}
	a->rt_ms = xmalloc((n + 1) * sizeof *a->rt_ms);
	for (size_t i = 0; i < n; i++)
		if (v[i]->correct == 1 && v[i]->has_rt && v[i]->rt_ms >= STATS_ANTICIPATION_MS)
			a->rt_ms[a->nrt++] = v[i]->rt_ms;
	memcpy(scratch, a->rt_ms, a->nrt * sizeof *scratch);
	stats_rt_summary(scratch, a->nrt, &a->rt);
	memcpy(a->rt_ms, scratch, a->nrt * sizeof *scratch);   /* sorted */
	a->correct_rt_n = a->nrt;
	free(all);
	free(v);
	free(scratch);
	return a;
}

void analysis_destroy(struct analysis *a)
{
	if (!a)
		return;
	for (size_t i = 0; i < a->nseries; i++)
		free(a->series[i].pts);
	for (size_t i = 0; i < a->nconf; i++) {
		free(a->conf[i].counts);
		free(a->conf[i].row_n);
	}
	free(a->cells);
	free(a->series);
	free(a->cats);
	free(a->conf);
	free(a->items);
	free(a->catacc);
	free(a->timing);
	free(a->rt_ms);
	free(a);
}
