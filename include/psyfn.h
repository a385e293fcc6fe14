/* psyfn — psychometric functions shared by the model observer, the fits and QUEST.
 *
 * P(x) = γ + (1 − γ − λ)·F(x; α, β) with F one of
 *   weibull:  1 − exp(−(x/α)^β)            (x > 0; F(0) = 0)
 *   logistic: 1 / (1 + exp(−(x − α)/β))
 *   normal:   Φ((x − α)/β)                 (α mean, β standard deviation)
 * α is the position parameter and β the slope parameter (the contract in docs/design.md). */
#ifndef TACHIST_PSYFN_H
#define TACHIST_PSYFN_H

enum psyfn_shape { PSYFN_WEIBULL, PSYFN_LOGISTIC, PSYFN_NORMAL };

struct psyfn {
	enum psyfn_shape shape;
	double alpha, beta;
	double gamma;   /* guess rate, 1/m for m choices */
	double lambda;  /* lapse rate */
};

/* F(x) alone, in [0, 1]. */
double psyfn_core(enum psyfn_shape s, double x, double alpha, double beta);
/* P(x) with guess and lapse. */
double psyfn_eval(const struct psyfn *f, double x);
/* The x at which P(x) = PC, or NaN when PC is outside (γ, 1 − λ). */
double psyfn_inverse(const struct psyfn *f, double pc);
/* "weibull" | "logistic" | "normal" -> shape; returns 0 or -1. */
int psyfn_shape_parse(const char *s, enum psyfn_shape *out);
const char *psyfn_shape_name(enum psyfn_shape s);

#endif
