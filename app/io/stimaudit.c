/* stimaudit — auditing a stimulus list (see stimaudit.h).
 *
 * audit_row decodes one row (and, through the one-entry cache, its source) into a record; the
 * set-wide passes (usual size and up-scaling, category z-scores, exact duplicates by sorting the
 * content hashes, near duplicates over every pair of perceptual hashes) then read only records.
 * Flags are collected with a group key and a value; make_groups sorts them and gathers equal
 * kind + key into one group with a sentence of its own. */
#include "stimaudit.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_statistics_double.h>

#include "diag.h"
#include "geom.h"
#include "imgcache.h"
#include "pixels.h"

static const char *const kind_names[STIMAUDIT_NKINDS] = {
	"unreadable", "size", "upscaled", "translucent", "luminance", "contrast", "duplicate",
	"near-duplicate", "budget", "source-size", "source-missing"};

const char *stimaudit_kind_name(enum stimaudit_kind k)
{
	return k < STIMAUDIT_NKINDS ? kind_names[k] : "?";
}

void stimaudit_defaults(struct stimaudit_opts *o)
{
	memset(o, 0, sizeof *o);
	o->units = 1.0;
	o->tolerance = STIMAUDIT_TOLERANCE;
	o->size_deg = STIMAUDIT_SIZE_DEG;
	o->zmax = STIMAUDIT_Z;
	o->near_bits = STIMAUDIT_NEAR_BITS;
}

/* Records a flag on ROW; KEY (may be NULL for "") and VALUE say what it shares with others. */
static void add_flag(struct stimaudit *a, size_t row, enum stimaudit_kind k, const char *key,
		     double value, char *msg)
{
	a->flags = xrealloc(a->flags, (a->nflags + 1) * sizeof *a->flags);
	a->flags[a->nflags++] = (struct stimaudit_flag){row, k, msg, xstrdup(key ? key : ""), value};
	a->rows[row].flags |= 1u << k;
}

/* Distance of row I's image to its source, and the budget check against its level. */
static void measure_source(struct stimaudit *a, size_t i, const struct image *img,
			   struct imgcache *cache)
{
	const struct stim *s = &a->l->items[i];
	struct stimaudit_row *r = &a->rows[i];
	const struct imgcache *c = imgcache_get(cache, s->source_path);
	if (!c->ok) {
		r->src_state = 2;
		add_flag(a, i, STIMAUDIT_SOURCE_MISSING, s->source, 0,
			 xasprintf("source of %s: %s", s->image, c->err));
		return;
	}
	if (c->img.width != img->width || c->img.height != img->height) {
		r->src_state = 3;
		add_flag(a, i, STIMAUDIT_SOURCE_SIZE, NULL, 0, xasprintf("%s is %dx%d but its source "
			 "%s is %dx%d", s->image, img->width, img->height, s->source, c->img.width,
			 c->img.height));
		return;
	}
	struct pixels_dist d;
	pixels_distance(img->rgba, c->img.rgba, (size_t)img->width * (size_t)img->height,
			image_colour_channels(&r->info, &c->info), &d);
	r->src_state = 1;
	r->l2 = d.l2;
	r->linf = d.linf;
	if (!s->has_level)
		return;
	double got = (a->o.norm_linf ? d.linf : d.l2) * a->o.units;
	/* One 8-bit step as an absolute floor, so a level of 0 allows no change beyond rounding and
	 * tiny budgets are not judged on quantisation. */
	double allow = a->o.tolerance * fabs(s->level) + a->o.units / 255.0;
	if (fabs(got - s->level) > allow)
		add_flag(a, i, STIMAUDIT_BUDGET, NULL, got - s->level, xasprintf("%s: measured %s %.6g "
			 "differs from the declared level %.6g by more than %.6g", s->image,
			 a->o.norm_linf ? "Linf" : "L2", got, s->level, allow));
}

static void audit_row(struct stimaudit *a, size_t i, struct imgcache *cache)
{
	const struct stim *s = &a->l->items[i];
	struct stimaudit_row *r = &a->rows[i];
	struct image img;
	char err[1024];
	if (image_load_max(s->path, a->o.max_side, &img, &r->info, err, sizeof err)) {
		add_flag(a, i, STIMAUDIT_UNREADABLE, NULL, 0, xstrdup(err));
		return;
	}
	r->ok = 1;
	size_t npix = (size_t)img.width * (size_t)img.height;
	struct pixels_stats st;
	pixels_stats(img.rgba, npix, &st);
	r->lum = st.mean_lum;
	r->rms = st.rms_contrast;
	r->translucent = st.translucent;
	pixels_content_hash(img.rgba, img.width, img.height, r->sha);
	r->phash = pixels_phash(img.rgba, img.width, img.height);
	if (st.translucent)
		add_flag(a, i, STIMAUDIT_TRANSLUCENT, NULL, 0, xasprintf("%s has transparent pixels: "
			 "what is shown depends on the background, and luminance here ignores alpha",
			 s->image));
	if (s->source_path)
		measure_source(a, i, &img, cache);
	const struct stim *next = i + 1 < a->l->n ? &a->l->items[i + 1] : NULL;
	if (next && next->source_path && !strcmp(next->source_path, s->path))
		imgcache_put(cache, s->path, &img, &r->info);
	else
		image_free(&img);
}

