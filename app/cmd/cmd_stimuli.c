/* cmd_stimuli — `tachist stimuli import | audit | controls`: the command side of the stimulus-set
 * tools. Each action reads its arguments, hands the work to its io module (stimimport and
 * stimproto, stimaudit, stimcontrols) and prints the result; nothing here touches pixels or
 * files. Output formats are documented in docs/stimuli.md. */
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <cJSON.h>

#include "cmd.h"
#include "image.h"
#include "namepat.h"
#include "protocol_file.h"
#include "rig_file.h"
#include "stimaudit.h"
#include "stimcontrols.h"
#include "stimimport.h"
#include "stimlist_file.h"

/* Every option of every action, one table (it drives parsing, --help and the manual page); each
 * row of actions[] below names the options its action takes. */
enum { O_OUT, O_LEVEL_FROM, O_LABELS, O_PROTOCOL, O_KEYS, O_RIG, O_JSON, O_VERBOSE, O_SIZE_DEG,
       O_UNITS, O_NORM, O_TOLERANCE, O_NEAR_BITS, O_SEED, O_BUDGET, O_MAX_SIDE, O_N };
const struct opts_row cmd_stimuli_opts[] = {
	[O_OUT] = {"out", "PATH", "import: the list to write; controls: the folder for the controls"},
	[O_LEVEL_FROM] = {"level-from", "PATTERN", "import: read level and source from file names"},
	[O_LABELS] = {"labels", "FILE", "import: label columns from FILE (default DIR/labels.csv)"},
	[O_PROTOCOL] = {"protocol", "FILE", "import: write a starting protocol; audit: take the size from it"},
	[O_KEYS] = {"keys", "KEYS", "import: the protocol's response keys, K,K,... (with --protocol)"},
	[O_RIG] = {"rig", "FILE", "audit: the rig profile (default $XDG_CONFIG_HOME/tachist/rig.ini)"},
	[O_JSON] = {"json", NULL, "audit: one JSON document on standard output"},
	[O_VERBOSE] = {"verbose", NULL, "audit: list every flagged image, not one line per group"},
	[O_SIZE_DEG] = {"size-deg", "D", "audit: the stimulus size in degrees (or --protocol)"},
	[O_UNITS] = {"units", "UNITS", "audit, controls: levels and distances in unit (0-1) or 255"},
	[O_NORM] = {"norm", "NORM", "audit: compare levels with the l2 or linf distance"},
	[O_TOLERANCE] = {"tolerance", "FRAC", "audit: of a level (default 0.02); controls: of the L2 (0.01)"},
	[O_NEAR_BITS] = {"near-bits", "N", "audit: near duplicates differ in at most N hash bits"},
	[O_SEED] = {"seed", "N", "controls: the seed of the random directions"},
	[O_BUDGET] = {"budget", "WHICH", "controls: the L2 to match, measured or the row's level"},
	[O_MAX_SIDE] = {"max-image-side", "PX", "refuse images wider or taller than PX (16-65535)"},
	OPTS_END,
};

/* What the command line said: the action, its one path (DIR or LIST.csv) and the value of each
 * option given (a flag's value is ""; NULL: not given). */
struct stimuli_args {
	const char *path;
	const char *v[O_N];
};

#define USAGE(...) opts_usage("stimuli", __VA_ARGS__)

static int parse_units(const char *s, double *scale)
{
	if (!strcmp(s, "unit"))
		*scale = 1.0;
	else if (!strcmp(s, "255"))
		*scale = 255.0;
	else
		return -1;
	return 0;
}

/* --max-image-side N: 16 to 65535 px, as in the rig. */
static int parse_side(const char *s, long *side)
{
	unsigned long long u;
	if (cmd_parse_u64(s, &u) || u < 16 || u > 65535)
		return -1;
	*side = (long)u;
	return 0;
}

/* Loads a stimulus list (checked against protocol P when given) and prints its diagnostics.
 * Returns 0 or -1. */
static int load_list(const char *path, const struct protocol *p, struct stimlist *l)
{
	struct diag_list d;
	diag_init(&d);
	int rc = stimlist_load(path, p, l, &d);
	cmd_print_diags(&d, stderr);
	diag_clear(&d);
	return rc;
}

