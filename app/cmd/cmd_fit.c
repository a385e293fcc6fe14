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

int cmd_fit(int argc, char **argv)
{
	const char *path = NULL;
	bool json = false;
	long m = 0;
	struct fit_opts o;
	fit_opts_default(&o, 2);
	const char *shape = NULL, *lapse = NULL;
	double pc = NAN;
	for (int i = 1; i < argc; i++) {
		const char *a = argv[i];
		const char *v = i + 1 < argc ? argv[i + 1] : NULL;
		unsigned long long u;
		if (!strcmp(a, "--json")) {
			json = true;
		} else if (!strcmp(a, "--m") && v) {
			if (cmd_parse_u64(v, &u) < 0 || u < 2 || u > 1000) {
				fprintf(stderr, "tachist fit: --m needs a whole number of choices, 2 or more "
					"(got '%s')\n", v);
				return EXIT_USAGE;
			}
			m = (long)u;
			i++;
		} else if (!strcmp(a, "--shape") && v) {
			shape = v;
			i++;
		} else if (!strcmp(a, "--lapse") && v) {
			lapse = v;
			i++;
		} else if (!strcmp(a, "--pc") && v) {
			if (cmd_parse_double(v, &pc) < 0) {
				fprintf(stderr, "tachist fit: --pc needs a proportion (got '%s')\n", v);
				return EXIT_USAGE;
			}
			i++;
		} else if (!strcmp(a, "--boot") && v) {
			if (cmd_parse_u64(v, &u) < 0 || u > 1000000) {
				fprintf(stderr, "tachist fit: --boot needs a number of samples (got '%s')\n", v);
				return EXIT_USAGE;
			}
			o.nboot = (int)u;
			i++;
		} else if (!strcmp(a, "--seed") && v) {
			if (cmd_parse_u64(v, &u) < 0) {
				fprintf(stderr, "tachist fit: --seed needs a whole number (got '%s')\n", v);
				return EXIT_USAGE;
			}
			o.seed = u;
			i++;
		} else if (a[0] == '-' && a[1]) {
			fprintf(stderr, "tachist fit: unknown or incomplete option '%s'\n", a);
			cmd_print_usage("fit", stderr);
			return EXIT_USAGE;
		} else if (!path) {
			path = a;
		} else {
			fprintf(stderr, "tachist fit: one CSV file only ('%s' is extra)\n", a);
			return EXIT_USAGE;
		}
	}
	if (!path || m == 0) {
		fprintf(stderr, "tachist fit: %s\n", !path ? "name the CSV file" : "--m N is required "
			"(the number of choices; the guess rate is 1/N)");
		cmd_print_usage("fit", stderr);
		return EXIT_USAGE;
	}
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
