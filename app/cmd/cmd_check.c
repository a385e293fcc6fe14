/* cmd_check — `tachist check PROTOCOL [--rig FILE] [--json]`: everything that can be known before an
 * observer sits down.
 *
 * Loads the protocol, the rig and the stimulus list (each reports every problem it finds), opens
 * every image the list names (and the mask image) with the same decoder the presenter uses, checks
 * that the stimulus fits the screen, builds the plan and prints it: blocks, trials, conditions,
 * each epoch in frames with its actual ms, stimulus size, estimated length. Diagnostics go to stderr
 * as FILE:LINE: level: message (and into the JSON document with --json). Exit 0 when the session
 * can run (warnings allowed), 1 when any error was found, 2 on usage. */
#include <cJSON.h>
#include <errno.h>
#include <unistd.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "adapt.h"
#include "cmd.h"
#include "geom.h"
#include "image.h"
#include "plan.h"
#include "protocol.h"
#include "rig.h"
#include "rig_lum.h"
#include "lum.h"
#include "stimlist.h"

/* The seed the printed plan is built with; `run` draws its own. */
#define CHECK_SEED 1

struct image_summary {
	int max_w, max_h;          /* largest decoded image */
	int min_side;              /* smallest longer side */
	size_t n_ok;
	const char *smallest;      /* path of the image with min_side */
};


/* Rows sorted by path, so each file is opened once however often the list names it. */
struct by_path {
	const char *path;
	size_t i;
};

static int cmp_path(const void *a, const void *b)
{
	const struct by_path *x = a, *y = b;
	int c = strcmp(x->path, y->path);
	return c ? c : (x->i > y->i) - (x->i < y->i);
}

static void probe_images(const struct stimlist *l, long max_side, struct image_summary *sum,
			 struct diag_list *d, int **w_out, int **h_out)
{
	struct by_path *sorted = xmalloc((l->n ? l->n : 1) * sizeof *sorted);
	size_t *idx = xmalloc((l->n ? l->n : 1) * sizeof *idx);
	int *w = xcalloc(l->n ? l->n : 1, sizeof *w), *h = xcalloc(l->n ? l->n : 1, sizeof *h);
	for (size_t i = 0; i < l->n; i++) {
		sorted[i].path = l->items[i].path;
		sorted[i].i = i;
	}
	qsort(sorted, l->n, sizeof *sorted, cmp_path);
	for (size_t i = 0; i < l->n; i++)
		idx[i] = sorted[i].i;
	free(sorted);
	for (size_t k = 0; k < l->n; k++) {
		const struct stim *s = &l->items[idx[k]];
		if (k > 0 && !strcmp(s->path, l->items[idx[k - 1]].path)) {
			w[idx[k]] = w[idx[k - 1]];
			h[idx[k]] = h[idx[k - 1]];
			continue;
		}
		struct image_info info;
		char err[512];
		if (image_probe_max(s->path, max_side, &info, err, sizeof err)) {
			diag_add(d, DIAG_ERROR, l->path, s->line, "image '%s': %s", s->image, err);
			continue;
		}
		w[idx[k]] = info.width;
		h[idx[k]] = info.height;
		sum->n_ok++;
		if (info.width > sum->max_w)
			sum->max_w = info.width;
		if (info.height > sum->max_h)
			sum->max_h = info.height;
		int side = info.width > info.height ? info.width : info.height;
		if (!sum->min_side || side < sum->min_side) {
			sum->min_side = side;
			sum->smallest = s->image;
		}
	}
	free(idx);
	*w_out = w;
	*h_out = h;
}

/* The stimulus is drawn with its longer side STIM_PX: an image that then overflows the screen is
 * an error (reported once, at size_deg), one drawn above its own size a warning. */