/* ---- import --------------------------------------------------------------------------------- */

struct import_args {
	const char *dir, *out, *pattern, *protocol, *keys, *labels;
	long max_side;
};

static int import_args(const struct stimuli_args *g, struct import_args *a)
{
	memset(a, 0, sizeof *a);
	a->dir = g->path;
	a->out = g->v[O_OUT];
	a->pattern = g->v[O_LEVEL_FROM];
	a->protocol = g->v[O_PROTOCOL];
	a->keys = g->v[O_KEYS];
	a->labels = g->v[O_LABELS];
	if (g->v[O_MAX_SIDE] && parse_side(g->v[O_MAX_SIDE], &a->max_side))
		return USAGE("--max-image-side wants 16 to 65535 px, not '%s'", g->v[O_MAX_SIDE]);
	if (!a->dir || !a->out)
		return USAGE("import needs a folder and --out LIST.csv");
	if (a->keys && !a->protocol)
		return USAGE("--keys goes with --protocol");
	return 0;
}

static void import_report(const struct stimimport *s, const struct import_args *a)
{
	if (s->n)
		printf("wrote %s: %zu images in %zu categor%s\n", a->out, s->n, s->ncategories,
		       s->ncategories == 1 ? "y" : "ies");
	if (s->n && a->pattern)
		printf("  %zu names matched '%s'; %zu did not and are listed as clean images (level 0, "
		       "no source)\n", s->n - s->unmatched, a->pattern, s->unmatched);
	if (s->n && s->labels_path)
		printf("  labels from %s: %zu column%s\n", s->labels_path, s->nlabels,
		       s->nlabels == 1 ? "" : "s");
	if (s->nnotes) {
		printf("%zu note%s (%zu problem%s):\n", s->nnotes, s->nnotes == 1 ? "" : "s",
		       s->nproblems, s->nproblems == 1 ? "" : "s");
		for (size_t i = 0; i < s->nnotes; i++)
			printf("  %s\n", s->notes[i]);
	}
}

static int stimuli_import(const struct stimuli_args *g)
{
	struct import_args a;
	int urc = import_args(g, &a);
	if (urc)
		return urc;
	struct namepat pt = {0};
	const char *why = NULL;
	if (a.pattern && namepat_parse(a.pattern, &pt, &why)) {
		fprintf(stderr, "tachist stimuli import: --level-from '%s': %s\n", a.pattern, why);
		return EXIT_USAGE;
	}
	struct stimimport_opts o = {a.dir, a.out, a.pattern ? &pt : NULL, a.labels, a.max_side};
	struct stimimport s;
	char err[1024];
	int rc = EXIT_OK;
	if (stimimport_scan(&o, &s, err, sizeof err)) {
		fprintf(stderr, "tachist stimuli import: %s\n", err);
		namepat_clear(&pt);
		return EXIT_PROBLEMS;
	}
	if (!s.n) {
		fprintf(stderr, "tachist stimuli import: no readable images in category folders under "
			"%s\n", a.dir);
		rc = EXIT_PROBLEMS;
	} else if (stimimport_write_list(&s, a.out, err, sizeof err)) {
		fprintf(stderr, "tachist stimuli import: %s\n", err);
		rc = EXIT_PROBLEMS;
	}
	import_report(&s, &a);
	if (rc == EXIT_OK && a.protocol) {
		if (stimimport_write_protocol(&s, a.out, a.protocol, a.keys, err, sizeof err)) {
			fprintf(stderr, "tachist stimuli import: --protocol: %s\n", err);
			rc = EXIT_PROBLEMS;
		} else {
			printf("wrote %s: a starting protocol; edit it, then run tachist check %s\n",
			       a.protocol, a.protocol);
		}
	}
	if (s.nproblems && rc == EXIT_OK)
		rc = EXIT_PROBLEMS;
	stimimport_clear(&s);
	namepat_clear(&pt);
	return rc;
}

/* ---- audit ---------------------------------------------------------------------------------- */

struct audit_args {
	const char *list, *rig, *protocol;
	int json, verbose, have_size;
	struct stimaudit_opts o;
};

