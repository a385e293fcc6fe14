/* cmd_forecast — `tachist forecast PROTOCOL (--observer model:SPEC | --db FILE [--session ID |
 * --subject ID | --all]) ...`: a study simulated many times before anyone runs it, for a grid of
 * designs (level sets × observers × trials per level, and the protocol's adaptive blocks at equal
 * trial counts), through the model observer and the report's fitter (app/core/forecast.c).
 *
 * The true psychometric function is the model spec, or the pilot's fit made as `report` makes it
 * (non-practice trials with a level, pooled; Weibull where accuracy rises with the level,
 * logistic where it falls; lapse free). The protocol gives the levels (its planned non-practice
 * trials), its adaptive blocks, and the seconds per trial (estimate.h) for the session length.
 * Output: a table, or --json, and --plot FILE writes the SVG of interval width against trials. */
#include <errno.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <cJSON.h>

#include "adapt.h"
#include "cmd.h"
#include "estimate.h"
#include "forecast.h"
#include "inputs.h"
#include "store.h"
#include "svg.h"

#define MAX_SETS 16
#define MAX_GRID 32

struct fopts {
	const char *protocol, *rig, *observer, *db, *schema, *session, *subject, *plot;
	bool all, json, log_units;
	char *levels_arg[MAX_SETS];
	int nlevels_arg;
	long trials[MAX_GRID], observers[MAX_GRID];
	int ntrials, nobservers;
	long runs, boot, threads;
	unsigned long long seed;
	double target;             /* NaN: none */
};

/* One row of the grid. */
struct row {
	int set;                  /* index into the level sets; -1 for an adaptive block */
	const struct adapt_spec *adaptive;
	int trials_per_level;     /* constant stimuli; for adaptive the matching count */
	int observers;
	int total_per_observer;
	double session_s;
	struct forecast_result r;
};

struct levelset {
	char *name;
	double *v;
	size_t n;
};

struct ctx {
	struct fopts o;
	struct inputs in;
	struct forecast_opts fo;
	char truth_text[160];
	struct levelset sets[MAX_SETS + 1];
	int nsets;
	struct adapt_item *items;    /* the first adaptive block's, stim renumbered */
	size_t nitems;
	const struct adapt_spec *spec;
	struct row *rows;
	int nrows;
	double practice_s, per_trial_s;
	int proto_trials_per_level;
	int progress_row;
	bool tty;
};

enum { O_OBSERVER, O_DB, O_SCHEMA, O_SESSION, O_SUBJECT, O_ALL, O_RIG, O_LEVELS, O_TRIALS, O_OBSERVERS,
       O_RUNS, O_BOOT, O_SEED, O_THREADS, O_TARGET, O_LOG, O_JSON, O_PLOT };
const struct opts_row cmd_forecast_opts[] = {
	[O_OBSERVER] = {"observer", "model:SPEC", "simulate this model observer (see run --observer)"},
	[O_DB] = {"db", "FILE", "take the observer from a pilot in this database (or a server)"},
	[O_SCHEMA] = {"schema", "NAME", "with --db SERVER: the schema to read (default tachist)"},
	[O_SESSION] = {"session", "ID", "the pilot is this session"},
	[O_SUBJECT] = {"subject", "ID", "the pilot is this subject's sessions"},
	[O_ALL] = {"all", NULL, "the pilot is every session in the database"},
	[O_RIG] = {"rig", "FILE", "the rig profile, for the trial timing (default as run)"},
	[O_LEVELS] = {"levels", "A,B,...", "a set of levels to compare (repeat for more; 'protocol' "
				       "is the protocol's)"},
	[O_TRIALS] = {"trials", "N,N,...", "trials per level to compare (default the protocol's, "
				       "half and double)"},
	[O_OBSERVERS] = {"observers", "N,N,...", "numbers of observers to compare (default 1)"},
	[O_RUNS] = {"runs", "N", "simulated studies per design (default 200)"},
	[O_BOOT] = {"boot", "N", "bootstrap samples per fitted study (default 200)"},
	[O_SEED] = {"seed", "N", "the simulation's seed, for the same forecast again (default 1)"},
	[O_THREADS] = {"threads", "N", "worker threads (default the online CPUs, at most 8)"},
	[O_TARGET] = {"target-width", "W", "suggest the smallest design whose median interval is at "
					"most W wide"},
	[O_LOG] = {"log", NULL, "widths in log10 units (upper/lower), for --target-width and the "
				"figure"},
	[O_JSON] = {"json", NULL, "one JSON document on standard output"},
	[O_PLOT] = {"plot", "FILE.svg", "write the figure of interval width against trials per level"},
	OPTS_END,
};

