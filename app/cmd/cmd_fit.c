/* cmd_fit — `tachist fit FILE.csv --m N [--shape S] [--lapse free|0|VALUE] [--pc P] [--boot N]
 * [--seed N] [--json]`: the report's psychometric fit on a CSV from anywhere (see fitcsv.h for
 * the layouts). A fit that the data cannot support, or that does not converge, is said in words
 * and exits 1; no number is printed for it. */
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <cJSON.h>

#include "cmd.h"
#include "fit.h"
#include "fitcsv.h"

/* Worker threads for the bootstrap: the online CPUs, at most 8. */
static int fit_threads(void)
{
	long n = sysconf(_SC_NPROCESSORS_ONLN);
	return n < 1 ? 1 : n > 8 ? 8 : (int)n;
}

static cJSON *num_or_null(double v, bool ok)
{
	return ok && isfinite(v) ? cJSON_CreateNumber(v) : cJSON_CreateNull();
}

static void print_json(const struct fit_result *r, const struct fit_opts *o, enum fitcsv_kind kind)
{
	cJSON *j = cJSON_CreateObject();
	bool ok = r->status == FIT_OK;
	cJSON_AddStringToObject(j, "status", ok ? "ok" : r->status == FIT_NO_CONVERGENCE ?
					     "no_convergence" : "unsupported");
	if (!ok)
		cJSON_AddStringToObject(j, "message", r->reason);
	cJSON_AddStringToObject(j, "shape", psyfn_shape_name(o->shape));
	cJSON_AddNumberToObject(j, "m", o->m);
	cJSON_AddNumberToObject(j, "gamma", 1.0 / o->m);
	cJSON_AddStringToObject(j, "input", kind == FITCSV_TRIALS ? "trials" : "grouped");
	cJSON_AddNumberToObject(j, "levels", (double)r->npoints);
	cJSON_AddNumberToObject(j, "trials", (double)r->ntrials);
	cJSON_AddItemToObject(j, "alpha", num_or_null(r->f.alpha, ok));
	cJSON_AddItemToObject(j, "beta", num_or_null(r->f.beta, ok));
	cJSON_AddBoolToObject(j, "slope_bounded", ok && r->slope_bounded);
	cJSON_AddItemToObject(j, "lambda", num_or_null(r->f.lambda, ok));
	cJSON_AddBoolToObject(j, "lambda_free", o->lapse_free);
	cJSON_AddNumberToObject(j, "pc", o->pc_threshold);
	cJSON_AddItemToObject(j, "threshold", num_or_null(r->threshold, ok && r->threshold_ok));
	bool ci = ok && r->has_ci;
	cJSON_AddItemToObject(j, "threshold_lower", num_or_null(r->threshold_ci[0], ci));
	cJSON_AddItemToObject(j, "threshold_upper", num_or_null(r->threshold_ci[1], ci));
	cJSON_AddItemToObject(j, "alpha_lower", num_or_null(r->alpha_ci[0], ci));
	cJSON_AddItemToObject(j, "alpha_upper", num_or_null(r->alpha_ci[1], ci));
	cJSON_AddItemToObject(j, "beta_lower", num_or_null(r->beta_ci[0], ci));
	cJSON_AddItemToObject(j, "beta_upper", num_or_null(r->beta_ci[1], ci));
	cJSON_AddItemToObject(j, "lambda_lower", num_or_null(r->lambda_ci[0], ci && o->lapse_free));
	cJSON_AddItemToObject(j, "lambda_upper", num_or_null(r->lambda_ci[1], ci && o->lapse_free));
	cJSON_AddItemToObject(j, "deviance", num_or_null(r->deviance, ok));
	cJSON_AddItemToObject(j, "dof", ok ? cJSON_CreateNumber(r->dof) : cJSON_CreateNull());
	cJSON_AddNumberToObject(j, "bootstrap_samples", ok ? r->nboot : 0);
	cJSON_AddNumberToObject(j, "bootstrap_failed", ok ? r->nboot_failed : 0);
	cJSON_AddNumberToObject(j, "seed", (double)o->seed);
	char *s = cJSON_Print(j);
	printf("%s\n", s);
	free(s);
	cJSON_Delete(j);
}

static void print_interval(const double ci[2], bool has)
{
	if (!has && isnan(ci[0]))
		return;   /* no bootstrap asked for */
	if (has && isfinite(ci[0]) && isfinite(ci[1]))
		printf("  [%.4g, %.4g]", ci[0], ci[1]);
	else
		printf("  (no interval)");
}

static void print_text(const struct fit_result *r, const struct fit_opts *o, const char *path)
{
	printf("%s: %s fit, m = %d (guess rate %.4g), lapse %s\n", path, psyfn_shape_name(o->shape),
	       o->m, 1.0 / o->m, o->lapse_free ? "free in [0, 0.06]" : "fixed");
	printf("%zu levels, %lu trials\n", r->npoints, r->ntrials);
	if (r->status != FIT_OK)
		return;   /* the reason goes to stderr */
	bool ci = r->has_ci;
	double none[2] = {NAN, NAN};
	const double *acis[4] = {r->alpha_ci, r->beta_ci, r->lambda_ci, r->threshold_ci};
	if (o->nboot == 0)
		acis[0] = acis[1] = acis[2] = acis[3] = none;
	printf("%-24s %10.4g", "alpha (position)", r->f.alpha);
	print_interval(acis[0], ci);
	printf("\n%-24s %10.4g", "beta (slope)", r->f.beta);
	print_interval(acis[1], ci);
	if (r->slope_bounded)
		printf(" (at the steepness bound: the data allow any steeper slope)");
	printf("\n%-24s %10.4g", "lambda (lapse)", r->f.lambda);
	if (o->lapse_free)
		print_interval(acis[2], ci);
	else
		printf("  (fixed)");
	char lab[48];
	snprintf(lab, sizeof lab, "threshold at pc %.3g", o->pc_threshold);
	if (r->threshold_ok) {
		printf("\n%-24s %10.4g", lab, r->threshold);
		print_interval(acis[3], ci);
	} else {
		printf("\n%-24s  not reached: the fitted function stays below pc %.3g", lab,
		       o->pc_threshold);
	}
	printf("\n%-24s %10.4g on %d df\n", "deviance", r->deviance, r->dof);
	if (o->nboot > 0)
		printf("intervals: %.0f%% parametric bootstrap, %d samples (seed %llu), %d did not "
		       "converge%s\n", o->conf * 100, r->nboot, (unsigned long long)o->seed,
		       r->nboot_failed, ci ? "" : "; too many failures for intervals");
}