/* The options with a value, checked; returns 0 or the usage exit code. */
static int audit_values(struct audit_args *a, const char *const *v)
{
	unsigned long long u;
	a->rig = v[O_RIG];
	a->protocol = v[O_PROTOCOL];
	if (v[O_SIZE_DEG]) {
		if (cmd_parse_double(v[O_SIZE_DEG], &a->o.size_deg) || a->o.size_deg <= 0 ||
		    a->o.size_deg >= 180)
			return USAGE("--size-deg wants degrees in (0, 180), not '%s'", v[O_SIZE_DEG]);
		a->have_size = 1;
	}
	if (v[O_UNITS] && parse_units(v[O_UNITS], &a->o.units))
		return USAGE("--units is 'unit' or '255', not '%s'", v[O_UNITS]);
	if (v[O_NORM]) {
		if (strcmp(v[O_NORM], "l2") && strcmp(v[O_NORM], "linf"))
			return USAGE("--norm is 'l2' or 'linf', not '%s'", v[O_NORM]);
		a->o.norm_linf = !strcmp(v[O_NORM], "linf");
	}
	if (v[O_TOLERANCE] && (cmd_parse_double(v[O_TOLERANCE], &a->o.tolerance) ||
			       a->o.tolerance < 0 || a->o.tolerance >= 1))
		return USAGE("--tolerance wants a fraction in [0, 1), not '%s'", v[O_TOLERANCE]);
	if (v[O_NEAR_BITS]) {
		if (cmd_parse_u64(v[O_NEAR_BITS], &u) || u > 64)
			return USAGE("--near-bits wants 0 to 64, not '%s'", v[O_NEAR_BITS]);
		a->o.near_bits = (int)u;
	}
	if (v[O_MAX_SIDE] && parse_side(v[O_MAX_SIDE], &a->o.max_side))
		return USAGE("--max-image-side wants 16 to 65535 px, not '%s'", v[O_MAX_SIDE]);
	return 0;
}

static int audit_args(const struct stimuli_args *g, struct audit_args *a)
{
	memset(a, 0, sizeof *a);
	stimaudit_defaults(&a->o);
	a->list = g->path;
	a->json = g->v[O_JSON] != NULL;
	a->verbose = g->v[O_VERBOSE] != NULL;
	int rc = audit_values(a, g->v);
	if (rc)
		return rc;
	if (!a->list)
		return USAGE("audit needs a stimulus list");
	if (a->protocol && a->have_size)
		return USAGE("give --size-deg or --protocol, not both");
	return 0;
}

static cJSON *num_or_null(int have, double v)
{
	return have && isfinite(v) ? cJSON_CreateNumber(v) : cJSON_CreateNull();
}

static cJSON *json_row(const struct stimaudit *a, size_t i)
{
	const struct stim *s = &a->l->items[i];
	const struct stimaudit_row *r = &a->rows[i];
	cJSON *o = cJSON_CreateObject();
	cJSON_AddNumberToObject(o, "line", s->line);
	cJSON_AddStringToObject(o, "image", s->image);
	cJSON_AddStringToObject(o, "category", s->category);
	cJSON_AddItemToObject(o, "level", num_or_null(s->has_level, s->level));
	if (s->source)
		cJSON_AddStringToObject(o, "source", s->source);
	else
		cJSON_AddNullToObject(o, "source");
	cJSON_AddBoolToObject(o, "readable", r->ok);
	if (r->ok) {
		char ph[17];
		snprintf(ph, sizeof ph, "%016llx", (unsigned long long)r->phash);
		cJSON_AddNumberToObject(o, "width", r->info.width);
		cJSON_AddNumberToObject(o, "height", r->info.height);
		cJSON_AddNumberToObject(o, "channels", r->info.channels);
		cJSON_AddNumberToObject(o, "bits", r->info.bits);
		cJSON_AddBoolToObject(o, "alpha", r->info.alpha);
		cJSON_AddStringToObject(o, "format", r->info.format);
		cJSON_AddNumberToObject(o, "mean_luminance", r->lum);
		cJSON_AddNumberToObject(o, "rms_contrast", r->rms);
		cJSON_AddNumberToObject(o, "z_luminance", r->zlum);
		cJSON_AddNumberToObject(o, "z_contrast", r->zrms);
		cJSON_AddStringToObject(o, "sha256", r->sha);
		cJSON_AddStringToObject(o, "phash", ph);
	}
	cJSON_AddItemToObject(o, "l2", num_or_null(r->src_state == 1, r->l2 * a->o.units));
	cJSON_AddItemToObject(o, "linf", num_or_null(r->src_state == 1, r->linf * a->o.units));
	cJSON *fl = cJSON_AddArrayToObject(o, "flags");
	for (int k = 0; k < STIMAUDIT_NKINDS; k++)
		if (r->flags & (1u << k))
			cJSON_AddItemToArray(fl, cJSON_CreateString(stimaudit_kind_name(k)));
	return o;
}