/* The most frequent width × height, then the size and up-scaling flags. */
static void check_sizes(struct stimaudit *a)
{
	size_t n = a->l->n, best = 0;
	for (size_t i = 0; i < n; i++) {
		if (!a->rows[i].ok)
			continue;
		size_t k = 0;
		for (size_t j = 0; j < n; j++)
			k += a->rows[j].ok && a->rows[j].info.width == a->rows[i].info.width &&
			     a->rows[j].info.height == a->rows[i].info.height;
		if (k > best) {
			best = k;
			a->usual_w = a->rows[i].info.width;
			a->usual_h = a->rows[i].info.height;
		}
		if (k * 2 > n)
			break;   /* a majority cannot be beaten */
	}
	for (size_t i = 0; i < n; i++) {
		const struct stimaudit_row *r = &a->rows[i];
		const char *name = a->l->items[i].image;
		if (!r->ok)
			continue;
		if (r->info.width != a->usual_w || r->info.height != a->usual_h) {
			char key[48];
			snprintf(key, sizeof key, "%dx%d", r->info.width, r->info.height);
			add_flag(a, i, STIMAUDIT_SIZE, key, 0, xasprintf("%s is %s; most of the set is "
				 "%dx%d", name, key, a->usual_w, a->usual_h));
		}
		int longer = r->info.width > r->info.height ? r->info.width : r->info.height;
		if (a->stim_px && longer < a->stim_px)
			add_flag(a, i, STIMAUDIT_UPSCALE, NULL, (double)a->stim_px / longer,
				 xasprintf("%s would be scaled up from %d to %d px to span %.3g deg on "
					   "the rig", name, longer, a->stim_px, a->stim_deg_actual));
	}
}

/* Category summaries in order of first appearance, and the z-score flags. */
static void check_categories(struct stimaudit *a)
{
	const struct stimlist *l = a->l;
	double *lv = xmalloc((l->n ? l->n : 1) * sizeof *lv), *cv = xmalloc((l->n ? l->n : 1) * sizeof *cv);
	size_t *cat_of = xmalloc((l->n ? l->n : 1) * sizeof *cat_of);
	for (size_t i = 0; i < l->n; i++) {
		const char *cat = l->items[i].category;
		size_t c;
		for (c = 0; c < a->ncats && strcmp(a->cats[c].name, cat); c++)
			;
		cat_of[i] = c;
		if (c < a->ncats)
			continue;
		a->cats = xrealloc(a->cats, (a->ncats + 1) * sizeof *a->cats);
		struct stimaudit_category *s = &a->cats[a->ncats++];
		memset(s, 0, sizeof *s);
		s->name = cat;
		for (size_t j = i; j < l->n; j++) {
			if (strcmp(l->items[j].category, cat))
				continue;
			s->n++;
			if (!a->rows[j].ok)
				continue;
			lv[s->nok] = a->rows[j].lum;
			cv[s->nok] = a->rows[j].rms;
			s->nok++;
		}
		s->ml = s->mc = s->sl = s->sc = NAN;
		if (s->nok) {
			s->ml = gsl_stats_mean(lv, 1, s->nok);
			s->mc = gsl_stats_mean(cv, 1, s->nok);
		}
		if (s->nok > 1) {
			s->sl = gsl_stats_sd_m(lv, 1, s->nok, s->ml);
			s->sc = gsl_stats_sd_m(cv, 1, s->nok, s->mc);
		}
	}
	free(lv);
	free(cv);
	for (size_t j = 0; j < l->n; j++) {
		struct stimaudit_row *r = &a->rows[j];
		const struct stimaudit_category *cs = &a->cats[cat_of[j]];
		const char *name = l->items[j].image;
		if (!r->ok || cs->nok < 2)
			continue;
		r->zlum = cs->sl > 0 ? (r->lum - cs->ml) / cs->sl : 0;
		r->zrms = cs->sc > 0 ? (r->rms - cs->mc) / cs->sc : 0;
		if (fabs(r->zlum) > a->o.zmax)
			add_flag(a, j, STIMAUDIT_LUMINANCE, NULL, r->zlum, xasprintf("%s: mean luminance "
				 "%.4f is %+.2f SD from its category '%s' (mean %.4f, SD %.4f)", name,
				 r->lum, r->zlum, cs->name, cs->ml, cs->sl));
		if (fabs(r->zrms) > a->o.zmax)
			add_flag(a, j, STIMAUDIT_CONTRAST, NULL, r->zrms, xasprintf("%s: RMS contrast "
				 "%.4f is %+.2f SD from its category '%s' (mean %.4f, SD %.4f)", name,
				 r->rms, r->zrms, cs->name, cs->mc, cs->sc));
	}
	free(cat_of);
}

