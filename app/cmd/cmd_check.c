/* cmd_check — `tachist check PROTOCOL [--rig FILE] [--json]`: everything that can be known before an
 * observer sits down.
 *
 * Loads the protocol, the rig, the stimulus list and every image through the one loader `run` uses
 * (inputs.h: each part reports every problem it finds, images are decoded with the same decoder the
 * presenter uses, the stimulus must fit the screen), and prints the plan: blocks, trials, conditions,
 * each epoch in frames with its actual ms, stimulus size, estimated length. Diagnostics go to stderr
 * as FILE:LINE: level: message (and into the JSON document with --json). Exit 0 when the session
 * can run (warnings allowed), 1 when any error was found, 2 on usage. */
#include <cJSON.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "adapt.h"
#include "cmd.h"
#include "counterbal.h"
#include "estimate.h"
#include "geom.h"
#include "inputs.h"
#include "lum.h"

/* The seed the printed plan is built with; `run` draws its own. */
#define CHECK_SEED 1

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

/* What stamps the answers and where trigger codes go (docs/response-timing.md). */
static void print_input_trigger(const struct protocol *p, const struct rig *r)
{
	if (r->input_device)
		printf("responses %s (kernel-stamped; only it answers)\n", r->input_device);
	else
		printf("responses any keyboard through SDL (frame-stamped)\n");
	const struct protocol_triggers *t = &p->triggers;
	if (!r->trigger_port) {
		if (t->line)
			printf("triggers  none: the rig names no [trigger] port, [triggers] is not used\n");
		return;
	}
	printf("triggers  %s at %d baud 8N1:", r->trigger_port, r->trigger_baud);
	if (!t->line)
		printf(" no codes (the protocol has no [triggers])");
	for (size_t i = 0; i < p->nchoices && t->line; i++)
		if (t->onset_choice[i])
			printf(" onset %s=%d", p->choices[i].category, t->onset_choice[i]);
	if (t->response)
		printf(" response=%d", t->response);
	if (t->block_start)
		printf(" block_start=%d", t->block_start);
	if (t->block_end)
		printf(" block_end=%d", t->block_end);
	printf("\n");
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
	print_input_trigger(p, r);
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
	char dur[32];
	printf("\ntotal %zu trials in %zu block%s, about %s\n", pl->ntrials, pl->nblocks,
	       pl->nblocks == 1 ? "" : "s", estimate_format(pl->est_seconds, dur, sizeof dur));
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

/* The counterbalancing design: its settings, and with SUBJECTS > 0 the block order and key
 * mapping of subjects 1..SUBJECTS (the same functions run uses, counterbal.h). Text on stdout, or
 * a "design" member of J. */
static void print_design(const struct protocol *p, size_t subjects, cJSON *j)
{
	const struct protocol_counterbalance *cb = &p->counterbalance;
	bool on = cb->block_order || cb->key_mapping;
	size_t main_ix[256], nmain = 0;
	for (size_t i = 0; i < p->nblocks && nmain < 256; i++)
		if (!p->blocks[i].practice)
			main_ix[nmain++] = i;
	size_t rows = cb->block_order ? counterbal_rows(nmain) : 1;
	size_t maps = cb->key_mapping ? p->nchoices : 1;
	cJSON *dj = NULL, *arr = NULL;
	if (j) {
		dj = cJSON_AddObjectToObject(j, "design");
		cJSON_AddStringToObject(dj, "block_order", cb->block_order ? "balanced" : "fixed");
		cJSON_AddStringToObject(dj, "key_mapping", cb->key_mapping ? "rotate" : "fixed");
		cJSON_AddNumberToObject(dj, "block_orders", (double)rows);
		cJSON_AddNumberToObject(dj, "key_mappings", (double)maps);
		arr = cJSON_AddArrayToObject(dj, "subjects");
	} else if (on || subjects) {
		printf("\ncounterbalancing: block order %s (%zu order%s of %zu main blocks), keys %s "
		       "(%zu mapping%s)\n", cb->block_order ? "balanced (Williams)" : "fixed", rows,
		       rows == 1 ? "" : "s", nmain, cb->key_mapping ? "rotated" : "fixed", maps,
		       maps == 1 ? "" : "s");
		if (subjects)
			printf("  subject  blocks; keys\n");
	}
	for (size_t sbj = 1; sbj <= subjects; sbj++) {
		size_t perm[256], rot[PROTOCOL_MAX_CHOICES];
		counterbal_williams(nmain, on && cb->block_order ? sbj : 1, perm);
		if (!cb->block_order)
			for (size_t k = 0; k < nmain; k++)
				perm[k] = k;
		counterbal_rotation(p->nchoices, cb->key_mapping ? sbj : 1, rot);
		cJSON *o = NULL, *bo = NULL, *km = NULL;
		if (arr) {
			o = cJSON_CreateObject();
			cJSON_AddNumberToObject(o, "subject", (double)sbj);
			bo = cJSON_AddArrayToObject(o, "block_order");
			km = cJSON_AddObjectToObject(o, "key_mapping");
			cJSON_AddItemToArray(arr, o);
		} else {
			printf("  %7zu  ", sbj);
		}
		bool first = true;
		for (size_t i = 0; i < p->nblocks; i++)
			if (p->blocks[i].practice) {
				if (bo)
					cJSON_AddItemToArray(bo, cJSON_CreateString(p->blocks[i].name));
				else
					printf("%s%s", first ? "" : ",", p->blocks[i].name);
				first = false;
			}
		for (size_t k = 0; k < nmain; k++) {
			const char *name = p->blocks[main_ix[perm[k]]].name;
			if (bo)
				cJSON_AddItemToArray(bo, cJSON_CreateString(name));
			else
				printf("%s%s", first ? "" : ",", name);
			first = false;
		}
		for (size_t i = 0; i < p->nchoices; i++) {
			const char *key = p->choices[rot[i]].key;
			if (km)
				cJSON_AddStringToObject(km, p->choices[i].category, key);
			else
				printf("%s%s=%s", i ? "," : "; ", p->choices[i].category, key);
		}
		if (!arr)
			printf("\n");
	}
}

enum { O_RIG, O_JSON, O_SUBJECTS };
const struct opts_row cmd_check_opts[] = {
	[O_RIG] = {"rig", "FILE", "the rig profile (default $XDG_CONFIG_HOME/tachist/rig.ini)"},
	[O_JSON] = {"json", NULL, "the plan and every problem as one JSON document on standard output"},
	[O_SUBJECTS] = {"subjects", "N", "print the counterbalancing design for subjects 1 to N"},
	OPTS_END,
};

int cmd_check(int argc, char **argv)
{
	const char *proto_path = NULL, *rig_opt = NULL, *v;
	int json = 0;
	size_t subjects = 0;
	struct opts o;
	opts_begin(&o, "check", cmd_check_opts, argc, argv);
	for (int k; (k = opts_next(&o, &v)) != OPTS_DONE;) {
		switch (k) {
		case O_RIG: rig_opt = v; break;
		case O_JSON: json = 1; break;
		case O_SUBJECTS: {
			unsigned long long x;
			if (cmd_parse_u64(v, &x) || x < 1 || x > 10000)
				return opts_usage("check", "--subjects takes a number from 1 to 10000 (got '%s')",
						  v);
			subjects = (size_t)x;
			break;
		}
		case OPTS_ARG:
			if (proto_path)
				return opts_usage("check", "one protocol at a time ('%s')", v);
			proto_path = v;
			break;
		default: return EXIT_USAGE;
		}
	}
	if (!proto_path)
		return opts_usage("check", "name the protocol file");
	struct diag_list d;
	diag_init(&d);
	char *rig_path = cmd_rig_path(rig_opt);
	struct inputs_options io = {.protocol_path = proto_path, .rig_path = rig_path,
				    .missing_rig = "no rig profile found; give --rig FILE",
				    .seed = CHECK_SEED};
	struct inputs in;
	inputs_load(&io, &in, &d);
	const struct protocol *p = &in.proto;
	const struct rig *r = &in.rig;
	const struct stimlist *l = &in.list;
	const struct plan *pl = &in.plan;
	int have_plan = in.have_plan;
	diag_sort(&d);
	int ok = diag_count(&d, DIAG_ERROR) == 0;
	if (json) {
		cJSON *j = json_doc(p, r, l, ok && have_plan ? pl : NULL, &d, ok);
		if (in.have_proto)
			print_design(p, subjects, j);
		char *s = cJSON_Print(j);
		printf("%s\n", s);
		free(s);
		cJSON_Delete(j);
	}
	cmd_print_diags(&d, stderr);
	if (!json && ok && have_plan)
		print_text(p, r, l, pl);
	if (!json && ok && in.have_proto)
		print_design(p, subjects, NULL);
	if (!ok)
		fprintf(stderr, "%zu error%s, %zu warning%s\n", diag_count(&d, DIAG_ERROR),
			diag_count(&d, DIAG_ERROR) == 1 ? "" : "s", diag_count(&d, DIAG_WARNING),
			diag_count(&d, DIAG_WARNING) == 1 ? "" : "s");
	free(rig_path);
	inputs_clear(&in);
	diag_clear(&d);
	return ok ? EXIT_OK : EXIT_PROBLEMS;
}