/* The set-wide parts of the JSON document: categories, duplicate pairs, flags and groups. */
static void json_set(cJSON *root, const struct stimaudit *a)
{
	const struct stimlist *l = a->l;
	cJSON *cats = cJSON_AddArrayToObject(root, "categories");
	for (size_t c = 0; c < a->ncats; c++) {
		const struct stimaudit_category *cs = &a->cats[c];
		cJSON *o = cJSON_CreateObject();
		cJSON_AddStringToObject(o, "category", cs->name);
		cJSON_AddNumberToObject(o, "images", (double)cs->n);
		cJSON_AddItemToObject(o, "luminance_mean", num_or_null(1, cs->ml));
		cJSON_AddItemToObject(o, "luminance_sd", num_or_null(1, cs->sl));
		cJSON_AddItemToObject(o, "contrast_mean", num_or_null(1, cs->mc));
		cJSON_AddItemToObject(o, "contrast_sd", num_or_null(1, cs->sc));
		cJSON_AddItemToArray(cats, o);
	}
	cJSON *dups = cJSON_AddArrayToObject(root, "duplicates");
	for (size_t p = 0; p < a->npairs; p++) {
		cJSON *o = cJSON_CreateObject();
		cJSON_AddStringToObject(o, "kind", a->pairs[p].bits < 0 ? "exact" : "near");
		cJSON_AddStringToObject(o, "a", l->items[a->pairs[p].a].image);
		cJSON_AddStringToObject(o, "b", l->items[a->pairs[p].b].image);
		if (a->pairs[p].bits >= 0)
			cJSON_AddNumberToObject(o, "bits", a->pairs[p].bits);
		cJSON_AddItemToArray(dups, o);
	}
	cJSON *flags = cJSON_AddArrayToObject(root, "flags");
	for (size_t k = 0; k < a->nflags; k++) {
		cJSON *o = cJSON_CreateObject();
		cJSON_AddNumberToObject(o, "line", l->items[a->flags[k].row].line);
		cJSON_AddStringToObject(o, "image", l->items[a->flags[k].row].image);
		cJSON_AddStringToObject(o, "kind", stimaudit_kind_name(a->flags[k].kind));
		cJSON_AddStringToObject(o, "message", a->flags[k].msg);
		cJSON_AddItemToArray(flags, o);
	}
	cJSON *groups = cJSON_AddArrayToObject(root, "flag_groups");
	for (size_t g = 0; g < a->ngroups; g++) {
		const struct stimaudit_group *gr = &a->groups[g];
		cJSON *o = cJSON_CreateObject();
		cJSON_AddStringToObject(o, "kind", stimaudit_kind_name(gr->kind));
		cJSON_AddNumberToObject(o, "count", (double)gr->n);
		cJSON_AddStringToObject(o, "summary", gr->summary);
		cJSON *lines = cJSON_AddArrayToObject(o, "lines");
		for (size_t m = 0; m < gr->n; m++)
			cJSON_AddItemToArray(lines, cJSON_CreateNumber(
				l->items[a->flags[gr->members[m]].row].line));
		cJSON_AddItemToArray(groups, o);
	}
}