enum { O_M, O_SHAPE, O_LAPSE, O_PC, O_BOOT, O_SEED, O_JSON };
const struct opts_row cmd_fit_opts[] = {
	[O_M] = {"m", "N", "the number of choices (required); the guess rate is 1/N"},
	[O_SHAPE] = {"shape", "SHAPE", "weibull, logistic or normal (default weibull)"},
	[O_LAPSE] = {"lapse", "LAPSE", "free (fitted), 0, or a fixed rate in [0, 1) (default free)"},
	[O_PC] = {"pc", "P", "the threshold's proportion correct (default halfway from 1/N to 1)"},
	[O_BOOT] = {"boot", "N", "parametric bootstrap samples for the intervals (default 1000, 0 for none)"},
	[O_SEED] = {"seed", "N", "the bootstrap's seed, for the same intervals again"},
	[O_JSON] = {"json", NULL, "one JSON document on standard output"},
	OPTS_END,
};

int cmd_fit(int argc, char **argv)
{
	const char *path = NULL;
	bool json = false;
	long m = 0;
	struct fit_opts o;
	fit_opts_default(&o, 2);
	const char *shape = NULL, *lapse = NULL;
	double pc = NAN;
	struct opts p;
	opts_begin(&p, "fit", cmd_fit_opts, argc, argv);
	const char *v;
	for (int k; (k = opts_next(&p, &v)) != OPTS_DONE;) {
		unsigned long long u;
		switch (k) {
		case O_JSON: json = true; break;
		case O_M:
			if (cmd_parse_u64(v, &u) < 0 || u < 2 || u > 1000)
				return opts_usage("fit", "--m needs a whole number of choices, 2 or more "
						  "(got '%s')", v);
			m = (long)u;
			break;
		case O_SHAPE: shape = v; break;
		case O_LAPSE: lapse = v; break;
		case O_PC:
			if (cmd_parse_double(v, &pc) < 0)
				return opts_usage("fit", "--pc needs a proportion (got '%s')", v);
			break;
		case O_BOOT:
			if (cmd_parse_u64(v, &u) < 0 || u > 1000000)
				return opts_usage("fit", "--boot needs a number of samples (got '%s')", v);
			o.nboot = (int)u;
			break;
		case O_SEED:
			if (cmd_parse_u64(v, &u) < 0)
				return opts_usage("fit", "--seed needs a whole number (got '%s')", v);
			o.seed = u;
			break;
		case OPTS_ARG:
			if (path)
				return opts_usage("fit", "one CSV file only ('%s' is extra)", v);
			path = v;
			break;
		default: return EXIT_USAGE;
		}
	}
	if (!path)
		return opts_usage("fit", "name the CSV file");
	if (m == 0)
		return opts_usage("fit", "--m N is required (the number of choices; the guess rate is 1/N)");
	int nboot = o.nboot;
	uint64_t seed = o.seed;
	fit_opts_default(&o, (int)m);
	o.nboot = nboot;
	o.seed = seed;
	o.threads = fit_threads();
	if (shape && psyfn_shape_parse(shape, &o.shape) < 0) {
		fprintf(stderr, "tachist fit: --shape is weibull, logistic or normal (got '%s')\n", shape);
		return EXIT_USAGE;
	}
	if (lapse && fit_lapse_parse(lapse, &o) < 0) {
		fprintf(stderr, "tachist fit: --lapse is free, 0 or a rate in [0, 1) (got '%s')\n", lapse);
		return EXIT_USAGE;
	}
	if (!o.lapse_free && o.lapse >= 1 - 1.0 / (double)m) {
		fprintf(stderr, "tachist fit: a lapse rate of %g leaves nothing above the guess rate "
			"1/%ld\n", o.lapse, m);
		return EXIT_USAGE;
	}
	if (!isnan(pc)) {
		if (!(pc > 1.0 / (double)m && pc < 1)) {
			fprintf(stderr, "tachist fit: --pc must lie between the guess rate 1/%ld and 1 "
				"(got %g)\n", m, pc);
			return EXIT_USAGE;
		}
		o.pc_threshold = pc;
	}
	struct diag_list d;
	diag_init(&d);
	struct fit_point *pts;
	size_t npts;
	enum fitcsv_kind kind;
	if (fitcsv_read(path, &pts, &npts, &kind, &d) < 0) {
		cmd_print_diags(&d, stderr);
		diag_clear(&d);
		return EXIT_PROBLEMS;
	}
	diag_clear(&d);
	struct fit_result r;
	int rc = fit_run(pts, npts, &o, &r);
	free(pts);
	if (json)
		print_json(&r, &o, kind);
	else
		print_text(&r, &o, path);
	if (rc < 0) {
		fprintf(stderr, "tachist fit: %s: no fit: %s\n", path, r.reason);
		return EXIT_PROBLEMS;
	}
	return EXIT_OK;
}