/* "A,B,C" of whole numbers in [LO, HI] into OUT (at most MAX_GRID). Returns the count or -1. */
static int parse_list(const char *s, long lo, long hi, long *out)
{
	int n = 0;
	char *copy = xstrdup(s), *save = NULL;
	for (char *t = strtok_r(copy, ",", &save); t; t = strtok_r(NULL, ",", &save)) {
		unsigned long long u;
		if (n == MAX_GRID || cmd_parse_u64(t, &u) < 0 || (long long)u < lo ||
		    (long long)u > hi) {
			n = -1;
			break;
		}
		out[n++] = (long)u;
	}
	free(copy);
	return n == 0 ? -1 : n;
}

static int parse_args(int argc, char **argv, struct fopts *o)
{
	memset(o, 0, sizeof *o);
	o->runs = 200;
	o->boot = 200;
	o->seed = 1;
	o->target = NAN;
	long nc = sysconf(_SC_NPROCESSORS_ONLN);
	o->threads = nc < 1 ? 1 : nc > 8 ? 8 : nc;
	struct opts p;
	opts_begin(&p, "forecast", cmd_forecast_opts, argc, argv);
	const char *v;
	for (int k; (k = opts_next(&p, &v)) != OPTS_DONE;) {
		unsigned long long u;
		switch (k) {
		case O_OBSERVER: o->observer = v; break;
		case O_DB: o->db = v; break;
		case O_SCHEMA: o->schema = v; break;
		case O_SESSION: o->session = v; break;
		case O_SUBJECT: o->subject = v; break;
		case O_ALL: o->all = true; break;
		case O_RIG: o->rig = v; break;
		case O_JSON: o->json = true; break;
		case O_LOG: o->log_units = true; break;
		case O_PLOT: o->plot = v; break;
		case O_LEVELS:
			if (o->nlevels_arg == MAX_SETS)
				return opts_usage("forecast", "at most %d --levels sets", MAX_SETS);
			o->levels_arg[o->nlevels_arg++] = (char *)v;
			break;
		case O_TRIALS:
			if ((o->ntrials = parse_list(v, 1, 100000, o->trials)) < 0)
				return opts_usage("forecast", "--trials needs whole numbers from 1, "
						  "comma-separated, at most %d (got '%s')", MAX_GRID, v);
			break;
		case O_OBSERVERS:
			if ((o->nobservers = parse_list(v, 1, 10000, o->observers)) < 0)
				return opts_usage("forecast", "--observers needs whole numbers from 1, "
						  "comma-separated, at most %d (got '%s')", MAX_GRID, v);
			break;
		case O_RUNS:
		case O_BOOT:
		case O_THREADS:
			if (cmd_parse_u64(v, &u) < 0 || u > 1000000 || (k != O_BOOT && u < 1) ||
			    (k == O_THREADS && u > 64))
				return opts_usage("forecast", "--%s needs a whole number%s (got '%s')",
						  cmd_forecast_opts[k].name, k == O_THREADS ?
						  " from 1 to 64" : k == O_RUNS ? " from 1" : "", v);
			*(k == O_RUNS ? &o->runs : k == O_BOOT ? &o->boot : &o->threads) = (long)u;
			break;
		case O_SEED:
			if (cmd_parse_u64(v, &o->seed) < 0)
				return opts_usage("forecast", "--seed needs a whole number (got '%s')", v);
			break;
		case O_TARGET:
			if (cmd_parse_double(v, &o->target) < 0 || !(o->target > 0))
				return opts_usage("forecast", "--target-width needs a width above 0 "
						  "(got '%s')", v);
			break;
		case OPTS_ARG:
			if (o->protocol)
				return opts_usage("forecast", "one protocol only ('%s' is extra)", v);
			o->protocol = v;
			break;
		default: return EXIT_USAGE;
		}
	}
	if (!o->protocol)
		return opts_usage("forecast", "name the protocol");
	if (!o->observer == !o->db)
		return opts_usage("forecast", "give either --observer model:SPEC or --db FILE (a pilot)");
	if (o->db && cmd_server_schema("forecast", "--db", o->db, o->schema))
		return EXIT_USAGE;
	if (!o->db && o->schema)
		return opts_usage("forecast", "--schema chooses where --db reads a pilot");
	if (!o->db && (o->session || o->subject || o->all))
		return opts_usage("forecast", "--session, --subject and --all choose a pilot in --db");
	if ((o->session != NULL) + (o->subject != NULL) + o->all > 1)
		return opts_usage("forecast", "choose one of --session, --subject and --all");
	return 0;
}

