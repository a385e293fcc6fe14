/* stimcontrols — random-direction controls (see stimcontrols.h).
 *
 * Rows are handled in list order with the last source kept decoded (imgcache). For a row:
 * row_budget finds the source, the budget and the channels, then make_control draws the control
 * (pixels_make_control, seeded per row), writes it, decodes the written file and measures it
 * against the source as the audit does, and appends its row to the new list. */
#include "stimcontrols.h"

#include <errno.h>
#include <math.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_rng.h>

#include "csvout.h"
#include "diag.h"
#include "fspath.h"
#include "image.h"
#include "imgcache.h"
#include "pixels.h"

void stimcontrols_defaults(struct stimcontrols_opts *o)
{
	memset(o, 0, sizeof *o);
	o->seed = 1;
	o->tolerance = STIMCONTROLS_TOLERANCE;
	o->units = 1.0;
}

/* Everything one run shares between rows. */
struct ctx {
	const struct stimlist *l;
	const struct stimcontrols_opts *o;
	struct stimcontrols *r;
	FILE *fo;
	int wok;                 /* every list row written so far */
	const char **cells;      /* one output row */
	size_t ncol, c_src, c_lab, c_ctl, c_l2;
	gsl_rng *rng;
	struct imgcache cache;
	char **used;             /* control file names written, to keep them apart */
	size_t nused;
};

static struct stimcontrols_event *event(struct ctx *x, size_t row, enum stimcontrols_status st,
					char *msg)
{
	struct stimcontrols *r = x->r;
	r->v = xrealloc(r->v, (r->n + 1) * sizeof *r->v);
	struct stimcontrols_event *e = &r->v[r->n++];
	memset(e, 0, sizeof *e);
	e->row = row;
	e->status = st;
	e->msg = msg;
	r->nproblems += st == STIMCONTROLS_PROBLEM;
	return e;
}

/* A seed for one row from the run's seed and the row's image name, so a control does not change
 * when other rows are added, removed or reordered (FNV-1a over the name, mixed with the seed). */
static unsigned long row_seed(unsigned long long seed, const char *image)
{
	uint64_t h = 1469598103934665603ull ^ seed;
	for (const unsigned char *p = (const unsigned char *)image; *p; p++)
		h = (h ^ *p) * 1099511628211ull;
	h ^= h >> 33;
	return (unsigned long)(h & 0xffffffffUL);
}

/* The header of controls.csv: image, category, [level,] source, labels..., control,
 * l2_achieved. The level column is left out when the list has none, since the list format wants
 * no empty levels. */
static void header(struct ctx *x)
{
	const struct stimlist *l = x->l;
	size_t lc = l->has_level_column ? 1 : 0;
	x->ncol = 3 + lc + l->nlabels + 2;
	x->c_src = 2 + lc;
	x->c_lab = 3 + lc;
	x->c_ctl = x->c_lab + l->nlabels;
	x->c_l2 = x->c_ctl + 1;
	x->cells = xcalloc(x->ncol, sizeof *x->cells);
	x->cells[0] = "image";
	x->cells[1] = "category";
	x->cells[2] = "level";
	x->cells[x->c_src] = "source";
	for (size_t k = 0; k < l->nlabels; k++)
		x->cells[x->c_lab + k] = l->label_names[k];
	x->cells[x->c_ctl] = "control";
	x->cells[x->c_l2] = "l2_achieved";
	x->wok = csvout_row(x->fo, x->cells, x->ncol) == 0;
}

/* The L2 of the file at PATH to the source C, decoded and compared as the audit does. */
static int measure_file(struct ctx *x, const char *path, const struct imgcache *c, double *l2,
			int *channels, char *err, size_t errlen)
{
	struct image img;
	struct image_info info;
	if (image_load_max(path, x->o->max_side, &img, &info, err, errlen))
		return -1;
	struct pixels_dist d;
	*channels = image_colour_channels(&info, &c->info);
	pixels_distance(img.rgba, c->img.rgba, (size_t)img.width * (size_t)img.height, *channels, &d);
	image_free(&img);
	*l2 = d.l2;
	return 0;
}