static void check_fit(const struct protocol *p, const struct rig *r, const struct stimlist *l,
		      const int *w, const int *h, int stim_px, struct diag_list *d)
{
	size_t over = 0, up = 0;
	double worst_up = 1;
	const char *over_img = NULL, *up_img = NULL;
	int over_w = 0, over_h = 0;
	for (size_t i = 0; i < l->n; i++) {
		if (!w[i] || !h[i])
			continue;
		int side = w[i] > h[i] ? w[i] : h[i];
		double sw = (double)stim_px * w[i] / side, sh = (double)stim_px * h[i] / side;
		if (lround(sw) > r->width_px || lround(sh) > r->height_px) {
			if (!over++) {
				over_img = l->items[i].image;
				over_w = (int)lround(sw);
				over_h = (int)lround(sh);
			}
		}
		if (stim_px > side) {
			up++;
			if ((double)stim_px / side > worst_up) {
				worst_up = (double)stim_px / side;
				up_img = l->items[i].image;
			}
		}
	}
	if (over)
		diag_add(d, DIAG_ERROR, p->path, p->size_line, "size_deg = %g is %d px: %zu image%s "
			 "do%s not fit the %dx%d px screen (for example '%s' at %dx%d px)", p->size_deg,
			 stim_px, over, over == 1 ? "" : "s", over == 1 ? "es" : "", r->width_px,
			 r->height_px, over_img, over_w, over_h);
	if (up)
		diag_add(d, DIAG_WARNING, p->path, p->size_line, "size_deg = %g is %d px: %zu image%s "
			 "must be scaled up beyond native size (up to %.2fx, for example '%s')",
			 p->size_deg, stim_px, up, up == 1 ? "" : "s", worst_up, up_img);
}

struct ranked {
	struct diag g;
	size_t rank, index;
};

static int cmp_ranked(const void *a, const void *b)
{
	const struct ranked *x = a, *y = b;
	if (x->rank != y->rank)
		return x->rank < y->rank ? -1 : 1;
	if (x->g.line != y->g.line)
		return x->g.line < y->g.line ? -1 : 1;
	return x->index < y->index ? -1 : x->index > y->index;
}

/* Orders the diagnostics by file (in the order files were first mentioned), then by line (whole-
 * file messages first), keeping the order of discovery otherwise. */
static void sort_diags(struct diag_list *d)
{
	if (d->n < 2)
		return;
	struct ranked *v = xmalloc(d->n * sizeof *v);
	for (size_t i = 0; i < d->n; i++) {
		v[i].g = d->v[i];
		v[i].index = i;
		v[i].rank = i;
		for (size_t k = 0; k < i; k++)
			if ((!d->v[k].file && !d->v[i].file) ||
			    (d->v[k].file && d->v[i].file && !strcmp(d->v[k].file, d->v[i].file))) {
				v[i].rank = v[k].rank;
				break;
			}
	}
	qsort(v, d->n, sizeof *v, cmp_ranked);
	for (size_t i = 0; i < d->n; i++)
		d->v[i] = v[i].g;
	free(v);
}

static void block_conditions(const struct plan *pl, size_t b, const struct stimlist *l,
			     size_t *nlevels, size_t *ncats)
{
	const struct plan_block *pb = &pl->blocks[b];
	double *lv = xmalloc((pb->ntrials ? pb->ntrials : 1) * sizeof *lv);
	int cats[64] = {0};
	size_t nl = 0, nc = 0;
	for (size_t i = 0; i < pb->ntrials; i++) {
		const struct plan_trial *t = &pl->trials[pb->first + i];
		if (t->choice >= 0 && t->choice < 64 && !cats[t->choice]++)
			nc++;
		if (t->stim < 0 || !l->items[t->stim].has_level)
			continue;
		double v = l->items[t->stim].level;
		size_t k = 0;
		while (k < nl && lv[k] != v)
			k++;
		if (k == nl)
			lv[nl++] = v;
	}
	free(lv);
	*nlevels = nl;
	*ncats = nc;
}