/* ---- the true observer: a model spec or the pilot's fit ---- */

static int pilot_truth(struct ctx *c)
{
	struct store *s;
	char *err = NULL;
	if (store_open_reader(c->o.db, c->o.schema, &s, &err) < 0) {
		fprintf(stderr, "tachist forecast: %s\n", err);
		free(err);
		return -1;
	}
	struct store_iter *it;
	int rc = -1;
	if (store_iter_open(s, c->o.session, c->o.subject, &it, &err) < 0) {
		fprintf(stderr, "tachist forecast: %s\n", err);
		free(err);
		store_close(s);
		return -1;
	}
	size_t nss, cap = 0, n = 0;
	store_iter_sessions(it, &nss);
	int m = 0;
	for (size_t i = 0; i < nss; i++) {
		size_t nc = 0;
		store_iter_choices(it, i, &nc);
		if (nc && m && (int)nc != m) {
			fprintf(stderr, "tachist forecast: the pilot's sessions have different numbers "
				"of choices (%d and %zu)\n", m, nc);
			goto out;
		}
		if (nc)
			m = (int)nc;
	}
	double *lv = NULL;
	int *ok = NULL;
	const struct store_trial *t;
	int r;
	while ((r = store_iter_next(it, &t, NULL, &err)) == 1) {
		if (t->practice || !t->has_level || t->correct < 0)
			continue;
		if (n == cap) {
			cap = cap ? 2 * cap : 256;
			lv = xrealloc(lv, cap * sizeof *lv);
			ok = xrealloc(ok, cap * sizeof *ok);
		}
		lv[n] = t->level;
		ok[n++] = t->correct;
	}
	if (r < 0) {
		fprintf(stderr, "tachist forecast: %s\n", err);
		free(err);
	} else if (nss == 0 || n == 0) {
		fprintf(stderr, "tachist forecast: %s: the pilot holds no answered trials with a level\n",
			c->o.db);
	} else if (m < 2) {
		fprintf(stderr, "tachist forecast: the pilot's sessions do not record their choices\n");
	} else if (m != (int)c->in.proto.nchoices) {
		fprintf(stderr, "tachist forecast: the pilot has %d choices, the protocol %zu\n", m,
			c->in.proto.nchoices);
	} else {
		char why[320];
		if (forecast_truth_from_trials(lv, ok, n, m, &c->fo.truth, why, sizeof why) < 0) {
			fprintf(stderr, "tachist forecast: the pilot (%zu trials) cannot be fitted: %s\n",
				n, why);
		} else {
			const struct observer_spec *t = &c->fo.truth;
			snprintf(c->truth_text, sizeof c->truth_text, "pilot fit of %zu trials: %s, "
				 "alpha %.4g, beta %.4g, lapse %.3g", n, psyfn_shape_name(t->shape),
				 t->threshold, t->slope, t->lapse);
			rc = 0;
		}
	}
	free(lv);
	free(ok);
out:
	store_iter_close(it);
	store_close(s);
	return rc;
}

static int model_truth(struct ctx *c)
{
	char err[200];
	if (observer_parse(c->o.observer, &c->fo.truth, err, sizeof err) < 0) {
		fprintf(stderr, "tachist forecast: --observer: %s\n", err);
		return -1;
	}
	char spec[160];
	observer_format(&c->fo.truth, spec, sizeof spec);
	snprintf(c->truth_text, sizeof c->truth_text, "%s", spec);
	return 0;
}

/* ---- the grid ---- */

static int cmp_double(const void *a, const void *b)
{
	double x = *(const double *)a, y = *(const double *)b;
	return x < y ? -1 : x > y;
}

/* The protocol's levels (distinct levels of its planned non-practice, non-adaptive trials), the
 * trials per level it plans (rounded mean), the first adaptive block and the timing. */
