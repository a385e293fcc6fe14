/* protocol_adaptive — the "[adaptive NAME]" section kind of the protocol file (see
 * protocol_adaptive.h and docs/files.md, "Adaptive procedures").
 *
 * Each instance becomes one struct adapt_spec appended to protocol.adaptive. Plain keys go
 * straight into the spec through the key table; lists (start, prior_mean, halve_after) and the
 * easier direction are parsed here. The close hook checks what one section can know alone (the
 * rule's required keys, floor below ceiling, starts inside them, levels above 0 on a log axis,
 * keys that do not apply to the rule); the finish hook checks what needs the rest of the file
 * (chance level from the number of choices, sections no block uses, block keys that do not apply
 * to adaptive blocks). What needs the stimulus list (a start or prior mean outside the levels a
 * block offers, a category with no usable level) is checked when the plan is built. */
#include "protocol_adaptive.h"

#include <ctype.h>
#include <math.h>
#include <stddef.h>
#include <stdlib.h>
#include <string.h>

#include "adapt.h"

#define MAX_LIST 64
#define LEVEL_MAX 1e12

enum {
	AK_RULE, AK_AXIS, AK_EASIER, AK_START, AK_PRIOR_MEAN, AK_PER_CATEGORY, AK_TRIALS,
	AK_REVERSALS, AK_DOWN, AK_STEP, AK_TARGET_PC, AK_HALVE_AFTER, AK_FLOOR, AK_CEILING,
	AK_AVERAGE_LAST, AK_BETA, AK_DELTA, AK_PRIOR_SD, AK_GRID_STEP, AK_TEST_AT, AK_PERCENTILE,
	AK_STOP_SD, AK_COUNT
};

static const char *const rule_words[] = {"updown", "weighted", "quest", NULL};
static const char *const axis_words[] = {"linear", "log", NULL};
static const char *const easier_words[] = {"higher", "lower", NULL};
static const char *const test_at_words[] = {"mean", "peak", "percentile", NULL};

#define OFF(field) offsetof(struct adapt_spec, field)

static const struct protocol_key adaptive_keys[AK_COUNT] = {
	[AK_RULE] = {"rule", PTYPE_WORD, OFF(base.rule), 0, 0, 0, rule_words, 1, NULL,
		     OFF(lines.rule)},
	[AK_AXIS] = {"axis", PTYPE_WORD, OFF(base.axis), 0, 0, 0, axis_words, 0, NULL,
		     OFF(lines.axis)},
	[AK_EASIER] = {"easier", PTYPE_CUSTOM, 0, 0, 0, 0, easier_words, 0, NULL, 0},
	[AK_START] = {"start", PTYPE_CUSTOM, 0, -LEVEL_MAX, LEVEL_MAX, 0, NULL, 0, NULL,
		      OFF(lines.start)},
	[AK_PRIOR_MEAN] = {"prior_mean", PTYPE_CUSTOM, 0, -LEVEL_MAX, LEVEL_MAX, 0, NULL, 0, NULL,
			   OFF(lines.start)},
	[AK_PER_CATEGORY] = {"per_category", PTYPE_BOOL, OFF(per_category), 0, 0, 0, NULL, 0, NULL,
			     0},
	[AK_TRIALS] = {"trials", PTYPE_INT, OFF(base.max_trials), 1, 100000, 0, NULL, 1, "trials",
		       OFF(lines.trials)},
	[AK_REVERSALS] = {"reversals", PTYPE_INT, OFF(base.stop_reversals), 0, 10000, 0, NULL, 0,
			  NULL, OFF(lines.reversals)},
	[AK_DOWN] = {"down", PTYPE_INT, OFF(base.down), 1, 20, 0, NULL, 0, NULL, 0},
	[AK_STEP] = {"step", PTYPE_NUMBER, OFF(base.step_down), 0, LEVEL_MAX, 1, NULL, 0,
		     "axis units", 0},
	[AK_TARGET_PC] = {"target_pc", PTYPE_NUMBER, OFF(base.target_pc), 0, 1, 1, NULL, 0, NULL,
			  0},
	[AK_HALVE_AFTER] = {"halve_after", PTYPE_CUSTOM, 0, 1, 10000, 0, NULL, 0, NULL, 0},
	[AK_FLOOR] = {"floor", PTYPE_NUMBER, OFF(base.floor), -LEVEL_MAX, LEVEL_MAX, 0, NULL, 0,
		      NULL, OFF(lines.floor)},
	[AK_CEILING] = {"ceiling", PTYPE_NUMBER, OFF(base.ceiling), -LEVEL_MAX, LEVEL_MAX, 0, NULL,
			0, NULL, OFF(lines.ceiling)},
	[AK_AVERAGE_LAST] = {"average_last", PTYPE_INT, OFF(base.threshold_reversals), 1, 10000, 0,
			     NULL, 0, "reversals", OFF(lines.average_last)},
	[AK_BETA] = {"beta", PTYPE_NUMBER, OFF(base.beta), 0, 100, 1, NULL, 0, NULL, 0},
	[AK_DELTA] = {"delta", PTYPE_NUMBER, OFF(base.delta), 0, 0.5, 0, NULL, 0, NULL, 0},
	[AK_PRIOR_SD] = {"prior_sd", PTYPE_NUMBER, OFF(base.prior_sd), 0, 100, 1, NULL, 0,
			 "log10 units", 0},
	[AK_GRID_STEP] = {"grid_step", PTYPE_NUMBER, OFF(base.grid_step), 0.0001, 1, 0, NULL, 0,
			  "log10 units", 0},
	[AK_TEST_AT] = {"test_at", PTYPE_WORD, OFF(base.test_at), 0, 0, 0, test_at_words, 0, NULL, 0},
	[AK_PERCENTILE] = {"percentile", PTYPE_NUMBER, OFF(base.percentile), 0, 1, 1, NULL, 0, NULL,
			   0},
	[AK_STOP_SD] = {"stop_sd", PTYPE_NUMBER, OFF(base.stop_sd), 0, 100, 0, NULL, 0,
			"log10 units", 0},
};