/* The display's calibration and the background's light, when the rig has a calibration. */
static void print_luminance(const struct protocol *p, const struct rig *r)
{
	const struct lum_curve *g = r->lum && r->lum->ch[LUM_GREY].present ? &r->lum->ch[LUM_GREY]
									     : NULL;
	if (!g) {
		printf("luminance not calibrated; background code %d%s\n", p->background,
		       r->lum ? " (only single channels measured)" : "");
		return;
	}
	printf("luminance gamma %.3f, %.4g to %.4g cd/m2, measured %s (%s); background code %d = "
	       "%.4g cd/m2", g->gamma, g->l_min, g->l_max, r->lum->measured,
	       lum_uses_table(g, r->lum->model) ? "measured table" : "fit", p->background,
	       lum_curve_eval(g, r->lum->model, p->background));
	if (p->background_cd >= 0)
		printf(" (asked %g)", p->background_cd);
	printf("%s\n", p->linearize ? "; images linearised" : "");
}

/* The same for --json: an object, or null without a calibration. */
static void json_luminance(cJSON *j, const struct protocol *p, const struct rig *r)
{
	const struct lum_curve *g = r->lum && r->lum->ch[LUM_GREY].present ? &r->lum->ch[LUM_GREY]
									     : NULL;
	if (!g) {
		cJSON_AddNullToObject(j, "luminance");
		return;
	}
	cJSON *o = cJSON_AddObjectToObject(j, "luminance");
	cJSON_AddStringToObject(o, "measured", r->lum->measured);
	cJSON_AddNumberToObject(o, "gamma", g->gamma);
	cJSON_AddNumberToObject(o, "l_min", g->l_min);
	cJSON_AddNumberToObject(o, "l_max", g->l_max);
	cJSON_AddBoolToObject(o, "uses_table", lum_uses_table(g, r->lum->model));
	cJSON_AddNumberToObject(o, "background_code", p->background);
	cJSON_AddNumberToObject(o, "background_cd", lum_curve_eval(g, r->lum->model, p->background));
	if (p->background_cd >= 0)
		cJSON_AddNumberToObject(o, "background_cd_asked", p->background_cd);
	else
		cJSON_AddNullToObject(o, "background_cd_asked");
	cJSON_AddBoolToObject(o, "linearize", p->linearize);
}

