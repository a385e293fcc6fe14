/* cmd_calc — `tachist calc`: the numbers people need at the bench, one sub-calculation per row of
 * `calcs[]`.
 *
 * A row names its options (all `--NAME VALUE`, numbers unless the row parses them itself), which
 * of them are required, and a function that fills a result: the JSON keys DESIGN.md pins, each with
 * a value, and one sentence for people. Options are parsed and checked once here, so a new
 * calculation (for example `dprime` or `ci`) is one function and one table row. */
#include <cJSON.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "cmd.h"
#include "frames.h"
#include "geom.h"
#include "rig.h"
#include "stats.h"

#define CALC_MAX_OPTS 6
#define CALC_MAX_OUT 6

struct calc_args {
	const char *text[CALC_MAX_OPTS];   /* as given, NULL when absent (in the row's option order) */
	double num[CALC_MAX_OPTS];         /* parsed when the option is numeric */
};

struct calc_out {
	const char *key[CALC_MAX_OUT];
	double value[CALC_MAX_OUT];
	int integer[CALC_MAX_OUT];         /* print without decimals */
	size_t n;
	char sentence[512];
};

struct calc {
	const char *name;
	const char *opts[CALC_MAX_OPTS];   /* option names without "--", NULL-terminated */
	unsigned required;                 /* bit i: opts[i] must be given */
	unsigned text_opts;                /* bit i: opts[i] is not a number */
	/* Computes from A into O. Returns 0; -1 after printing why to stderr (a usage problem, exit
	 * 2); or 1 when a file it read had problems (exit 1). */
	int (*fn)(const struct calc_args *a, struct calc_out *o);
};

static void put(struct calc_out *o, const char *key, double v, int integer)
{
	o->key[o->n] = key;
	o->value[o->n] = v;
	o->integer[o->n] = integer;
	o->n++;
}

static int positive(const char *name, double v)
{
	if (v > 0)
		return 0;
	fprintf(stderr, "tachist calc: --%s must be above 0\n", name);
	return -1;
}

static int calc_angle(const struct calc_args *a, struct calc_out *o)
{
	double size = a->num[0], dist = a->num[1];
	if (positive("size", size) || positive("distance", dist))
		return -1;
	double deg = geom_angle_deg(size, dist);
	put(o, "degrees", deg, 0);
	snprintf(o->sentence, sizeof o->sentence, "%g cm at %g cm subtends %.4f deg", size, dist,
		 deg);
	return 0;
}

static int calc_size(const struct calc_args *a, struct calc_out *o)
{
	double deg = a->num[0], dist = a->num[1];
	if (positive("deg", deg) || positive("distance", dist))
		return -1;
	if (deg >= 180) {
		fprintf(stderr, "tachist calc: --deg must be below 180\n");
		return -1;
	}
	double cm = geom_size_cm(deg, dist);
	put(o, "cm", cm, 0);
	snprintf(o->sentence, sizeof o->sentence, "%g deg at %g cm is %.4f cm", deg, dist, cm);
	return 0;
}

static int calc_pixels(const struct calc_args *a, struct calc_out *o)
{
	double deg = a->num[0];
	if (positive("deg", deg))
		return -1;
	if (deg >= 180) {
		fprintf(stderr, "tachist calc: --deg must be below 180\n");
		return -1;
	}
	char *path = cmd_rig_path(a->text[1]);
	if (!path) {
		fprintf(stderr, "tachist calc: no rig profile found; give --rig FILE\n");
		return -1;
	}
	struct rig r;
	struct diag_list d;
	diag_init(&d);
	int rc = rig_load(path, &r, &d);
	cmd_print_diags(&d, stderr);
	diag_clear(&d);
	if (rc) {
		free(path);
		return 1;
	}
	double actual;
	int px = geom_deg_to_px(&r, deg, &actual);
	put(o, "pixels", px, 1);
	put(o, "degrees_actual", actual, 0);
	snprintf(o->sentence, sizeof o->sentence, "%g deg on %s (%.3f px/deg at %g cm) is %d px, "
		 "which subtends %.4f deg", deg, path, geom_px_per_deg(&r), r.distance_cm, px, actual);
	rig_clear(&r);
	free(path);
	return 0;
}