static struct adapt_spec *specs(struct protocol *p)
{
	return p->adaptive;
}

static struct adapt_spec *current(struct protocol_ctx *c)
{
	struct protocol *p = protocol_ctx_protocol(c);
	return &specs(p)[p->nadaptive - 1];
}

static void *adaptive_base(struct protocol_ctx *c)
{
	return current(c);
}

static int name_ok(const char *s)
{
	if (!*s || strlen(s) > 64)
		return 0;
	for (; *s; s++)
		if (!isalnum((unsigned char)*s) && *s != '_' && *s != '-')
			return 0;
	return 1;
}

static int adaptive_open(struct protocol_ctx *c, const char *name, int line)
{
	struct protocol *p = protocol_ctx_protocol(c);
	if (!name_ok(name)) {
		protocol_ctx_error(c, line, "adaptive section name '%s': use 1 to 64 letters, "
				   "digits, '_' or '-'", name);
		return -1;
	}
	for (size_t i = 0; i < p->nadaptive; i++)
		if (!strcmp(specs(p)[i].name, name)) {
			protocol_ctx_error(c, line, "[adaptive %s] is defined twice (first on line %d)",
					   name, specs(p)[i].lines.section);
			return -1;
		}
	p->adaptive = xrealloc(p->adaptive, (p->nadaptive + 1) * sizeof(struct adapt_spec));
	struct adapt_spec *s = &specs(p)[p->nadaptive++];
	memset(s, 0, sizeof *s);
	s->name = xstrdup(name);
	s->lines.section = line;
	adapt_params_default(&s->base);
	s->base.max_trials = 0;
	s->base.rule = (enum adapt_rule)-1;   /* until a valid rule = ... is read */
	return 0;
}

/* A comma- (or space-) separated list of numbers into OUT (at most MAX_LIST). Returns the count,
 * or -1 after reporting. */