static void print_text(const struct protocol *p, const struct rig *r, const struct stimlist *l,
		       const struct plan *pl)
{
	printf("protocol  %s (%s)\n", p->name, p->path);
	printf("list      %s: %zu rows\n", l->path, l->n);
	printf("rig       %s%s%s: %dx%d px, %gx%g cm at %g cm, %g Hz, %.2f px/deg\n",
	       r->name ? r->name : "", r->name ? " " : "", r->path ? r->path : "", r->width_px,
	       r->height_px, r->width_cm, r->height_cm, r->distance_cm, r->refresh_hz,
	       geom_px_per_deg(r));
	printf("stimulus  %g deg -> %d px = %.3f deg\n", p->size_deg, pl->stim_px,
	       pl->stim_deg_actual);
	print_luminance(p, r);
	printf("categories");
	for (size_t i = 0; i < p->nchoices; i++)
		printf(" %s=%s", p->choices[i].category, p->choices[i].key);
	printf("\n\n%-10s %9s %7s %10s\n", "epoch", "ms", "frames", "actual ms");
	for (int e = 0; e < EPOCH_COUNT; e++) {
		if (e == EPOCH_RESPONSE && p->epoch_ms[e] == 0)
			printf("%-10s %9s %7s %10s\n", epoch_name((enum epoch)e), "0", "-", "unlimited");
		else
			printf("%-10s %9g %7d %10.1f\n", epoch_name((enum epoch)e), p->epoch_ms[e],
			       pl->epoch_frames[e], pl->epoch_actual_ms[e]);
	}
	printf("\n%-3s %-16s %7s %-8s %-7s %14s %-8s %s\n", "#", "block", "trials", "practice",
	       "order", "longest_streak", "feedback", "conditions");
	for (size_t b = 0; b < pl->nblocks; b++) {
		const struct protocol_block *pb = &p->blocks[pl->blocks[b].proto_block];
		size_t nl, nc;
		block_conditions(pl, b, l, &nl, &nc);
		char cond[96];
		const struct adapt_spec *as = pb->adaptive ? adapt_spec_find(p->adaptive,
									       p->nadaptive, pb->adaptive)
							   : NULL;
		if (as) {
			size_t ns = adapt_spec_nstairs(as, p->nchoices);
			snprintf(cond, sizeof cond, "adaptive %s: %s, %zu staircase%s (trials at most)",
				 as->name, adapt_rule_name(as->base.rule), ns, ns == 1 ? "" : "s");
		} else if (pb->adaptive)
			snprintf(cond, sizeof cond, "adaptive (%s) x %zu categories", pb->adaptive, nc);
		else
			snprintf(cond, sizeof cond, "%zu level%s x %zu categor%s = %zu", nl ? nl : 1,
				 nl == 1 || !nl ? "" : "s", nc, nc == 1 ? "y" : "ies", (nl ? nl : 1) * nc);
		printf("%-3zu %-16s %7zu %-8s %-7s %14d %-8s %s\n", b + 1, pb->name,
		       pl->blocks[b].ntrials, pb->practice ? "yes" : "no",
		       pb->order == ORDER_RANDOM ? "random" : "fixed", pb->longest_streak,
		       pb->feedback ? "yes" : "no", cond);
	}
	long secs = lround(pl->est_seconds);
	printf("\ntotal %zu trials in %zu block%s, about %ld min %02ld s\n", pl->ntrials, pl->nblocks,
	       pl->nblocks == 1 ? "" : "s", secs / 60, secs % 60);
}