static int calc_frames(const struct calc_args *a, struct calc_out *o)
{
	double ms = a->num[0], hz = a->num[1];
	if (ms < 0) {
		fprintf(stderr, "tachist calc: --ms must be 0 or more\n");
		return -1;
	}
	if (positive("hz", hz))
		return -1;
	double actual;
	int n = frames_from_ms(ms, hz, &actual);
	put(o, "frames", n, 1);
	put(o, "actual_ms", actual, 0);
	double exact = ms * hz / 1000.0;
	const char *note = "";
	if (fabs(exact - floor(exact) - 0.5) < 1e-9)
		note = " (an exact half frame: rounded to the even count)";
	else if (!frames_exact(ms, hz))
		note = " (not a whole number of frames)";
	snprintf(o->sentence, sizeof o->sentence, "%g ms at %g Hz is %.3f frames: shown as %d "
		 "frame%s = %.2f ms%s", ms, hz, exact, n, n == 1 ? "" : "s", actual, note);
	return 0;
}

/* A whole number at least LO from option NAME's value V; -1 after saying why. */
static int whole(const char *name, double v, double lo, long *out)
{
	if (v != floor(v) || v < lo || v > 1e9) {
		fprintf(stderr, "tachist calc: --%s must be a whole number of at least %g\n", name, lo);
		return -1;
	}
	*out = (long)v;
	return 0;
}

/* d′ for m-AFC from proportion correct; with --n, 0 and 1 get the 1/(2N) rule (stats.h). */
static int calc_dprime(const struct calc_args *a, struct calc_out *o)
{
	long m, n = 0;
	double pc = a->num[1];
	if (whole("m", a->num[0], 2, &m) || (a->text[2] && whole("n", a->num[2], 1, &n)))
		return -1;
	if (!(pc >= 0 && pc <= 1)) {
		fprintf(stderr, "tachist calc: --pc must be a proportion between 0 and 1\n");
		return -1;
	}
	const char *note = "";
	if (pc == 0 || pc == 1) {
		if (!n) {
			fprintf(stderr, "tachist calc: d' is infinite at pc = %g; give --n N (trials) to "
				"use the 1/(2N) correction\n", pc);
			return -1;
		}
		pc = stats_pc_corrected(pc == 0 ? 0 : (unsigned long)n, (unsigned long)n, NULL);
		note = " (1/(2N) correction applied)";
	}
	double d;
	if (stats_dprime_mafc(pc, (int)m, &d) < 0) {
		fprintf(stderr, "tachist calc: no d' found for pc %g with m = %ld\n", pc, m);
		return 1;
	}
	put(o, "dprime", d, 0);
	snprintf(o->sentence, sizeof o->sentence, "pc %g in %ld-AFC (chance %.4g) is d' = %.4f%s%s",
		 pc, m, 1.0 / (double)m, d, pc < 1.0 / (double)m ? " (below chance)" : "", note);
	return 0;
}

/* A 95% (or --level) interval for K correct of N: Wilson score or exact Clopper–Pearson. */
static int calc_ci(const struct calc_args *a, struct calc_out *o)
{
	long k, n;
	if (whole("k", a->num[0], 0, &k) || whole("n", a->num[1], 1, &n))
		return -1;
	if (k > n) {
		fprintf(stderr, "tachist calc: --k (%ld) cannot exceed --n (%ld)\n", k, n);
		return -1;
	}
	enum stats_ci_method meth = STATS_CI_WILSON;
	if (a->text[2] && stats_ci_method_parse(a->text[2], &meth) < 0) {
		fprintf(stderr, "tachist calc: --method is wilson or exact (got '%s')\n", a->text[2]);
		return -1;
	}
	double level = a->text[3] ? a->num[3] : 0.95, lo, hi;
	if (!(level > 0 && level < 1)) {
		fprintf(stderr, "tachist calc: --level must lie between 0 and 1\n");
		return -1;
	}
	if (stats_ci(meth, (unsigned long)k, (unsigned long)n, level, &lo, &hi) < 0) {
		fprintf(stderr, "tachist calc: the interval for %ld of %ld could not be computed\n", k, n);
		return -1;
	}
	put(o, "lower", lo, 0);
	put(o, "upper", hi, 0);
	snprintf(o->sentence, sizeof o->sentence, "%ld of %ld = %.4f, %g%% %s interval [%.4f, %.4f]",
		 k, n, (double)k / (double)n, level * 100,
		 meth == STATS_CI_EXACT ? "exact (Clopper-Pearson)" : "Wilson score", lo, hi);
	return 0;
}