static void protocol_design(struct ctx *c)
{
	const struct plan *pl = &c->in.plan;
	const struct protocol *p = &c->in.proto;
	double *v = xmalloc((pl->ntrials + 1) * sizeof *v);
	size_t n = 0, counted = 0;
	for (size_t i = 0; i < pl->ntrials; i++) {
		const struct plan_trial *t = &pl->trials[i];
		const struct protocol_block *b = &p->blocks[pl->blocks[t->block].proto_block];
		if (b->practice || t->stim < 0 || !c->in.list.items[t->stim].has_level)
			continue;
		v[n++] = c->in.list.items[t->stim].level;
	}
	counted = n;
	qsort(v, n, sizeof *v, cmp_double);
	size_t u = 0;
	for (size_t i = 0; i < n; i++)
		if (u == 0 || v[u - 1] != v[i])
			v[u++] = v[i];
	c->proto_trials_per_level = u ? (int)lround((double)counted / u) : 0;
	c->sets[0] = (struct levelset){xstrdup("protocol"), v, u};
	c->practice_s = 0;
	c->per_trial_s = 0;
	for (size_t i = 0; i < pl->nblocks; i++) {
		const struct protocol_block *b = &p->blocks[pl->blocks[i].proto_block];
		if (b->practice)
			c->practice_s += pl->blocks[i].est_seconds;
		else if (c->per_trial_s == 0)
			c->per_trial_s = pl->blocks[i].trial_seconds;
		if (!b->practice && b->adaptive && !c->spec) {
			c->spec = adapt_spec_find(p->adaptive, p->nadaptive, b->adaptive);
			c->items = plan_adaptive_items(p, &c->in.list, pl->blocks[i].proto_block,
						       &c->nitems);
			for (size_t k = 0; k < c->nitems; k++)
				c->items[k].stim = (int)k;
		}
	}
}

/* --levels A,B,... sets (or the word 'protocol'). Returns 0 or -1 after a message. */
static int level_sets(struct ctx *c)
{
	if (c->o.nlevels_arg == 0) {
		c->nsets = 1;
		return c->sets[0].n ? 0 : (fprintf(stderr, "tachist forecast: %s plans no non-practice "
					    "trials with a level; give --levels\n", c->o.protocol), -1);
	}
	struct levelset proto = c->sets[0];
	c->sets[0] = (struct levelset){0};
	bool used_proto = false;
	for (int i = 0; i < c->o.nlevels_arg; i++) {
		const char *a = c->o.levels_arg[i];
		if (!strcmp(a, "protocol")) {
			c->sets[i] = (struct levelset){xstrdup("protocol"), xmalloc((proto.n + 1) *
						       sizeof(double)), proto.n};
			memcpy(c->sets[i].v, proto.v, proto.n * sizeof(double));
			used_proto = true;
			continue;
		}
		size_t cap = 8, n = 0;
		double *v = xmalloc(cap * sizeof *v);
		char *copy = xstrdup(a), *save = NULL;
		int bad = 0;
		for (char *t = strtok_r(copy, ",", &save); t; t = strtok_r(NULL, ",", &save)) {
			if (n == cap)
				v = xrealloc(v, (cap *= 2) * sizeof *v);
			if (cmd_parse_double(t, &v[n++]) < 0)
				bad = 1;
		}
		free(copy);
		c->sets[i] = (struct levelset){xstrdup(a), v, n};
		c->nsets = i + 1;
		if (bad || n < 2) {
			fprintf(stderr, "tachist forecast: --levels needs two or more numbers, "
				"comma-separated, or the word protocol (got '%s')\n", a);
			free(proto.name);
			free(proto.v);
			return -1;
		}
	}
	c->nsets = c->o.nlevels_arg;
	if (used_proto && proto.n == 0) {
		fprintf(stderr, "tachist forecast: %s plans no non-practice trials with a level\n",
			c->o.protocol);
		free(proto.name);
		free(proto.v);
		return -1;
	}
	free(proto.name);
	free(proto.v);
	return 0;
}

static void build_rows(struct ctx *c)
{
	if (c->o.ntrials == 0) {
		long p = c->proto_trials_per_level > 0 ? c->proto_trials_per_level : 20;
		c->o.trials[0] = p / 2 > 0 ? p / 2 : 1;
		c->o.trials[1] = p;
		c->o.trials[2] = 2 * p;
		c->o.ntrials = p / 2 > 0 ? 3 : 2;
		if (p / 2 == 0) {
			c->o.trials[0] = p;
			c->o.trials[1] = 2 * p;
		}
	}
	if (c->o.nobservers == 0) {
		c->o.observers[0] = 1;
		c->o.nobservers = 1;
	}
	int nkinds = c->nsets + (c->spec != NULL);
	c->rows = xcalloc((size_t)nkinds * c->o.nobservers * c->o.ntrials, sizeof *c->rows);
	for (int s = 0; s < nkinds; s++)
		for (int ob = 0; ob < c->o.nobservers; ob++)
			for (int t = 0; t < c->o.ntrials; t++) {
				struct row *r = &c->rows[c->nrows++];
				r->set = s < c->nsets ? s : -1;
				r->adaptive = s < c->nsets ? NULL : c->spec;
				r->trials_per_level = (int)c->o.trials[t];
				r->observers = (int)c->o.observers[ob];
				/* An adaptive row spends what the first level set spends. */
				r->total_per_observer = r->trials_per_level *
							(int)c->sets[r->set < 0 ? 0 : r->set].n;
				double rs = c->in.rig.refresh_hz;
				r->session_s = c->practice_s + estimate_block_seconds(c->per_trial_s,
						(size_t)r->total_per_observer, rs);
			}
}