static void print_json(const struct stimaudit *a, const char *list_path, const char *rig_path)
{
	cJSON *root = cJSON_CreateObject();
	cJSON_AddStringToObject(root, "list", list_path);
	cJSON_AddNumberToObject(root, "images", (double)a->l->n);
	cJSON_AddStringToObject(root, "units", a->o.units == 255.0 ? "255" : "unit");
	cJSON_AddStringToObject(root, "level_norm", a->o.norm_linf ? "linf" : "l2");
	cJSON_AddNumberToObject(root, "usual_width", a->usual_w);
	cJSON_AddNumberToObject(root, "usual_height", a->usual_h);
	if (a->o.rig) {
		cJSON_AddStringToObject(root, "rig", rig_path);
		cJSON_AddNumberToObject(root, "size_deg", a->o.size_deg);
		cJSON_AddNumberToObject(root, "stimulus_px", a->stim_px);
	} else {
		cJSON_AddNullToObject(root, "rig");
	}
	cJSON *rows = cJSON_AddArrayToObject(root, "rows");
	for (size_t i = 0; i < a->l->n; i++)
		cJSON_AddItemToArray(rows, json_row(a, i));
	json_set(root, a);
	char *txt = cJSON_Print(root);
	puts(txt);
	free(txt);
	cJSON_Delete(root);
}

static void print_rows(const struct stimaudit *a)
{
	const struct stimlist *l = a->l;
	printf("  %5s  %-32s %-12s %9s %2s %2s %7s %7s %6s %6s %10s %10s %8s\n", "line", "image",
	       "category", "size", "ch", "b", "lum", "rms", "z lum", "z rms", "L2", "Linf", "level");
	for (size_t i = 0; i < l->n; i++) {
		const struct stim *s = &l->items[i];
		const struct stimaudit_row *r = &a->rows[i];
		char size[24] = "-", l2[24] = "", linf[24] = "", lev[24] = "";
		if (r->ok)
			snprintf(size, sizeof size, "%dx%d", r->info.width, r->info.height);
		if (r->src_state == 1) {
			snprintf(l2, sizeof l2, "%.5g", r->l2 * a->o.units);
			snprintf(linf, sizeof linf, "%.5g", r->linf * a->o.units);
		}
		if (s->has_level)
			snprintf(lev, sizeof lev, "%g", s->level);
		if (r->ok)
			printf("  %5d  %-32s %-12s %9s %2d %2d %7.4f %7.4f %+6.2f %+6.2f %10s %10s %8s%s\n",
			       s->line, s->image, s->category, size, r->info.channels, r->info.bits,
			       r->lum, r->rms, r->zlum, r->zrms, l2, linf, lev, r->flags ? "  !" : "");
		else
			printf("  %5d  %-32s %-12s %9s  (unreadable)\n", s->line, s->image, s->category,
			       size);
	}
}

static void print_text(const struct stimaudit *a, const char *list_path, const char *rig_path,
		       int verbose)
{
	const struct stimlist *l = a->l;
	printf("%s: %zu images, usual size %dx%d", list_path, l->n, a->usual_w, a->usual_h);
	if (a->o.rig)
		printf("; at %.3g deg the rig shows %d px (%s)", a->o.size_deg, a->stim_px, rig_path);
	printf("\n\nimages\n");
	print_rows(a);
	printf("\ncategories (luminance: mean relative luminance; contrast: RMS)\n");
	printf("  %-16s %6s %10s %10s %10s %10s\n", "category", "images", "lum mean", "lum SD",
	       "rms mean", "rms SD");
	for (size_t c = 0; c < a->ncats; c++) {
		const struct stimaudit_category *cs = &a->cats[c];
		printf("  %-16s %6zu %10.4f %10.4f %10.4f %10.4f\n", cs->name, cs->n, cs->ml, cs->sl,
		       cs->mc, cs->sc);
	}
	printf("\nL2 and Linf against each row's source, over all pixels and channels%s\n",
	       a->o.units == 255.0 ? " (0-255)" : "");
	if (!a->nflags) {
		printf("\nnothing flagged\n");
		return;
	}
	printf("\n%zu flag%s in %zu group%s%s\n", a->nflags, a->nflags == 1 ? "" : "s", a->ngroups,
	       a->ngroups == 1 ? "" : "s", verbose ? "" : " (--verbose lists every image)");
	for (size_t g = 0; g < a->ngroups; g++) {
		const struct stimaudit_group *gr = &a->groups[g];
		printf("%s:%d: %s: %s\n", list_path, l->items[a->flags[gr->members[0]].row].line,
		       stimaudit_kind_name(gr->kind), gr->summary);
		for (size_t m = 0; verbose && gr->n > 1 && m < gr->n; m++) {
			const struct stimaudit_flag *f = &a->flags[gr->members[m]];
			printf("  %s:%d: %s\n", list_path, l->items[f->row].line, f->msg);
		}
	}
}