static const struct calc calcs[] = {
	{"angle", {"size", "distance", NULL}, 0x3, 0, calc_angle},
	{"size", {"deg", "distance", NULL}, 0x3, 0, calc_size},
	{"pixels", {"deg", "rig", NULL}, 0x1, 0x2, calc_pixels},
	{"frames", {"ms", "hz", NULL}, 0x3, 0, calc_frames},
	{"dprime", {"m", "pc", "n", NULL}, 0x3, 0, calc_dprime},
	{"ci", {"k", "n", "method", "level", NULL}, 0x3, 0x4, calc_ci},
};

static void print_json(const struct calc_out *o)
{
	cJSON *j = cJSON_CreateObject();
	for (size_t i = 0; i < o->n; i++)
		cJSON_AddNumberToObject(j, o->key[i], o->value[i]);
	char *s = cJSON_Print(j);
	printf("%s\n", s);
	free(s);
	cJSON_Delete(j);
}

int cmd_calc(int argc, char **argv)
{
	if (argc < 2) {
		cmd_print_usage("calc", stderr);
		return EXIT_USAGE;
	}
	const struct calc *c = NULL;
	for (size_t i = 0; i < sizeof calcs / sizeof calcs[0]; i++)
		if (!strcmp(calcs[i].name, argv[1]))
			c = &calcs[i];
	if (!c) {
		fprintf(stderr, "tachist calc: unknown calculation '%s'\n", argv[1]);
		cmd_print_usage("calc", stderr);
		return EXIT_USAGE;
	}
	struct calc_args a;
	memset(&a, 0, sizeof a);
	int json = 0;
	for (int i = 2; i < argc; i++) {
		if (!strcmp(argv[i], "--json")) {
			json = 1;
			continue;
		}
		size_t k = 0;
		for (; c->opts[k]; k++)
			if (!strncmp(argv[i], "--", 2) && !strcmp(argv[i] + 2, c->opts[k]))
				break;
		if (!c->opts[k]) {
			fprintf(stderr, "tachist calc %s: unknown option '%s'\n", c->name, argv[i]);
			return EXIT_USAGE;
		}
		if (i + 1 >= argc) {
			fprintf(stderr, "tachist calc %s: %s needs a value\n", c->name, argv[i]);
			return EXIT_USAGE;
		}
		a.text[k] = argv[++i];
		if (!(c->text_opts & (1u << k)) && cmd_parse_double(a.text[k], &a.num[k])) {
			fprintf(stderr, "tachist calc %s: --%s %s is not a number\n", c->name, c->opts[k],
				a.text[k]);
			return EXIT_USAGE;
		}
	}
	for (size_t k = 0; c->opts[k]; k++)
		if ((c->required & (1u << k)) && !a.text[k]) {
			fprintf(stderr, "tachist calc %s: --%s is required\n", c->name, c->opts[k]);
			return EXIT_USAGE;
		}
	struct calc_out o;
	memset(&o, 0, sizeof o);
	int rc = c->fn(&a, &o);
	if (rc)
		return rc > 0 ? EXIT_PROBLEMS : EXIT_USAGE;
	if (json)
		print_json(&o);
	else
		printf("%s\n", o.sentence);
	return EXIT_OK;
}