static void progress(int done, int total, void *ctx)
{
	struct ctx *c = ctx;
	if (c->tty && (done == total || done % 5 == 0))
		fprintf(stderr, "\rtachist forecast: design %d of %d, run %d of %d ",
			c->progress_row + 1, c->nrows, done, total);
}

static int simulate(struct ctx *c)
{
	for (int i = 0; i < c->nrows; i++) {
		struct row *r = &c->rows[i];
		struct forecast_design d = {.observers = r->observers};
		if (r->adaptive) {
			d.adaptive = r->adaptive;
			d.items = c->items;
			d.nitems = c->nitems;
			d.adaptive_trials = r->total_per_observer;
		} else {
			d.levels = c->sets[r->set].v;
			d.nlevels = c->sets[r->set].n;
			d.trials_per_level = r->trials_per_level;
		}
		c->progress_row = i;
		char err[300];
		if (forecast_run(&c->fo, &d, &r->r, progress, c, err, sizeof err) < 0) {
			if (c->tty)
				fputc('\n', stderr);
			fprintf(stderr, "tachist forecast: %s\n", err);
			return -1;
		}
		if (r->adaptive) {   /* a stopping rule may have ended staircases early */
			r->total_per_observer = r->r.trials_per_observer;
			r->session_s = c->practice_s + estimate_block_seconds(c->per_trial_s,
					(size_t)r->total_per_observer, c->in.rig.refresh_hz);
		}
	}
	if (c->tty)
		fprintf(stderr, "\r%60s\r", "");
	return 0;
}

/* ---- output ---- */

static double width_of(const struct ctx *c, const struct row *r)
{
	return c->o.log_units ? r->r.logw_median : r->r.width_median;
}

/* The suggestion: the fewest trials in all (observers × trials per observer), then the fewest
 * observers, among rows whose median width reaches the target and whose levels are not wholly
 * outside the curve's span. -1 when none. */
static int suggest(const struct ctx *c)
{
	int best = -1;
	for (int i = 0; i < c->nrows; i++) {
		const struct row *r = &c->rows[i];
		double w = width_of(c, r);
		if (!(isfinite(w) && w <= c->o.target) || r->r.bracket == FORECAST_OUTSIDE)
			continue;
		long tot = (long)r->observers * r->total_per_observer;
		if (best < 0) {
			best = i;
			continue;
		}
		const struct row *b = &c->rows[best];
		long btot = (long)b->observers * b->total_per_observer;
		if (tot < btot || (tot == btot && r->observers < b->observers))
			best = i;
	}
	return best;
}

static const char *row_name(const struct ctx *c, const struct row *r, char *buf, size_t len)
{
	if (r->adaptive)
		snprintf(buf, len, "adaptive %s", r->adaptive->name);
	else
		snprintf(buf, len, "%s", c->sets[r->set].name);
	return buf;
}