/* A file name for row S's control not used before in this run (malloc'd), and its folder. */
static char *control_name(struct ctx *x, const struct stim *s, char **catdir)
{
	char *stem = fspath_stem(s->image), *safe = fspath_safe_name(s->category);
	*catdir = xasprintf("%s/%s", x->o->out_dir, safe);
	free(safe);
	char *name = xasprintf("%s/%s_rand.png", *catdir, stem);
	for (int k = 2;; k++) {
		size_t u;
		for (u = 0; u < x->nused && strcmp(x->used[u], name); u++)
			;
		if (u == x->nused)
			break;
		free(name);
		name = xasprintf("%s/%s_rand_%d.png", *catdir, stem, k);
	}
	x->used = xrealloc(x->used, (x->nused + 1) * sizeof *x->used);
	x->used[x->nused++] = xstrdup(name);
	free(stem);
	return name;
}

/* Draws, writes and measures the control of row I from source C with BUDGET over CHANS colour
 * channels, and appends its list row (cells 1..n already hold the original row's values). */
static void make_control(struct ctx *x, size_t i, const struct imgcache *c, double budget,
			 int chans)
{
	const struct stim *s = &x->l->items[i];
	char *catdir, *name = control_name(x, s, &catdir);
	size_t npix = (size_t)c->img.width * (size_t)c->img.height;
	struct image out = {c->img.width, c->img.height, xmalloc(4 * npix)};
	struct pixels_control res;
	gsl_rng_set(x->rng, row_seed(x->o->seed, s->image));
	int rc = isfinite(budget) && budget >= 0
		 ? pixels_make_control(c->img.rgba, npix, chans, budget, x->o->tolerance, x->rng,
				       out.rgba, &res)
		 : -1;
	/* Stored channels: grey or colour as compared, with alpha when the source has it. */
	int stored = (chans == 1 ? 1 : 3) + (c->info.alpha ? 1 : 0);
	char err[1024];
	double achieved = 0;
	int measured_ch = 0;
	if (rc == -1) {
		event(x, i, STIMCONTROLS_PROBLEM, xasprintf("%s: budget %g is not usable", s->image,
							    budget));
	} else if (rc == 1) {
		event(x, i, STIMCONTROLS_PROBLEM, xasprintf("%s: the L2 budget %.6g cannot be reached "
			 "within %.3g%% (best %.6g): too many source values sit at the limits of the "
			 "range", s->image, budget, 100 * x->o->tolerance, res.achieved));
	} else if (fspath_mkdir_p(catdir)) {
		event(x, i, STIMCONTROLS_PROBLEM, xasprintf("cannot create %s: %s", catdir,
							    strerror(errno)));
	} else if (image_save_png_channels(name, &out, stored, err, sizeof err) ||
		   measure_file(x, name, c, &achieved, &measured_ch, err, sizeof err)) {
		event(x, i, STIMCONTROLS_PROBLEM, xasprintf("cannot write the control: %s", err));
	} else {
		char ach[64];
		snprintf(ach, sizeof ach, "%.9g", achieved);
		char *crel = fspath_relative(name, x->o->out_dir);
		x->cells[0] = crel;
		x->cells[x->c_ctl] = "random";
		x->cells[x->c_l2] = ach;
		x->wok = x->wok && csvout_row(x->fo, x->cells, x->ncol) == 0;
		struct stimcontrols_event *e = event(x, i, STIMCONTROLS_MADE, NULL);
		e->control = crel;
		e->budget = budget;
		e->achieved = achieved;
		e->clipped = (double)res.nclipped / (double)(npix * (size_t)chans);
		e->channels = measured_ch;
		x->r->nmade++;
	}
	free(out.rgba);
	free(catdir);
	free(name);
}

/* Finds row I's source, its budget and the channels to work in; writes the original row with its
 * own measured L2 (0 for a clean image, NA when unknown). Returns the source, or NULL when no
 * control is to be made. */