static int number_list(struct protocol_ctx *c, const struct protocol_key *k, const char *value,
		       int line, double *out)
{
	char *copy = xstrdup(value), *save = NULL;
	int n = 0, bad = 0;
	for (char *tok = strtok_r(copy, ", \t", &save); tok; tok = strtok_r(NULL, ", \t", &save)) {
		if (n == MAX_LIST) {
			protocol_ctx_error(c, line, "%s lists more than %d values", k->name, MAX_LIST);
			bad = 1;
			break;
		}
		double v;
		struct protocol_key one = *k;
		if (protocol_value_number(c, &one, tok, line, &v)) {
			bad = 1;
			continue;
		}
		out[n++] = v;
	}
	free(copy);
	if (!bad && n == 0) {
		protocol_ctx_error(c, line, "%s has no value", k->name);
		bad = 1;
	}
	return bad ? -1 : n;
}

static void adaptive_custom(struct protocol_ctx *c, int key_index, const char *key,
			    const char *value, int line)
{
	(void)key;
	struct adapt_spec *s = current(c);
	const struct protocol_key *k = &adaptive_keys[key_index];
	double v[MAX_LIST];
	int n;
	switch (key_index) {
	case AK_EASIER: {
		int w;
		if (!protocol_value_word(c, k, value, line, &w))
			s->base.easier_lower = w == 1;
		break;
	}
	case AK_START:
	case AK_PRIOR_MEAN:
		if (protocol_ctx_key_line(c, AK_START) && protocol_ctx_key_line(c, AK_PRIOR_MEAN)) {
			protocol_ctx_error(c, line, "give either start or prior_mean, not both (start "
					   "for rule = updown or weighted, prior_mean for quest)");
			break;
		}
		n = number_list(c, k, value, line, v);
		if (n < 0)
			break;
		free(s->starts);
		s->starts = xmalloc((size_t)n * sizeof *s->starts);
		memcpy(s->starts, v, (size_t)n * sizeof *v);
		s->nstarts = (size_t)n;
		break;
	case AK_HALVE_AFTER:
		n = number_list(c, k, value, line, v);
		if (n < 0)
			break;
		if (n > ADAPT_MAX_HALVINGS) {
			protocol_ctx_error(c, line, "halve_after lists more than %d reversal counts",
					   ADAPT_MAX_HALVINGS);
			break;
		}
		for (int i = 0; i < n; i++) {
			if (v[i] != floor(v[i]) || (i > 0 && v[i] <= v[i - 1])) {
				protocol_ctx_error(c, line, "halve_after = %s: give whole reversal "
						   "counts in increasing order", value);
				return;
			}
		}
		s->base.nhalve = n;
		for (int i = 0; i < n; i++)
			s->base.halve_after[i] = (int)v[i];
		break;
	default:
		break;
	}
}

/* Warns about KEY set in a section whose rule does not use it. */
static void not_for_rule(struct protocol_ctx *c, int key_index, const char *rule)
{
	int line = protocol_ctx_key_line(c, key_index);
	if (line)
		protocol_ctx_warning(c, line, "%s does not apply to rule = %s and is ignored",
				     adaptive_keys[key_index].name, rule);
}