/* True when rows I and J are tied through a source (one is the other's source, or both share
 * one): their likeness is by design and is checked as a budget instead. */
static int related(const struct stimlist *l, size_t i, size_t j)
{
	const struct stim *a = &l->items[i], *b = &l->items[j];
	if (a->source_path && b->source_path && !strcmp(a->source_path, b->source_path))
		return 1;
	if (a->source_path && !strcmp(a->source_path, b->path))
		return 1;
	if (b->source_path && !strcmp(b->source_path, a->path))
		return 1;
	return 0;
}

static void add_pair(struct stimaudit *a, size_t i, size_t j, int bits)
{
	a->pairs = xrealloc(a->pairs, (a->npairs + 1) * sizeof *a->pairs);
	a->pairs[a->npairs++] = (struct stimaudit_pair){i, j, bits};
}

/* Orders row records by content hash, then by position. */
static int cmp_rec_sha(const void *x, const void *y)
{
	const struct stimaudit_row *a = *(const struct stimaudit_row *const *)x;
	const struct stimaudit_row *b = *(const struct stimaudit_row *const *)y;
	int c = strcmp(a->sha, b->sha);
	return c ? c : (a > b) - (a < b);
}

/* Exact duplicates (equal content hashes, found by sorting) and near duplicates (perceptual
 * hashes within near_bits, every pair). */
static void check_duplicates(struct stimaudit *a)
{
	const struct stimlist *l = a->l;
	size_t n = l->n, m = 0;
	const struct stimaudit_row **idx = xmalloc((n ? n : 1) * sizeof *idx);
	for (size_t i = 0; i < n; i++)
		if (a->rows[i].ok)
			idx[m++] = &a->rows[i];
	qsort(idx, m, sizeof *idx, cmp_rec_sha);
	for (size_t s = 0; s < m;) {
		size_t e = s + 1;
		while (e < m && !strcmp(idx[s]->sha, idx[e]->sha))
			e++;
		for (size_t x = s; x < e; x++)
			for (size_t y = x + 1; y < e; y++) {
				size_t i = (size_t)(idx[x] - a->rows), j = (size_t)(idx[y] - a->rows);
				if (related(l, i, j))
					continue;
				add_pair(a, i, j, -1);
				add_flag(a, j, STIMAUDIT_DUPLICATE, NULL, 0, xasprintf("%s has the same "
					 "pixels as %s (line %d)", l->items[j].image, l->items[i].image,
					 l->items[i].line));
			}
		s = e;
	}
	free(idx);
	for (size_t i = 0; i < n; i++) {
		if (!a->rows[i].ok)
			continue;
		for (size_t j = i + 1; j < n; j++) {
			if (!a->rows[j].ok || !strcmp(a->rows[i].sha, a->rows[j].sha))
				continue;
			int bits = pixels_hamming(a->rows[i].phash, a->rows[j].phash);
			if (bits > a->o.near_bits || related(l, i, j))
				continue;
			add_pair(a, i, j, bits);
			add_flag(a, j, STIMAUDIT_NEAR, NULL, bits, xasprintf("%s looks like %s (line %d): "
				 "perceptual hashes %d bits apart", l->items[j].image, l->items[i].image,
				 l->items[i].line, bits));
		}
	}
}

static int cmp_flag(const void *x, const void *y)
{
	const struct stimaudit_flag *a = x, *b = y;
	if (a->row != b->row)
		return (a->row > b->row) - (a->row < b->row);
	return (a->kind > b->kind) - (a->kind < b->kind);
}

/* "A–B" of a group's values with FMT, or one value when they are equal. */
static char *range_text(const char *fmt, double lo, double hi, const char *unit)
{
	char a[32], b[32];
	snprintf(a, sizeof a, fmt, lo);
	snprintf(b, sizeof b, fmt, hi);
	if (!strcmp(a, b))
		return xasprintf("%s%s", a, unit);
	return xasprintf("%s%s–%s%s", a, unit, b, unit);
}

