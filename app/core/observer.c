/* observer — the model observer (see observer.h). One GSL mt19937 per observer, seeded from the
 * spec; every draw comes from it in a fixed order per trial (correct?, wrong choice, RT), so a seed
 * reproduces the whole answer sequence. */
#include "observer.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>

#include "diag.h"

struct observer {
	struct observer_spec s;
	gsl_rng *rng;
};

static int parse_num(const char *v, double *out)
{
	char *end;
	double x = strtod(v, &end);
	if (end == v || *end || !isfinite(x))
		return -1;
	*out = x;
	return 0;
}

int observer_parse(const char *spec, struct observer_spec *out, char *err, size_t errlen)
{
	struct observer_spec s = {PSYFN_WEIBULL, 1.0, 3.5, 0.02, 600.0, 1, 0};
	if (!strncmp(spec, "model:", 6))
		spec += 6;
	else if (!strcmp(spec, "model"))
		spec += 5;
	char *copy = xstrdup(spec), *save = NULL;
	int rc = 0;
	for (char *kv = strtok_r(copy, ",", &save); kv; kv = strtok_r(NULL, ",", &save)) {
		char *eq = strchr(kv, '=');
		if (!eq) {
			snprintf(err, errlen, "model observer: '%s' is not KEY=VALUE", kv);
			rc = -1;
			break;
		}
		*eq = '\0';
		const char *k = kv, *v = eq + 1;
		double x = 0;
		bool num_ok = parse_num(v, &x) == 0;
		if (!strcmp(k, "shape")) {
			if (psyfn_shape_parse(v, &s.shape)) {
				snprintf(err, errlen, "model observer: shape '%s' is not weibull, logistic or normal", v);
				rc = -1;
			}
		} else if (!strcmp(k, "threshold") && num_ok) {
			s.threshold = x;
		} else if (!strcmp(k, "slope") && num_ok && x != 0) {
			s.slope = x;
		} else if (!strcmp(k, "lapse") && num_ok && x >= 0 && x < 0.5) {
			s.lapse = x;
		} else if (!strcmp(k, "rt") && num_ok && x > 0 && x <= 60000) {
			s.rt_ms = x;
		} else if (!strcmp(k, "seed") && num_ok && x >= 0 && x == floor(x) && x < 1.8e19) {
			s.seed = (uint64_t)x;
		} else if (!strcmp(k, "pause") && num_ok && x >= 1 && x == floor(x) && x <= 1e6) {
			s.pause_at = (unsigned)x;
		} else if (!strcmp(k, "threshold") || !strcmp(k, "slope") || !strcmp(k, "lapse") ||
			   !strcmp(k, "rt") || !strcmp(k, "seed") || !strcmp(k, "pause")) {
			snprintf(err, errlen, "model observer: %s=%s is out of range or not a number "
				 "(threshold: number; slope: non-zero; lapse: 0 to <0.5; rt: ms, >0; "
				 "seed: whole number; pause: trial number, 1 or more)", k, v);
			rc = -1;
		} else {
			snprintf(err, errlen, "model observer: unknown key '%s' (shape, threshold, slope, "
				 "lapse, rt, seed, pause)", k);
			rc = -1;
		}
		if (rc)
			break;
	}
	free(copy);
	if (!rc && s.shape == PSYFN_WEIBULL && !(s.threshold > 0)) {
		snprintf(err, errlen, "model observer: a weibull threshold must be above 0");
		rc = -1;
	}
	if (!rc)
		*out = s;
	return rc;
}

void observer_format(const struct observer_spec *s, char *buf, size_t len)
{
	snprintf(buf, len, "model:shape=%s,threshold=%g,slope=%g,lapse=%g,rt=%g,seed=%llu",
		 psyfn_shape_name(s->shape), s->threshold, s->slope, s->lapse, s->rt_ms,
		 (unsigned long long)s->seed);
	size_t used = strlen(buf);
	if (s->pause_at && used < len)
		snprintf(buf + used, len - used, ",pause=%u", s->pause_at);
}

struct observer *observer_new(const struct observer_spec *s)
{
	struct observer *o = xcalloc(1, sizeof *o);
	o->s = *s;
	o->rng = gsl_rng_alloc(gsl_rng_mt19937);
	gsl_rng_set(o->rng, (unsigned long)s->seed);
	return o;
}

void observer_destroy(struct observer *o)
{
	if (!o)
		return;
	gsl_rng_free(o->rng);
	free(o);
}

double observer_pc(const struct observer_spec *s, int n, bool has_level, double level)
{
	struct psyfn f = {s->shape, s->threshold, fabs(s->slope), n > 0 ? 1.0 / n : 0.5, s->lapse};
	double F = 1.0;
	if (has_level) {
		F = psyfn_core(f.shape, level, f.alpha, f.beta);
		if (s->slope < 0)
			F = 1.0 - F;
	}
	return f.gamma + (1.0 - f.gamma - f.lambda) * F;
}

void observer_answer(struct observer *o, int n, int truth, bool has_level, double level,
		     struct observer_answer *out)
{
	double pc = observer_pc(&o->s, n, has_level, level);
	bool correct = gsl_rng_uniform(o->rng) < pc;
	int choice = truth;
	if (!correct && n > 1) {
		int k = (int)gsl_rng_uniform_int(o->rng, (unsigned long)(n - 1));
		choice = k >= truth ? k + 1 : k;
	} else {
		correct = true;   /* n == 1 cannot be wrong */
		(void)gsl_rng_uniform(o->rng);   /* keep the draw count per trial fixed */
	}
	double rt = o->s.rt_ms;
	double x = 0.75 * rt + gsl_ran_gaussian(o->rng, 0.1 * rt) + gsl_ran_exponential(o->rng, 0.25 * rt);
	out->choice = choice;
	out->correct = choice == truth;
	out->rt_ms = x < 100 ? 100 : x;
}