static cJSON *json_doc(const struct protocol *p, const struct rig *r, const struct stimlist *l,
		       const struct plan *pl, const struct diag_list *d, int ok)
{
	static const char *const lv[] = {"error", "warning", "note"};
	cJSON *j = cJSON_CreateObject();
	cJSON_AddBoolToObject(j, "ok", ok);
	cJSON *probs = cJSON_AddArrayToObject(j, "problems");
	for (size_t i = 0; i < d->n; i++) {
		cJSON *o = cJSON_CreateObject();
		cJSON_AddStringToObject(o, "level", lv[d->v[i].level]);
		if (d->v[i].file)
			cJSON_AddStringToObject(o, "file", d->v[i].file);
		else
			cJSON_AddNullToObject(o, "file");
		cJSON_AddNumberToObject(o, "line", d->v[i].line);
		cJSON_AddStringToObject(o, "message", d->v[i].msg);
		cJSON_AddItemToArray(probs, o);
	}
	if (!pl)
		return j;
	cJSON_AddStringToObject(j, "protocol", p->name);
	cJSON_AddStringToObject(j, "protocol_path", p->path);
	cJSON_AddStringToObject(j, "list", l->path);
	cJSON_AddNumberToObject(j, "list_rows", (double)l->n);
	cJSON_AddStringToObject(j, "list_sha256", l->sha256);
	cJSON *rj = cJSON_AddObjectToObject(j, "rig");
	if (r->path)
		cJSON_AddStringToObject(rj, "path", r->path);
	cJSON_AddNumberToObject(rj, "width_px", r->width_px);
	cJSON_AddNumberToObject(rj, "height_px", r->height_px);
	cJSON_AddNumberToObject(rj, "width_cm", r->width_cm);
	cJSON_AddNumberToObject(rj, "height_cm", r->height_cm);
	cJSON_AddNumberToObject(rj, "distance_cm", r->distance_cm);
	cJSON_AddNumberToObject(rj, "refresh_hz", r->refresh_hz);
	cJSON_AddNumberToObject(rj, "px_per_deg", geom_px_per_deg(r));
	json_luminance(j, p, r);
	cJSON *sj = cJSON_AddObjectToObject(j, "stimulus");
	cJSON_AddNumberToObject(sj, "size_deg", p->size_deg);
	cJSON_AddNumberToObject(sj, "pixels", pl->stim_px);
	cJSON_AddNumberToObject(sj, "degrees_actual", pl->stim_deg_actual);
	cJSON *ch = cJSON_AddArrayToObject(j, "categories");
	for (size_t i = 0; i < p->nchoices; i++) {
		cJSON *o = cJSON_CreateObject();
		cJSON_AddStringToObject(o, "category", p->choices[i].category);
		cJSON_AddStringToObject(o, "key", p->choices[i].key);
		cJSON_AddItemToArray(ch, o);
	}
	cJSON *ep = cJSON_AddArrayToObject(j, "epochs");
	for (int e = 0; e < EPOCH_COUNT; e++) {
		cJSON *o = cJSON_CreateObject();
		cJSON_AddStringToObject(o, "name", epoch_name((enum epoch)e));
		cJSON_AddNumberToObject(o, "ms", p->epoch_ms[e]);
		cJSON_AddNumberToObject(o, "frames", pl->epoch_frames[e]);
		cJSON_AddNumberToObject(o, "actual_ms", pl->epoch_actual_ms[e]);
		cJSON_AddItemToArray(ep, o);
	}
	cJSON *bl = cJSON_AddArrayToObject(j, "blocks");
	for (size_t b = 0; b < pl->nblocks; b++) {
		const struct protocol_block *pb = &p->blocks[pl->blocks[b].proto_block];
		size_t nl, nc;
		block_conditions(pl, b, l, &nl, &nc);
		cJSON *o = cJSON_CreateObject();
		cJSON_AddStringToObject(o, "name", pb->name);
		cJSON_AddNumberToObject(o, "trials", (double)pl->blocks[b].ntrials);
		cJSON_AddBoolToObject(o, "practice", pb->practice);
		cJSON_AddStringToObject(o, "order", pb->order == ORDER_RANDOM ? "random" : "fixed");
		cJSON_AddNumberToObject(o, "longest_streak", pb->longest_streak);
		cJSON_AddBoolToObject(o, "feedback", pb->feedback);
		cJSON_AddBoolToObject(o, "repeat_faults", pb->repeat_faults);
		if (pb->adaptive)
			cJSON_AddStringToObject(o, "adaptive", pb->adaptive);
		else
			cJSON_AddNullToObject(o, "adaptive");
		const struct adapt_spec *as = pb->adaptive ? adapt_spec_find(p->adaptive,
									       p->nadaptive, pb->adaptive)
							   : NULL;
		if (as) {
			cJSON_AddStringToObject(o, "rule", adapt_rule_name(as->base.rule));
			cJSON_AddNumberToObject(o, "staircases",
						(double)adapt_spec_nstairs(as, p->nchoices));
		}
		cJSON_AddNumberToObject(o, "levels", (double)nl);
		cJSON_AddNumberToObject(o, "categories", (double)nc);
		cJSON_AddItemToArray(bl, o);
	}
	cJSON_AddNumberToObject(j, "trials", (double)pl->ntrials);
	cJSON_AddNumberToObject(j, "estimated_seconds", pl->est_seconds);
	cJSON_AddNumberToObject(j, "seed", CHECK_SEED);
	cJSON_AddStringToObject(j, "plan_sha256", pl->hash);
	return j;
}