/* The sentence for a group of N > 1 flags. */
static char *group_sentence(const struct stimaudit *a, const struct stimaudit_group *g)
{
	const struct stimaudit_flag *f = &a->flags[g->members[0]];
	size_t n = g->n;
	char *r = NULL, *out;
	switch (g->kind) {
	case STIMAUDIT_UNREADABLE:
		return xasprintf("%zu images cannot be read (missing, not images, over the size limit, "
				 "corrupt or truncated)", n);
	case STIMAUDIT_SIZE:
		return xasprintf("%zu images are %s; most of the set is %dx%d", n, f->key, a->usual_w,
				 a->usual_h);
	case STIMAUDIT_UPSCALE:
		r = range_text("%.2f", g->min, g->max, "×");
		out = xasprintf("%zu images would be scaled up %s to span %.3g deg (%d px) on the rig",
				n, r, a->stim_deg_actual, a->stim_px);
		break;
	case STIMAUDIT_TRANSLUCENT:
		return xasprintf("%zu images have transparent pixels: what is shown depends on the "
				 "background, and luminance here ignores alpha", n);
	case STIMAUDIT_LUMINANCE:
	case STIMAUDIT_CONTRAST:
		r = range_text("%+.2f", g->min, g->max, "");
		out = xasprintf("%zu images have a %s more than %g SD from their category's mean "
				"(z %s)", n, g->kind == STIMAUDIT_LUMINANCE ? "mean luminance" :
				"RMS contrast", a->o.zmax, r);
		break;
	case STIMAUDIT_DUPLICATE:
		return xasprintf("%zu images have the same pixels as an earlier row", n);
	case STIMAUDIT_NEAR:
		r = range_text("%.0f", g->min, g->max, "");
		out = xasprintf("%zu images look like an earlier row: perceptual hashes %s bits apart",
				n, r);
		break;
	case STIMAUDIT_BUDGET:
		r = range_text("%+.4g", g->min, g->max, "");
		out = xasprintf("%zu images differ from their declared level by more than the "
				"tolerance (measured minus declared: %s)", n, r);
		break;
	case STIMAUDIT_SOURCE_SIZE:
		return xasprintf("%zu images differ in size from their source", n);
	case STIMAUDIT_SOURCE_MISSING:
		return xasprintf("%zu images have a source that cannot be read: %s", n, f->key);
	default:
		return xstrdup(f->msg);
	}
	free(r);
	return out;
}

/* Gathers the sorted flags into groups of equal kind and key, ordered by their first flag. */
static void make_groups(struct stimaudit *a)
{
	for (size_t k = 0; k < a->nflags; k++) {
		const struct stimaudit_flag *f = &a->flags[k];
		size_t g;
		for (g = 0; g < a->ngroups; g++) {
			const struct stimaudit_flag *h = &a->flags[a->groups[g].members[0]];
			if (h->kind == f->kind && !strcmp(h->key, f->key))
				break;
		}
		if (g == a->ngroups) {
			a->groups = xrealloc(a->groups, (a->ngroups + 1) * sizeof *a->groups);
			a->groups[a->ngroups++] = (struct stimaudit_group){f->kind, NULL, 0, f->value,
									  f->value, NULL};
		}
		struct stimaudit_group *gr = &a->groups[g];
		gr->members = xrealloc(gr->members, (gr->n + 1) * sizeof *gr->members);
		gr->members[gr->n++] = k;
		gr->min = f->value < gr->min ? f->value : gr->min;
		gr->max = f->value > gr->max ? f->value : gr->max;
	}
	for (size_t g = 0; g < a->ngroups; g++) {
		struct stimaudit_group *gr = &a->groups[g];
		gr->summary = gr->n == 1 ? xstrdup(a->flags[gr->members[0]].msg)
					 : group_sentence(a, gr);
	}
}

void stimaudit_run(const struct stimlist *l, const struct stimaudit_opts *o, struct stimaudit *a)
{
	memset(a, 0, sizeof *a);
	a->l = l;
	a->o = *o;
	if (o->rig)
		a->stim_px = geom_deg_to_px(o->rig, o->size_deg, &a->stim_deg_actual);
	a->rows = xcalloc(l->n ? l->n : 1, sizeof *a->rows);
	struct imgcache cache = {.max_side = o->max_side};
	for (size_t i = 0; i < l->n; i++)
		audit_row(a, i, &cache);
	imgcache_clear(&cache);
	check_sizes(a);
	check_categories(a);
	check_duplicates(a);
	if (a->nflags)
		qsort(a->flags, a->nflags, sizeof *a->flags, cmp_flag);
	make_groups(a);
}

void stimaudit_clear(struct stimaudit *a)
{
	if (!a)
		return;
	for (size_t k = 0; k < a->nflags; k++) {
		free(a->flags[k].msg);
		free(a->flags[k].key);
	}
	for (size_t g = 0; g < a->ngroups; g++) {
		free(a->groups[g].members);
		free(a->groups[g].summary);
	}
	free(a->flags);
	free(a->groups);
	free(a->rows);
	free(a->cats);
	free(a->pairs);
	memset(a, 0, sizeof *a);
}