static void print_text(const struct ctx *c, int best)
{
	const struct forecast_result *r0 = &c->rows[0].r;
	printf("observer: %s\n", c->truth_text);
	if (isfinite(r0->true_threshold) && isfinite(r0->x25) && isfinite(r0->x75))
		printf("threshold at pc %.3g: %.4g; 25-75%% of the curve's span: %.4g to %.4g\n",
		       c->fo.fit.pc_threshold, r0->true_threshold, fmin(r0->x25, r0->x75),
		       fmax(r0->x25, r0->x75));
	else
		printf("the observer's curve never reaches pc %.3g: no threshold to estimate\n",
		       c->fo.fit.pc_threshold);
	printf("%ld runs per design, %ld bootstrap samples each, seed %llu; fitted with %s, lapse "
	       "free\n\n", c->o.runs, c->o.boot, c->o.seed, psyfn_shape_name(c->fo.fit.shape));
	for (int s = 0; s < c->nsets; s++) {
		printf("levels %s:", c->sets[s].name);
		for (size_t i = 0; i < c->sets[s].n; i++)
			printf(" %g", c->sets[s].v[i]);
		printf("\n");
	}
	const char *u = c->o.log_units ? "log10" : "level";
	printf("\n%-20s %4s %7s %7s %11s  %-26s %-18s %5s %5s %6s %s\n", "design", "obs", "per lvl",
	       "per obs", "session", c->o.log_units ? "width log10 [5%, 95%]" : "width [5%, 95%]",
	       "bias (MC error)", "fail", "bound", "cover", "levels");
	for (int i = 0; i < c->nrows; i++) {
		const struct row *r = &c->rows[i];
		const struct forecast_result *f = &r->r;
		char name[64], dur[32], w[64], b[48];
		double med = c->o.log_units ? f->logw_median : f->width_median;
		double lo = c->o.log_units ? f->logw_lo : f->width_lo;
		double hi = c->o.log_units ? f->logw_hi : f->width_hi;
		if (isfinite(med))
			snprintf(w, sizeof w, "%.3g [%.3g, %.3g]", med, lo, hi);
		else
			snprintf(w, sizeof w, "-");
		if (isfinite(f->bias))
			snprintf(b, sizeof b, "%+.3g (%.2g)", f->bias, isfinite(f->bias_se) ?
				 f->bias_se : 0.0);
		else
			snprintf(b, sizeof b, "-");
		char per[16];
		if (r->adaptive)
			snprintf(per, sizeof per, "-");
		else
			snprintf(per, sizeof per, "%d", r->trials_per_level);
		printf("%-20.20s %4d %7s %7d %11s  %-26s %-18s %4.0f%% %4.0f%% ",
		       row_name(c, r, name, sizeof name), r->observers, per, r->total_per_observer,
		       estimate_format(r->session_s, dur, sizeof dur), w, b, 100.0 * f->failed / f->runs,
		       100.0 * f->slope_bounded / f->runs);
		if (isfinite(f->coverage))
			printf("%5.1f%% ", 100 * f->coverage);
		else
			printf("%6s ", "-");
		printf("%s\n", forecast_bracket_name(f->bracket));
	}
	printf("\nwidth: the median %s-unit width of the %.0f%% bootstrap interval of the threshold; "
	       "cover: the share of intervals holding the true threshold\n", u, 100 * c->fo.fit.conf);
	for (int i = 0; i < c->nrows; i++) {
		const struct row *r = &c->rows[i];
		char name[64];
		if (r->r.bracket != FORECAST_BRACKETS && (i == 0 || r->set != c->rows[i - 1].set ||
							  r->adaptive != c->rows[i - 1].adaptive))
			printf("warning: levels %s do not bracket the threshold: %s of the curve's "
			       "25-75%% range lies outside them\n", row_name(c, r, name, sizeof name),
			       r->r.bracket == FORECAST_OUTSIDE ? "all" : "part");
	}
	if (isfinite(c->o.target)) {
		if (best < 0) {
			printf("no design on this grid reaches a median width of %g %s units; try more "
			       "trials or observers\n", c->o.target, u);
		} else {
			const struct row *r = &c->rows[best];
			char name[64], dur[32];
			printf("suggestion: %s, %d observer%s x %d trials (%s each) reaches a median "
			       "width of %.3g %s units (target %g)\n", row_name(c, r, name, sizeof name),
			       r->observers, r->observers == 1 ? "" : "s", r->total_per_observer,
			       estimate_format(r->session_s, dur, sizeof dur), width_of(c, r), u,
			       c->o.target);
		}
	}
}

static cJSON *jnum(double v)
{
	return isfinite(v) ? cJSON_CreateNumber(v) : cJSON_CreateNull();
}