/* What the section's rule needs, and the keys it ignores. */
static void adaptive_rule_keys(struct protocol_ctx *c, struct adapt_spec *s, int header)
{
	struct adapt_params *p = &s->base;
	const char *rule = rule_words[p->rule];
	bool quest = p->rule == ADAPT_QUEST;
	bool both = protocol_ctx_key_line(c, AK_START) && protocol_ctx_key_line(c, AK_PRIOR_MEAN);
	if (both) {
		/* reported when the second was read */
	} else if (quest) {
		if (protocol_ctx_key_line(c, AK_START))
			protocol_ctx_error(c, protocol_ctx_key_line(c, AK_START),
					   "rule = quest takes prior_mean (the prior's mean level), "
					   "not start");
		else if (!protocol_ctx_key_line(c, AK_PRIOR_MEAN))
			protocol_ctx_error(c, header, "[adaptive %s]: rule = quest needs prior_mean "
					   "(one level per staircase)", s->name);
	} else {
		if (protocol_ctx_key_line(c, AK_PRIOR_MEAN))
			protocol_ctx_error(c, protocol_ctx_key_line(c, AK_PRIOR_MEAN),
					   "rule = %s takes start (the first level), not prior_mean",
					   rule);
		else if (!protocol_ctx_key_line(c, AK_START))
			protocol_ctx_error(c, header, "[adaptive %s]: rule = %s needs start (one "
					   "level per staircase)", s->name, rule);
	}
	if (quest) {
		static const int skip[] = {AK_DOWN, AK_STEP, AK_TARGET_PC, AK_HALVE_AFTER,
					   AK_REVERSALS, AK_AVERAGE_LAST};
		for (size_t i = 0; i < sizeof skip / sizeof skip[0]; i++)
			not_for_rule(c, skip[i], rule);
		if (p->axis != ADAPT_AXIS_LOG)
			protocol_ctx_error(c, s->lines.axis, "rule = quest works on a log axis; set "
					   "axis = log (or leave it out)");
	} else {
		if (!protocol_ctx_key_line(c, AK_STEP))
			protocol_ctx_error(c, header, "[adaptive %s]: rule = %s needs step (in axis "
					   "units: log10 units on a log axis)", s->name, rule);
		static const int skip[] = {AK_BETA, AK_DELTA, AK_PRIOR_SD, AK_GRID_STEP, AK_TEST_AT,
					   AK_PERCENTILE, AK_STOP_SD};
		for (size_t i = 0; i < sizeof skip / sizeof skip[0]; i++)
			not_for_rule(c, skip[i], rule);
		if (p->rule == ADAPT_WEIGHTED) {
			not_for_rule(c, AK_DOWN, rule);
			p->down = 1;
			if (!protocol_ctx_key_line(c, AK_TARGET_PC))
				protocol_ctx_error(c, header, "[adaptive %s]: rule = weighted needs "
						   "target_pc (the proportion correct to track)",
						   s->name);
			else if (!(p->target_pc < 1))
				protocol_ctx_error(c, protocol_ctx_key_line(c, AK_TARGET_PC),
						   "target_pc = %g must be below 1", p->target_pc);
		} else {
			not_for_rule(c, AK_TARGET_PC, rule);
		}
		if (p->stop_reversals > 0 && p->threshold_reversals > p->stop_reversals) {
			int line = s->lines.average_last ? s->lines.average_last : s->lines.reversals;
			protocol_ctx_error(c, line, "average_last = %d needs at least that many "
					   "reversals, but reversals = %d stops the staircase first",
					   p->threshold_reversals, p->stop_reversals);
		}
	}
	if (p->test_at != ADAPT_TEST_AT_PERCENTILE && protocol_ctx_key_line(c, AK_PERCENTILE) &&
	    quest)
		protocol_ctx_warning(c, protocol_ctx_key_line(c, AK_PERCENTILE),
				     "percentile applies only with test_at = percentile and is "
				     "ignored");
}

/* Levels: above 0 on a log axis, floor below ceiling, starts inside, halvings before the end. */
static void adaptive_levels(struct protocol_ctx *c, struct adapt_spec *s)
{
	struct adapt_params *p = &s->base;
	bool quest = p->rule == ADAPT_QUEST;
	const char *what = quest ? "prior_mean" : "start";
	if (p->axis == ADAPT_AXIS_LOG) {
		if (s->has_floor && !(p->floor > 0))
			protocol_ctx_error(c, s->lines.floor, "floor = %g: levels on a log axis must "
					   "be above 0", p->floor);
		if (s->has_ceiling && !(p->ceiling > 0))
			protocol_ctx_error(c, s->lines.ceiling, "ceiling = %g: levels on a log axis "
					   "must be above 0", p->ceiling);
		for (size_t i = 0; i < s->nstarts; i++)
			if (!(s->starts[i] > 0)) {
				protocol_ctx_error(c, s->lines.start, "%s = %g: levels on a log axis "
						   "must be above 0", what, s->starts[i]);
				break;
			}
	}
	if (s->has_floor && s->has_ceiling && !(p->floor < p->ceiling))
		protocol_ctx_error(c, s->lines.floor, "floor = %g must be below ceiling = %g "
				   "(line %d)", p->floor, p->ceiling, s->lines.ceiling);
	for (size_t i = 0; i < s->nstarts; i++) {
		double v = s->starts[i];
		if ((s->has_floor && v < p->floor) || (s->has_ceiling && v > p->ceiling)) {
			protocol_ctx_error(c, s->lines.start, "%s = %g lies outside floor = %g and "
					   "ceiling = %g", what, v, s->has_floor ? p->floor : -INFINITY,
					   s->has_ceiling ? p->ceiling : INFINITY);
			break;
		}
	}
	for (int i = 0; i < p->nhalve && !quest; i++)
		if (p->stop_reversals > 0 && p->halve_after[i] >= p->stop_reversals) {
			protocol_ctx_warning(c, protocol_ctx_key_line(c, AK_HALVE_AFTER),
					     "halve_after = %d comes at or after the last reversal "
					     "(reversals = %d) and never takes effect",
					     p->halve_after[i], p->stop_reversals);
			break;
		}
}