/* Loads the protocol (for its stimulus size and categories), the list and the rig. Returns 0, or
 * -1 after printing why. */
static int audit_inputs(struct audit_args *a, struct stimlist *l, struct rig *rig,
			char **rig_path)
{
	struct diag_list d;
	diag_init(&d);
	struct protocol proto;
	memset(&proto, 0, sizeof proto);
	int rc = -1;
	if (a->protocol) {
		if (protocol_load(a->protocol, &proto, &d))
			goto done;
		a->o.size_deg = proto.size_deg;
	}
	diag_clear(&d);
	if (load_list(a->list, a->protocol ? &proto : NULL, l))
		goto done;
	*rig_path = cmd_rig_path(a->rig);
	if (*rig_path) {
		if (rig_load(*rig_path, rig, &d))
			goto done;
		a->o.rig = rig;
		if (!a->o.max_side)
			a->o.max_side = rig->max_image_side;
	} else {
		fprintf(stderr, "tachist stimuli audit: no rig profile; the up-scaling check is "
			"skipped\n");
	}
	rc = 0;
done:
	cmd_print_diags(&d, stderr);
	diag_clear(&d);
	protocol_clear(&proto);
	return rc;
}

static int stimuli_audit(const struct stimuli_args *g)
{
	struct audit_args a;
	int urc = audit_args(g, &a);
	if (urc)
		return urc;
	struct stimlist l = {0};
	struct rig rig = {0};
	char *rig_path = NULL;
	int rc = EXIT_PROBLEMS;
	if (audit_inputs(&a, &l, &rig, &rig_path) == 0) {
		struct stimaudit au;
		stimaudit_run(&l, &a.o, &au);
		if (a.json)
			print_json(&au, a.list, rig_path);
		else
			print_text(&au, a.list, rig_path, a.verbose);
		rc = au.nflags ? EXIT_PROBLEMS : EXIT_OK;
		stimaudit_clear(&au);
	}
	free(rig_path);
	rig_clear(&rig);
	stimlist_clear(&l);
	return rc;
}

/* ---- controls ------------------------------------------------------------------------------- */

static int controls_args(const struct stimuli_args *g, struct stimcontrols_opts *o)
{
	const char *const *v = g->v;
	stimcontrols_defaults(o);
	o->out_dir = v[O_OUT];
	if (v[O_SEED] && cmd_parse_u64(v[O_SEED], &o->seed))
		return USAGE("--seed wants a whole number, not '%s'", v[O_SEED]);
	if (v[O_TOLERANCE] && (cmd_parse_double(v[O_TOLERANCE], &o->tolerance) ||
			       o->tolerance <= 0 || o->tolerance >= 1))
		return USAGE("--tolerance wants a fraction in (0, 1), not '%s'", v[O_TOLERANCE]);
	if (v[O_BUDGET]) {
		if (strcmp(v[O_BUDGET], "measured") && strcmp(v[O_BUDGET], "level"))
			return USAGE("--budget is 'measured' or 'level', not '%s'", v[O_BUDGET]);
		o->budget_from_level = !strcmp(v[O_BUDGET], "level");
	}
	if (v[O_UNITS] && parse_units(v[O_UNITS], &o->units))
		return USAGE("--units is 'unit' or '255', not '%s'", v[O_UNITS]);
	if (v[O_MAX_SIDE] && parse_side(v[O_MAX_SIDE], &o->max_side))
		return USAGE("--max-image-side wants 16 to 65535 px, not '%s'", v[O_MAX_SIDE]);
	if (!g->path || !o->out_dir)
		return USAGE("controls needs a stimulus list and --out DIR");
	return 0;
}

