/* psyfn — psychometric function shapes, their guess/lapse form and inverse (see psyfn.h). */
#include "psyfn.h"

#include <math.h>
#include <string.h>

#include <gsl/gsl_cdf.h>

double psyfn_core(enum psyfn_shape s, double x, double alpha, double beta)
{
	switch (s) {
	case PSYFN_WEIBULL:
		if (x <= 0)
			return 0.0;
		return -expm1(-pow(x / alpha, beta));
	case PSYFN_LOGISTIC:
		return 1.0 / (1.0 + exp(-(x - alpha) / beta));
	case PSYFN_NORMAL:
		return gsl_cdf_ugaussian_P((x - alpha) / beta);
	}
	return NAN;
}

double psyfn_eval(const struct psyfn *f, double x)
{
	return f->gamma + (1.0 - f->gamma - f->lambda) * psyfn_core(f->shape, x, f->alpha, f->beta);
}

double psyfn_inverse(const struct psyfn *f, double pc)
{
	double span = 1.0 - f->gamma - f->lambda;
	if (!(span > 0) || !(pc > f->gamma) || !(pc < 1.0 - f->lambda))
		return NAN;
	double u = (pc - f->gamma) / span;
	switch (f->shape) {
	case PSYFN_WEIBULL:
		return f->alpha * pow(-log1p(-u), 1.0 / f->beta);
	case PSYFN_LOGISTIC:
		return f->alpha + f->beta * log(u / (1.0 - u));
	case PSYFN_NORMAL:
		return f->alpha + f->beta * gsl_cdf_ugaussian_Pinv(u);
	}
	return NAN;
}

int psyfn_shape_parse(const char *s, enum psyfn_shape *out)
{
	if (!strcmp(s, "weibull"))
		*out = PSYFN_WEIBULL;
	else if (!strcmp(s, "logistic"))
		*out = PSYFN_LOGISTIC;
	else if (!strcmp(s, "normal"))
		*out = PSYFN_NORMAL;
	else
		return -1;
	return 0;
}

const char *psyfn_shape_name(enum psyfn_shape s)
{
	switch (s) {
	case PSYFN_WEIBULL: return "weibull";
	case PSYFN_LOGISTIC: return "logistic";
	case PSYFN_NORMAL: return "normal";
	}
	return "?";
}