static void adaptive_close(struct protocol_ctx *c, int header)
{
	struct adapt_spec *s = current(c);
	struct adapt_params *p = &s->base;
	s->has_floor = protocol_ctx_key_line(c, AK_FLOOR) != 0;
	s->has_ceiling = protocol_ctx_key_line(c, AK_CEILING) != 0;
	if (!s->has_floor)
		p->floor = NAN;
	if (!s->has_ceiling)
		p->ceiling = NAN;
	if ((int)p->rule < 0) {
		/* rule missing or misspelt: reported already; the rest depends on it */
		p->rule = ADAPT_UPDOWN;
		return;
	}
	adaptive_rule_keys(c, s, header);
	adaptive_levels(c, s);
}

static int adaptive_defines(const struct protocol *p, const char *name)
{
	return adapt_spec_find(p->adaptive, p->nadaptive, name) != NULL;
}

static void adaptive_finish(struct protocol_ctx *c)
{
	struct protocol *p = protocol_ctx_protocol(c);
	for (size_t i = 0; i < p->nadaptive; i++) {
		struct adapt_spec *s = &specs(p)[i];
		bool used = false;
		for (size_t b = 0; b < p->nblocks; b++)
			used |= p->blocks[b].adaptive && !strcmp(p->blocks[b].adaptive, s->name);
		if (!used)
			protocol_ctx_warning(c, s->lines.section, "[adaptive %s] is not used by any "
					     "block (adaptive = %s)", s->name, s->name);
		if (p->nchoices < 2)
			continue;
		double chance = 1.0 / (double)p->nchoices;
		if (s->base.rule == ADAPT_WEIGHTED && s->base.target_pc > 0 &&
		    s->base.target_pc <= chance)
			protocol_ctx_error(c, s->lines.section, "[adaptive %s]: target_pc = %g is at "
					   "or below chance (1/%zu with %zu choices)", s->name,
					   s->base.target_pc, p->nchoices, p->nchoices);
	}
	for (size_t b = 0; b < p->nblocks; b++) {
		const struct protocol_block *pb = &p->blocks[b];
		if (!pb->adaptive || !adaptive_defines(p, pb->adaptive))
			continue;
		if (pb->repeat_faults)
			protocol_ctx_warning(c, pb->line, "block '%s': repeat_faults does not apply to "
					     "adaptive blocks (every trial counts for its staircase "
					     "as shown)", pb->name);
		if (pb->repeats > 1)
			protocol_ctx_warning(c, pb->line, "block '%s': repeats does not apply to "
					     "adaptive blocks (the rule's trials sets the length)",
					     pb->name);
		if (pb->order == ORDER_FIXED || pb->longest_streak > 0)
			protocol_ctx_warning(c, pb->line, "block '%s': order and longest_streak do not apply "
					     "to adaptive blocks (staircases take turns in random "
					     "rounds)", pb->name);
	}
}

static void adaptive_clear(struct protocol *p)
{
	for (size_t i = 0; i < p->nadaptive; i++)
		adapt_spec_clear(&specs(p)[i]);
	free(p->adaptive);
	p->adaptive = NULL;
	p->nadaptive = 0;
}

const struct protocol_section protocol_adaptive_section = {
	"adaptive", 1, adaptive_keys, AK_COUNT, adaptive_open, adaptive_base, adaptive_custom,
	adaptive_close, adaptive_finish, adaptive_defines, adaptive_clear,
};