int cmd_check(int argc, char **argv)
{
	const char *proto_path = NULL, *rig_opt = NULL;
	int json = 0;
	for (int i = 1; i < argc; i++) {
		if (!strcmp(argv[i], "--json")) {
			json = 1;
		} else if (!strcmp(argv[i], "--rig")) {
			if (++i >= argc) {
				fprintf(stderr, "tachist check: --rig needs a file\n");
				return EXIT_USAGE;
			}
			rig_opt = argv[i];
		} else if (argv[i][0] == '-' && argv[i][1]) {
			fprintf(stderr, "tachist check: unknown option '%s'\n", argv[i]);
			cmd_print_usage("check", stderr);
			return EXIT_USAGE;
		} else if (!proto_path) {
			proto_path = argv[i];
		} else {
			fprintf(stderr, "tachist check: one protocol at a time ('%s')\n", argv[i]);
			return EXIT_USAGE;
		}
	}
	if (!proto_path) {
		cmd_print_usage("check", stderr);
		return EXIT_USAGE;
	}
	struct diag_list d;
	diag_init(&d);
	struct protocol p;
	struct rig r;
	struct stimlist l;
	struct plan pl;
	memset(&l, 0, sizeof l);
	memset(&pl, 0, sizeof pl);
	int have_plan = 0;
	int *w = NULL, *h = NULL;
	int bad = protocol_load(proto_path, &p, &d) != 0;
	char *rig_path = cmd_rig_path(rig_opt);
	int rig_ok = 0;
	if (!rig_path) {
		diag_add(&d, DIAG_ERROR, NULL, 0, "no rig profile found; give --rig FILE");
		memset(&r, 0, sizeof r);
	} else {
		rig_ok = rig_load(rig_path, &r, &d) == 0;
	}
	if (!bad && rig_ok)
		bad = rig_lum_apply(&p, &r, NULL, &d) != 0;
	int list_ok = 0;
	if (p.stimuli && access(p.stimuli, R_OK) != 0) {
		diag_add(&d, DIAG_ERROR, p.path, p.stimuli_line, "list: cannot read %s: %s", p.stimuli,
			 strerror(errno));
	} else if (p.stimuli) {
		list_ok = stimlist_load(p.stimuli, p.nchoices ? &p : NULL, &l, &d) == 0;
		struct image_summary sum = {0};
		long max_side = rig_ok ? r.max_image_side : 0;
		probe_images(&l, max_side, &sum, &d, &w, &h);
		if (p.mask == MASK_IMAGE && p.mask_image) {
			struct image_info info;
			char err[512];
			if (image_probe_max(p.mask_image, max_side, &info, err, sizeof err))
				diag_add(&d, DIAG_ERROR, p.path, p.mask_image_line, "mask_image: %s", err);
		}
	}
	if (!bad && rig_ok && list_ok) {
		have_plan = plan_build(&p, &l, &r, CHECK_SEED, &pl, &d) == 0;
		if (have_plan)
			check_fit(&p, &r, &l, w, h, pl.stim_px, &d);
	} else if (!bad && list_ok) {
		plan_check_blocks(&p, &l, &d);
	}
	sort_diags(&d);
	int ok = diag_count(&d, DIAG_ERROR) == 0;
	if (json) {
		cJSON *j = json_doc(&p, &r, &l, ok && have_plan ? &pl : NULL, &d, ok);
		char *s = cJSON_Print(j);
		printf("%s\n", s);
		free(s);
		cJSON_Delete(j);
	}
	cmd_print_diags(&d, stderr);
	if (!json && ok && have_plan)
		print_text(&p, &r, &l, &pl);
	if (!ok)
		fprintf(stderr, "%zu error%s, %zu warning%s\n", diag_count(&d, DIAG_ERROR),
			diag_count(&d, DIAG_ERROR) == 1 ? "" : "s", diag_count(&d, DIAG_WARNING),
			diag_count(&d, DIAG_WARNING) == 1 ? "" : "s");
	free(w);
	free(h);
	free(rig_path);
	plan_clear(&pl);
	stimlist_clear(&l);
	rig_clear(&r);
	protocol_clear(&p);
	diag_clear(&d);
	return ok ? EXIT_OK : EXIT_PROBLEMS;
}