static void print_json(const struct ctx *c, int best)
{
	cJSON *j = cJSON_CreateObject();
	const struct forecast_result *r0 = &c->rows[0].r;
	cJSON_AddStringToObject(j, "observer", c->truth_text);
	cJSON_AddStringToObject(j, "shape", psyfn_shape_name(c->fo.truth.shape));
	cJSON_AddItemToObject(j, "alpha", jnum(c->fo.truth.threshold));
	cJSON_AddItemToObject(j, "beta", jnum(c->fo.truth.slope));
	cJSON_AddItemToObject(j, "lambda", jnum(c->fo.truth.lapse));
	cJSON_AddNumberToObject(j, "choices", c->fo.m);
	cJSON_AddNumberToObject(j, "pc", c->fo.fit.pc_threshold);
	cJSON_AddItemToObject(j, "threshold", jnum(r0->true_threshold));
	cJSON_AddItemToObject(j, "span_25", jnum(r0->x25));
	cJSON_AddItemToObject(j, "span_75", jnum(r0->x75));
	cJSON_AddNumberToObject(j, "runs", (double)c->o.runs);
	cJSON_AddNumberToObject(j, "bootstrap_samples", (double)c->o.boot);
	cJSON_AddNumberToObject(j, "seed", (double)c->o.seed);
	cJSON_AddNumberToObject(j, "conf", c->fo.fit.conf);
	cJSON *ds = cJSON_AddArrayToObject(j, "designs");
	for (int i = 0; i < c->nrows; i++) {
		const struct row *r = &c->rows[i];
		const struct forecast_result *f = &r->r;
		cJSON *d = cJSON_CreateObject();
		cJSON_AddStringToObject(d, "kind", r->adaptive ? "adaptive" : "constant");
		char name[64];
		cJSON_AddStringToObject(d, "name", row_name(c, r, name, sizeof name));
		cJSON *lv = cJSON_AddArrayToObject(d, "levels");
		if (r->adaptive)
			for (size_t k = 0; k < c->nitems; k++) {
				bool seen = false;
				for (size_t q = 0; q < k; q++)
					seen |= c->items[q].level == c->items[k].level;
				if (!seen)
					cJSON_AddItemToArray(lv, jnum(c->items[k].level));
			}
		else
			for (size_t k = 0; k < c->sets[r->set].n; k++)
				cJSON_AddItemToArray(lv, jnum(c->sets[r->set].v[k]));
		cJSON_AddNumberToObject(d, "observers", r->observers);
		if (r->adaptive)
			cJSON_AddNullToObject(d, "trials_per_level");
		else
			cJSON_AddNumberToObject(d, "trials_per_level", r->trials_per_level);
		cJSON_AddNumberToObject(d, "trials_per_observer", r->total_per_observer);
		cJSON_AddItemToObject(d, "session_seconds", jnum(r->session_s));
		cJSON_AddItemToObject(d, "width_median", jnum(f->width_median));
		cJSON_AddItemToObject(d, "width_p05", jnum(f->width_lo));
		cJSON_AddItemToObject(d, "width_p95", jnum(f->width_hi));
		cJSON_AddItemToObject(d, "width_median_mc_error", jnum(f->width_median_se));
		cJSON_AddItemToObject(d, "log_width_median", jnum(f->logw_median));
		cJSON_AddItemToObject(d, "log_width_p05", jnum(f->logw_lo));
		cJSON_AddItemToObject(d, "log_width_p95", jnum(f->logw_hi));
		cJSON_AddItemToObject(d, "estimate_mean", jnum(f->est_mean));
		cJSON_AddItemToObject(d, "estimate_sd", jnum(f->est_sd));
		cJSON_AddItemToObject(d, "bias", jnum(f->bias));
		cJSON_AddItemToObject(d, "bias_mc_error", jnum(f->bias_se));
		cJSON_AddNumberToObject(d, "failed_share", (double)f->failed / f->runs);
		cJSON_AddNumberToObject(d, "slope_bound_share", (double)f->slope_bounded / f->runs);
		cJSON_AddItemToObject(d, "coverage", jnum(f->coverage));
		cJSON_AddItemToObject(d, "coverage_mc_error", jnum(f->coverage_se));
		cJSON_AddStringToObject(d, "bracket", forecast_bracket_name(f->bracket));
		cJSON_AddItemToArray(ds, d);
	}
	cJSON_AddItemToObject(j, "target_width", jnum(c->o.target));
	cJSON_AddStringToObject(j, "width_units", c->o.log_units ? "log10" : "level");
	cJSON_AddItemToObject(j, "suggestion", best >= 0 ? cJSON_CreateNumber(best) :
			      cJSON_CreateNull());
	char *s = cJSON_Print(j);
	printf("%s\n", s);
	free(s);
	cJSON_Delete(j);
}

