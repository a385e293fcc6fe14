/* observer — the model observer: a simulated participant that answers an n-alternative trial from
 * its level through a psychometric function, with a seeded RNG. It powers the headless demo, the
 * tests and pilot planning. Pure computation (GSL); the presenter wraps it as a responder.
 *
 * Spec syntax (the part after "model:" of --observer), comma-separated KEY=VALUE:
 *   shape=weibull|logistic|normal   F of psyfn.h (default weibull)
 *   threshold=X                     α, position parameter in level units (default 1; > 0 for weibull)
 *   slope=B                         β (default 3.5). A negative slope mirrors the function,
 *                                   P(x) = γ + (1 − γ − λ)·(1 − F(x; α, |β|)), for levels where a
 *                                   larger value is harder (noise or perturbation budgets)
 *   lapse=L                         λ in [0, 0.5) (default 0.02)
 *   rt=MS                           mean reaction time in ms (default 600)
 *   seed=N                          RNG seed (default 1)
 * The guess rate γ is 1/n for n choices. On each trial the model is correct with probability P(level)
 * (the upper asymptote 1 − λ when the trial has no level); a wrong answer is drawn uniformly
 * among the n − 1 other categories. Reaction times are ex-Gaussian: Normal(μ, σ) + Exponential(τ)
 * with μ = 0.75·rt, σ = 0.1·rt, τ = 0.25·rt (so the mean is rt), floored at 100 ms. */
#ifndef TACHIST_OBSERVER_H
#define TACHIST_OBSERVER_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "psyfn.h"

struct observer_spec {
	enum psyfn_shape shape;
	double threshold, slope, lapse, rt_ms;
	uint64_t seed;
	unsigned pause_at;    /* >0: presses Escape (the observer's pause) in every Nth trial */
};

struct observer;

/* Parses SPEC (with or without the leading "model:"). Returns 0, or -1 with a sentence in ERR
 * naming the offending key or value. */
int observer_parse(const char *spec, struct observer_spec *out, char *err, size_t errlen);
/* Writes the canonical spec text ("model:shape=...,seed=...") into BUF. */
void observer_format(const struct observer_spec *s, char *buf, size_t len);

struct observer *observer_new(const struct observer_spec *s);
void observer_destroy(struct observer *o);

/* Proportion correct the model has at LEVEL with N choices (HAS_LEVEL false: no level). */
double observer_pc(const struct observer_spec *s, int n, bool has_level, double level);

/* One answer: the chosen category index in [0, N) given the true one, and the RT in ms. */
struct observer_answer {
	int choice;
	bool correct;
	double rt_ms;
};
void observer_answer(struct observer *o, int n, int truth, bool has_level, double level,
		     struct observer_answer *out);

#endif