static const struct imgcache *row_budget(struct ctx *x, size_t i, double *budget, int *chans,
					 char l2o[64])
{
	const struct stim *s = &x->l->items[i];
	const struct imgcache *c = NULL;
	struct image img;
	struct image_info info;
	char err[1024];
	int have_img = image_load_max(s->path, x->o->max_side, &img, &info, err, sizeof err) == 0;
	*budget = NAN;
	*chans = 3;
	snprintf(l2o, 64, "NA");
	if (!s->source_path) {
		if (have_img)
			snprintf(l2o, 64, "0");
		goto done;
	}
	x->r->nsource++;
	c = imgcache_get(&x->cache, s->source_path);
	if (!c->ok) {
		event(x, i, STIMCONTROLS_PROBLEM, xasprintf("%s: its source cannot be read: %s",
							    s->image, c->err));
		c = NULL;
	} else if (have_img && (img.width != c->img.width || img.height != c->img.height)) {
		event(x, i, STIMCONTROLS_PROBLEM, xasprintf("%s is %dx%d but its source is %dx%d; no "
			 "control made", s->image, img.width, img.height, c->img.width, c->img.height));
		c = NULL;
	} else if (have_img) {
		struct pixels_dist dd;
		*chans = image_colour_channels(&info, &c->info);
		pixels_distance(img.rgba, c->img.rgba, (size_t)img.width * (size_t)img.height, *chans,
				&dd);
		snprintf(l2o, 64, "%.9g", dd.l2);
		*budget = dd.l2;
	} else if (!x->o->budget_from_level) {
		event(x, i, STIMCONTROLS_PROBLEM, xstrdup(err));
		c = NULL;
	} else {
		*chans = image_colour_channels(&c->info, &c->info);
	}
	if (c && x->o->budget_from_level) {
		if (!s->has_level) {
			event(x, i, STIMCONTROLS_PROBLEM, xasprintf("%s has no level to use as the "
								    "budget", s->image));
			c = NULL;
		} else {
			*budget = s->level / x->o->units;
		}
	}
done:
	if (have_img)
		image_free(&img);
	return c;
}

static void one_row(struct ctx *x, size_t i)
{
	const struct stim *s = &x->l->items[i];
	const char *outdir = x->o->out_dir;
	char lev[64] = "", l2o[64];
	if (s->has_level)
		snprintf(lev, sizeof lev, "%.17g", s->level);
	char *img_rel = fspath_relative(s->path, outdir);
	char *src_rel = s->source_path ? fspath_relative(s->source_path, outdir) : NULL;
	double budget;
	int chans;
	const struct imgcache *c = row_budget(x, i, &budget, &chans, l2o);
	x->cells[0] = img_rel;
	x->cells[1] = s->category;
	x->cells[2] = lev;
	x->cells[x->c_src] = src_rel;
	for (size_t k = 0; k < x->l->nlabels; k++)
		x->cells[x->c_lab + k] = s->labels[k];
	x->cells[x->c_ctl] = "original";
	x->cells[x->c_l2] = l2o;
	x->wok = x->wok && csvout_row(x->fo, x->cells, x->ncol) == 0;
	if (c && x->wok && budget == 0)
		event(x, i, STIMCONTROLS_NOTE, xasprintf("%s: note: budget 0 (the image equals its "
							 "source); no control needed", s->image));
	else if (c && x->wok)
		make_control(x, i, c, budget, chans);
	free(img_rel);
	free(src_rel);
}

int stimcontrols_run(const struct stimlist *l, const struct stimcontrols_opts *o,
		     struct stimcontrols *r, char *err, size_t errlen)
{
	memset(r, 0, sizeof *r);
	for (size_t k = 0; k < l->nlabels; k++)
		if (!strcmp(l->label_names[k], "control") || !strcmp(l->label_names[k], "l2_achieved")) {
			snprintf(err, errlen, "%s already has a '%s' column", l->path, l->label_names[k]);
			return -1;
		}
	if (fspath_mkdir_p(o->out_dir)) {
		snprintf(err, errlen, "cannot create %s: %s", o->out_dir, strerror(errno));
		return -1;
	}
	r->list_out = xasprintf("%s/controls.csv", o->out_dir);
	struct ctx x = {.l = l, .o = o, .r = r, .cache = {.max_side = o->max_side}};
	x.fo = fopen(r->list_out, "w");
	if (!x.fo) {
		snprintf(err, errlen, "cannot write %s: %s", r->list_out, strerror(errno));
		return -1;
	}
	header(&x);
	x.rng = gsl_rng_alloc(gsl_rng_mt19937);
	for (size_t i = 0; i < l->n && x.wok; i++)
		one_row(&x, i);
	int closed = fclose(x.fo) == 0;
	for (size_t u = 0; u < x.nused; u++)
		free(x.used[u]);
	free(x.used);
	imgcache_clear(&x.cache);
	gsl_rng_free(x.rng);
	free(x.cells);
	if (!closed || !x.wok) {
		snprintf(err, errlen, "cannot write %s", r->list_out);
		return -1;
	}
	return 0;
}

void stimcontrols_clear(struct stimcontrols *r)
{
	if (!r)
		return;
	for (size_t k = 0; k < r->n; k++) {
		free(r->v[k].msg);
		free(r->v[k].control);
	}
	free(r->v);
	free(r->list_out);
	memset(r, 0, sizeof *r);
}