static int write_plot(const struct ctx *c)
{
	int nkinds = c->nsets + (c->spec != NULL);
	int per = c->o.ntrials;
	struct svg_line *lines = xcalloc((size_t)nkinds * c->o.nobservers, sizeof *lines);
	double *buf = xcalloc((size_t)c->nrows * 4, sizeof *buf);
	char (*names)[80] = xcalloc((size_t)nkinds * c->o.nobservers, sizeof *names);
	int nl = 0;
	for (int i = 0; i < c->nrows; i += per) {
		const struct row *r = &c->rows[i];
		char name[64];
		row_name(c, r, name, sizeof name);
		if (c->o.nobservers > 1)
			snprintf(names[nl], sizeof names[nl], "%s, %d observer%s", name, r->observers,
				 r->observers == 1 ? "" : "s");
		else
			snprintf(names[nl], sizeof names[nl], "%s", name);
		double *x = buf + (size_t)i * 4, *y = x + per, *lo = y + per, *hi = lo + per;
		for (int t = 0; t < per; t++) {
			const struct forecast_result *f = &c->rows[i + t].r;
			x[t] = c->rows[i + t].trials_per_level;
			y[t] = c->o.log_units ? f->logw_median : f->width_median;
			lo[t] = c->o.log_units ? f->logw_lo : f->width_lo;
			hi[t] = c->o.log_units ? f->logw_hi : f->width_hi;
		}
		lines[nl] = (struct svg_line){names[nl], x, y, lo, hi, (size_t)per};
		nl++;
	}
	char title[96];
	snprintf(title, sizeof title, "Forecast: threshold interval width (%ld runs per design)",
		 c->o.runs);
	FILE *out = fopen(c->o.plot, "w");
	int rc = -1;
	if (!out) {
		fprintf(stderr, "tachist forecast: %s: cannot write: %s\n", c->o.plot, strerror(errno));
	} else {
		svg_lines(out, lines, (size_t)nl, isfinite(c->o.target) ? c->o.target : NAN, title,
			  "trials per level (adaptive: the same trials in all)",
			  c->o.log_units ? "interval width (log10 units)" : "interval width (level units)");
		if (fclose(out) != 0)
			fprintf(stderr, "tachist forecast: %s: cannot write: %s\n", c->o.plot,
				strerror(errno));
		else
			rc = 0;
	}
	free(lines);
	free(buf);
	free(names);
	return rc;
}

static void ctx_clear(struct ctx *c)
{
	for (int i = 0; i < c->nrows; i++)
		forecast_result_clear(&c->rows[i].r);
	free(c->rows);
	for (int i = 0; i < MAX_SETS + 1; i++) {
		free(c->sets[i].name);
		free(c->sets[i].v);
	}
	free(c->items);
	inputs_clear(&c->in);
}

int cmd_forecast(int argc, char **argv)
{
	struct ctx c;
	memset(&c, 0, sizeof c);
	int rc = parse_args(argc, argv, &c.o);
	if (rc)
		return rc;
	c.tty = isatty(2) && !c.o.json;
	struct diag_list d;
	diag_init(&d);
	char *rig_path = cmd_rig_path(c.o.rig);
	struct inputs_options io = {.protocol_path = c.o.protocol, .rig_path = rig_path,
				    .missing_rig = "no rig profile found; give --rig FILE",
				    .seed = c.o.seed};
	int lr = inputs_load(&io, &c.in, &d);
	free(rig_path);
	if (lr < 0 || !c.in.have_plan) {
		diag_sort(&d);
		cmd_print_diags(&d, stderr);
		diag_clear(&d);
		fprintf(stderr, "tachist forecast: %s: the protocol must pass `tachist check` first\n",
			c.o.protocol);
		ctx_clear(&c);
		return EXIT_PROBLEMS;
	}
	diag_clear(&d);
	rc = EXIT_PROBLEMS;
	c.fo.m = (int)c.in.proto.nchoices;
	if ((c.o.db ? pilot_truth(&c) : model_truth(&c)) < 0)
		goto out;
	protocol_design(&c);
	if (level_sets(&c) < 0)
		goto out;
	fit_opts_default(&c.fo.fit, c.fo.m);
	c.fo.fit.nboot = (int)c.o.boot;
	/* The report's rule: Weibull where accuracy rises with the level, logistic where it falls. */
	c.fo.fit.shape = c.fo.truth.slope < 0 ? PSYFN_LOGISTIC : PSYFN_WEIBULL;
	c.fo.fit.direction = c.fo.truth.slope < 0 ? -1 : 1;
	c.fo.runs = (int)c.o.runs;
	c.fo.seed = c.o.seed;
	c.fo.threads = (int)c.o.threads;
	build_rows(&c);
	if (simulate(&c) < 0)
		goto out;
	int best = isfinite(c.o.target) ? suggest(&c) : -1;
	if (c.o.json)
		print_json(&c, best);
	else
		print_text(&c, best);
	rc = EXIT_OK;
	if (c.o.plot && write_plot(&c) < 0)
		rc = EXIT_PROBLEMS;
out:
	ctx_clear(&c);
	return rc;
}