static void controls_report(const struct stimlist *l, const struct stimcontrols *r,
			    const struct stimcontrols_opts *o)
{
	printf("%-36s %-40s %10s %10s %8s %8s\n", "image", "control", "budget", "achieved", "error",
	       "clipped");
	for (size_t k = 0; k < r->n; k++) {
		const struct stimcontrols_event *e = &r->v[k];
		const struct stim *s = &l->items[e->row];
		if (e->status != STIMCONTROLS_MADE) {
			printf("%s:%d: %s\n", l->path, s->line, e->msg);
			continue;
		}
		printf("%-36s %-40s %10.5g %10.5g %7.3f%% %7.3f%%\n", s->image, e->control, e->budget,
		       e->achieved, e->budget > 0 ? 100 * (e->achieved - e->budget) / e->budget : 0.0,
		       100.0 * e->clipped);
	}
	printf("\n%zu control%s written for %zu rows with a source (seed %llu); list %s\n", r->nmade,
	       r->nmade == 1 ? "" : "s", r->nsource, o->seed, r->list_out);
	if (r->nproblems)
		printf("%zu problem%s (above)\n", r->nproblems, r->nproblems == 1 ? "" : "s");
}

static int stimuli_controls(const struct stimuli_args *g)
{
	const char *list = g->path;
	struct stimcontrols_opts o;
	int urc = controls_args(g, &o);
	if (urc)
		return urc;
	struct stimlist l = {0};
	if (load_list(list, NULL, &l)) {
		stimlist_clear(&l);
		return EXIT_PROBLEMS;
	}
	struct stimcontrols r;
	char err[1024];
	int rc = stimcontrols_run(&l, &o, &r, err, sizeof err);
	if (rc && !r.list_out) {
		fprintf(stderr, "tachist stimuli controls: %s\n", err);
	} else {
		controls_report(&l, &r, &o);
		if (rc)
			fprintf(stderr, "tachist stimuli controls: %s\n", err);
	}
	rc = rc || r.nproblems ? EXIT_PROBLEMS : EXIT_OK;
	stimcontrols_clear(&r);
	stimlist_clear(&l);
	return rc;
}

/* ---- the command ------------------------------------------------------------------------------ */

#define B(o) (1u << (o))
static const struct stimuli_action {
	const char *name;
	unsigned takes;   /* bit O_x: the action takes --x */
	int (*fn)(const struct stimuli_args *g);
} actions[] = {
	{"import", B(O_OUT) | B(O_LEVEL_FROM) | B(O_LABELS) | B(O_PROTOCOL) | B(O_KEYS) |
		   B(O_MAX_SIDE), stimuli_import},
	{"audit", B(O_RIG) | B(O_JSON) | B(O_VERBOSE) | B(O_SIZE_DEG) | B(O_PROTOCOL) | B(O_UNITS) |
		  B(O_NORM) | B(O_TOLERANCE) | B(O_NEAR_BITS) | B(O_MAX_SIDE), stimuli_audit},
	{"controls", B(O_OUT) | B(O_SEED) | B(O_BUDGET) | B(O_UNITS) | B(O_TOLERANCE) | B(O_MAX_SIDE),
	 stimuli_controls},
};
#undef B

int cmd_stimuli(int argc, char **argv)
{
	const struct stimuli_action *act = NULL;
	struct stimuli_args g;
	memset(&g, 0, sizeof g);
	struct opts p;
	opts_begin(&p, "stimuli", cmd_stimuli_opts, argc, argv);
	const char *v;
	for (int k; (k = opts_next(&p, &v)) != OPTS_DONE;) {
		if (k == OPTS_USAGE)
			return EXIT_USAGE;
		if (k == OPTS_ARG && !act) {
			for (size_t i = 0; i < sizeof actions / sizeof actions[0]; i++)
				if (!strcmp(actions[i].name, v))
					act = &actions[i];
			if (!act)
				return USAGE("unknown action '%s' (import, audit or controls)", v);
		} else if (k == OPTS_ARG) {
			if (g.path)
				return USAGE("%s takes one %s, not '%s' as well", act->name,
					     act == &actions[0] ? "folder" : "list", v);
			g.path = v;
		} else if (!act) {
			return USAGE("name the action (import, audit or controls) before its options");
		} else if (!(act->takes & (1u << k))) {
			return USAGE("%s takes no --%s", act->name, cmd_stimuli_opts[k].name);
		} else {
			g.v[k] = v ? v : "";
		}
	}
	if (!act)
		return USAGE("name the action: import, audit or controls");
	return act->fn(&g);
}
