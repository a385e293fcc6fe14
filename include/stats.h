/* stats — proportions with confidence intervals, d′ for m-alternative forced choice, and
 * reaction-time summaries. Pure computation on memory (GSL for distributions, integration and root
 * finding); nothing here prints.
 *
 * Callers: app/core/analysis.c (report), app/cmd/cmd_calc.c (`calc dprime`, `calc ci`), the
 * console's results screen. */
#ifndef TACHIST_STATS_H
#define TACHIST_STATS_H

#include <stdbool.h>
#include <stddef.h>

enum stats_ci_method { STATS_CI_WILSON, STATS_CI_EXACT };

/* "wilson" | "exact" -> method; returns 0 or -1. */
int stats_ci_method_parse(const char *s, enum stats_ci_method *out);
const char *stats_ci_method_name(enum stats_ci_method m);

/* Two-sided interval for a binomial proportion K of N at confidence CONF (for example 0.95).
 * Wilson: the score interval (Wilson 1927; Newcombe 1998 method 3, no continuity correction).
 * Exact: Clopper–Pearson from beta quantiles (lower 0 when K = 0, upper 1 when K = N).
 * Returns 0, or -1 when N = 0, K > N or CONF is not in (0, 1). */
int stats_ci(enum stats_ci_method method, unsigned long k, unsigned long n, double conf,
	     double *lower, double *upper);

/* Proportion correct of an unbiased observer in M-alternative forced choice with sensitivity D:
 * Pc(d′) = ∫ φ(x − d′) Φ(x)^(m−1) dx over the real line, integrated numerically (GSL QAGI).
 * M ≥ 2. Returns NaN when the integration fails. */
double stats_pc_mafc(double d, int m);

/* Solves Pc(d′) = PC for d′ (Brent's method on a bracket that it widens as needed). PC must be
 * strictly inside (0, 1); PC = 1/M gives 0 and below-chance PC a negative d′.
 * Returns 0 and *D, or -1 when PC or M are out of range or the solver fails. */
int stats_dprime_mafc(double pc, int m, double *d);

/* The proportion to use for d′ from K correct of N: K/N, except that 0 becomes 1/(2N) and N/N
 * becomes 1 − 1/(2N) (the 1/(2N) rule, Macmillan & Kaplan 1985), so that d′ stays finite.
 * *CORRECTED tells whether the rule was applied. N must be > 0. */
double stats_pc_corrected(unsigned long k, unsigned long n, bool *corrected);

/* Summary of correct-trial reaction times. */
struct stats_rt {
	size_t n;          /* correct trials with an RT at or above the anticipation limit */
	double median;     /* ms; NaN when n = 0 */
	double q25, q75;   /* quartiles (R's default type 7 / linear interpolation) */
	double iqr;        /* q75 − q25 */
	double trimmed;    /* 10% trimmed mean: ⌊0.1·n⌋ values cut from each end */
};

/* Fills OUT from the N reaction times in RT (ms); sorts RT in place. */
void stats_rt_summary(double *rt, size_t n, struct stats_rt *out);
/* Quantile P in [0, 1] of sorted data (linear interpolation, R type 7); NaN when N = 0. */
double stats_quantile_sorted(const double *sorted, size_t n, double p);
/* Median of N values, sorting V in place; NaN when N = 0. */
double stats_median(double *v, size_t n);

/* Anticipation limit in ms: responses faster than this are counted, not averaged (100 ms is common
 * practice, no source). */
#define STATS_ANTICIPATION_MS 100.0

#endif
