/* plan — the session's trial plan, built reproducibly from protocol, list, rig and seed.
 *
 * For each block in protocol order: the list rows its filter selects, times its repeats, in list
 * order (order = fixed) or shuffled under the longest-run limit (order = random). One GSL mt19937
 * generator, seeded once with the seed (its two 32-bit halves XORed, since GSL's mt19937 takes 32
 * bits), serves every block in turn, so the same inputs give the same plan everywhere. The random
 * order is drawn trial by trial: each step picks a remaining trial uniformly among those whose
 * category keeps the rest of the block arrangeable within the run limit (see feasible()).
 * Adaptive blocks get their trials from the adaptive module (adaptive_trials below): trials of
 * interleaved staircases with stim = -1; the rule picks the image at run time. Called by `check`,
 * `run`, the console. */
#include "plan.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>

#include "adapt.h"
#include "estimate.h"
#include "frames.h"
#include "geom.h"
#include "protocol.h"
#include "rig.h"
#include "sha256.h"
#include "stimlist.h"


static int level_equal(double a, double b)
{
	return fabs(a - b) <= 1e-9 * fmax(1.0, fabs(a));
}

static int row_selected(const struct protocol_block *b, const struct stimlist *l,
			const struct stim *s)
{
	char buf[64];
	for (size_t f = 0; f < b->nfilters; f++) {
		const struct protocol_filter *flt = &b->filters[f];
		int numeric = !strcmp(flt->column, "level");
		const char *v = stimlist_value(l, s, flt->column, buf, sizeof buf);
		if (!v)
			return 0;
		int any = 0;
		for (size_t k = 0; k < flt->nvalues && !any; k++)
			any = numeric ? (s->has_level && level_equal(s->level, atof(flt->values[k])))
				      : !strcmp(v, flt->values[k]);
		if (!any)
			return 0;
	}
	return 1;
}

/* Can N[0..nc) trials be arranged with runs of at most K, given that the sequence so far ends in a
 * run of R trials of category LAST (-1 for none)? Category c needs its trials in at most (others +
 * 1) runs of at most K; the first of those runs continues the current one when c is LAST. */
static int feasible(const size_t *n, size_t nc, int last, int r, int k)
{
	size_t total = 0;
	for (size_t c = 0; c < nc; c++)
		total += n[c];
	for (size_t c = 0; c < nc; c++) {
		size_t others = total - n[c];
		size_t cap = (size_t)k * (others + 1);
		if ((int)c == last)
			cap -= (size_t)r;
		if (n[c] > cap)
			return 0;
	}
	return 1;
}

/* Orders T[0..n) at random with no run of one category longer than K (0 = no limit). Returns 0,
 * or -1 when no such order exists (T is then shuffled without the limit). */
static int shuffle_limited(struct plan_trial *t, size_t n, int k, size_t nc, gsl_rng *rng)
{
	gsl_ran_shuffle(rng, t, n, sizeof *t);
	if (k <= 0 || n == 0)
		return 0;
	size_t *cnt = xcalloc(nc, sizeof *cnt);
	struct plan_trial **pool = xcalloc(nc, sizeof *pool);
	struct plan_trial *out = xmalloc(n * sizeof *out);
	for (size_t i = 0; i < n; i++)
		cnt[t[i].choice]++;
	for (size_t c = 0; c < nc; c++) {
		pool[c] = xmalloc((cnt[c] ? cnt[c] : 1) * sizeof **pool);
		cnt[c] = 0;
	}
	for (size_t i = 0; i < n; i++)
		pool[t[i].choice][cnt[t[i].choice]++] = t[i];
	int rc = feasible(cnt, nc, -1, 0, k) ? 0 : -1;
	int last = -1, run = 0;
	for (size_t i = 0; i < n && rc == 0; i++) {
		/* Weight each allowed category by its remaining trials. */
		size_t wsum = 0;
		size_t *w = xcalloc(nc, sizeof *w);
		for (size_t c = 0; c < nc; c++) {
			if (!cnt[c] || ((int)c == last && run >= k))
				continue;
			cnt[c]--;
			int nr = (int)c == last ? run + 1 : 1;
			if (feasible(cnt, nc, (int)c, nr, k))
				w[c] = cnt[c] + 1;
			cnt[c]++;
			wsum += w[c];
		}
		if (!wsum) {
			rc = -1;
			free(w);
			break;
		}
		size_t pick = gsl_rng_uniform_int(rng, wsum), c = 0;
		while (pick >= w[c]) {
			pick -= w[c];
			c++;
		}
		free(w);
		out[i] = pool[c][--cnt[c]];
		run = (int)c == last ? run + 1 : 1;
		last = (int)c;
	}
	if (rc == 0)
		memcpy(t, out, n * sizeof *t);
	for (size_t c = 0; c < nc; c++)
		free(pool[c]);
	free(pool);
	free(cnt);
	free(out);
	return rc;
}

struct adapt_item *plan_adaptive_items(const struct protocol *p, const struct stimlist *l,
				       int proto_block, size_t *n)
{
	const struct protocol_block *b = &p->blocks[proto_block];
	struct adapt_item *items = NULL;
	*n = 0;
	for (size_t i = 0; i < l->n; i++) {
		const struct stim *s = &l->items[i];
		if (!row_selected(b, l, s))
			continue;
		int choice = protocol_choice_index(p, s->category);
		items = xrealloc(items, (*n + 1) * sizeof *items);
		items[(*n)++] = (struct adapt_item){(int)i, choice < 0 ? 0 : choice,
						    s->has_level ? s->level : NAN};
	}
	return items;
}

/* The trials of an adaptive block (the adaptive work's part of the plan): the staircases of its
 * [adaptive NAME] section over the rows the block selects, in the order adapt_plan_order draws
 * from RNG, each with stim = -1 until the rule picks the image at run time. Problems that need
 * the list (a start or prior mean outside the levels offered, a category without usable levels)
 * go to D. Returns the malloc'd trials and *N, or NULL. */
static struct plan_trial *adaptive_trials(const struct protocol *p, const struct protocol_block *b,
					  const struct stimlist *l, gsl_rng *rng, size_t *n,
					  struct diag_list *d)
{
	const struct adapt_spec *as = adapt_spec_find(p->adaptive, p->nadaptive, b->adaptive);
	if (!as)
		return NULL;   /* reported by the protocol parser */
	size_t ni;
	struct adapt_item *items = plan_adaptive_items(p, l, (int)(b - p->blocks), &ni);
	int *st, *ch;
	char why[256];
	int rc = adapt_plan_order(as, p->nchoices, items, ni, rng, &st, &ch, n, why, sizeof why);
	free(items);
	if (rc) {
		int line = rc == ADAPT_BAD_START ? as->lines.start
			   : rc == ADAPT_BAD_LEVELS ? (b->select_line ? b->select_line : b->line)
						    : as->lines.section;
		diag_add(d, DIAG_ERROR, p->path, line, "block '%s' (adaptive %s): %s", b->name,
			 as->name, why);
		return NULL;
	}
	struct plan_trial *t = xmalloc((*n ? *n : 1) * sizeof *t);
	for (size_t k = 0; k < *n; k++)
		t[k] = (struct plan_trial){.stim = -1, .choice = ch[k], .staircase = st[k]};
	free(st);
	free(ch);
	return t;
}

/* Reports a filter on a column the list lacks, or one that selects nothing. Returns the number
 * of rows selected (0 after a report). */
static size_t block_selection(const struct protocol *p, const struct protocol_block *b,
			      const struct stimlist *l, struct diag_list *d)
{
	for (size_t f = 0; f < b->nfilters; f++) {
		char buf[64];
		if (l->n && !stimlist_value(l, &l->items[0], b->filters[f].column, buf, sizeof buf)) {
			diag_add(d, DIAG_ERROR, p->path, b->select_line,
				 "block '%s': the list has no column '%s' to select on", b->name,
				 b->filters[f].column);
			return 0;
		}
	}
	size_t nsel = 0;
	for (size_t i = 0; i < l->n; i++)
		nsel += row_selected(b, l, &l->items[i]);
	if (!nsel)
		diag_add(d, DIAG_ERROR, p->path, b->select_line ? b->select_line : b->line,
			 "block '%s' selects no rows of the list", b->name);
	return nsel;
}

int plan_check_blocks(const struct protocol *p, const struct stimlist *l, struct diag_list *d)
{
	size_t errors0 = diag_count(d, DIAG_ERROR);
	for (size_t b = 0; b < p->nblocks; b++)
		block_selection(p, &p->blocks[b], l, d);
	return diag_count(d, DIAG_ERROR) > errors0 ? -1 : 0;
}

static void block_trials(const struct protocol *p, const struct protocol_block *b, int bi,
			 const struct stimlist *l, gsl_rng *rng, struct plan *pl,
			 struct diag_list *d)
{
	size_t nsel = block_selection(p, b, l, d);
	if (!nsel)
		return;
	size_t n;
	struct plan_trial *t;
	if (b->adaptive) {
		if (!(t = adaptive_trials(p, b, l, rng, &n, d)))
			return;
		goto append;
	}
	n = nsel * (size_t)b->repeats;
	t = xmalloc(n * sizeof *t);
	size_t k = 0;
	for (int r = 0; r < b->repeats; r++)
		for (size_t i = 0; i < l->n; i++) {
			const struct stim *s = &l->items[i];
			if (!row_selected(b, l, s))
				continue;
			int choice = protocol_choice_index(p, s->category);
			t[k].block = bi;
			t[k].stim = b->adaptive ? -1 : (int)i;
			t[k].choice = choice < 0 ? 0 : choice;
			t[k].staircase = b->adaptive ? 0 : -1;
			k++;
		}
	if (b->order == ORDER_RANDOM &&
	    shuffle_limited(t, n, b->longest_streak, p->nchoices ? p->nchoices : 1, rng)) {
		diag_add(d, DIAG_ERROR, p->path, b->line, "block '%s': no order of its %zu trials keeps "
			 "runs of one category to longest_streak = %d", b->name, n, b->longest_streak);
	}
append:;
	size_t first = pl->ntrials;
	pl->trials = xrealloc(pl->trials, (pl->ntrials + n) * sizeof *pl->trials);
	for (size_t i = 0; i < n; i++) {
		t[i].block_trial = (int)i;
		t[i].trial = (int)(first + i);
		t[i].block = (int)pl->nblocks;
		pl->trials[first + i] = t[i];
	}
	pl->ntrials += n;
	pl->blocks = xrealloc(pl->blocks, (pl->nblocks + 1) * sizeof *pl->blocks);
	pl->blocks[pl->nblocks].proto_block = bi;
	pl->blocks[pl->nblocks].first = first;
	pl->blocks[pl->nblocks].ntrials = n;
	pl->nblocks++;
	free(t);
}

static void timing(const struct protocol *p, const struct rig *r, struct plan *pl,
		   struct diag_list *d)
{
	for (int e = 0; e < EPOCH_COUNT; e++) {
		double ms = p->epoch_ms[e];
		pl->epoch_frames[e] = frames_from_ms(ms, r->refresh_hz, &pl->epoch_actual_ms[e]);
		if (ms > 0 && !frames_exact(ms, r->refresh_hz))
			diag_add(d, DIAG_WARNING, p->path, p->epoch_line[e],
				 "%s_ms = %g is %.2f frames at %g Hz; shown as %d frame%s = %.1f ms",
				 epoch_name((enum epoch)e), ms, ms * r->refresh_hz / 1000.0,
				 r->refresh_hz, pl->epoch_frames[e], pl->epoch_frames[e] == 1 ? "" : "s",
				 pl->epoch_actual_ms[e]);
	}
}

/* Each block's planned length (estimate.h) and the session's, their sum. */
static double estimate_seconds(const struct protocol *p, const struct rig *r, struct plan *pl)
{
	double total = 0;
	for (size_t b = 0; b < pl->nblocks; b++) {
		struct plan_block *blk = &pl->blocks[b];
		const struct protocol_block *pb = &p->blocks[blk->proto_block];
		blk->trial_seconds = estimate_trial_seconds(pl->epoch_actual_ms, pb->feedback);
		blk->est_seconds = estimate_block_seconds(blk->trial_seconds, blk->ntrials,
							  r->refresh_hz);
		total += blk->est_seconds;
	}
	return total;
}

static void hash_plan(const struct stimlist *l, struct plan *pl)
{
	size_t cap = 256 + pl->ntrials * 64, len = 0;
	char *buf = xmalloc(cap);
	for (size_t i = 0; i < pl->ntrials; i++) {
		const struct plan_trial *t = &pl->trials[i];
		const char *img = t->stim >= 0 ? l->items[t->stim].image : "";
		size_t need = strlen(img) + 64;
		if (len + need > cap) {
			cap = 2 * (len + need);
			buf = xrealloc(buf, cap);
		}
		len += (size_t)snprintf(buf + len, cap - len, "%d,%d,%d,%d,%d,%s\n", t->block,
					t->block_trial, t->stim, t->choice, t->staircase, img);
	}
	sha256_hex(buf, len, pl->hash);
	free(buf);
}

int plan_build(const struct protocol *p, const struct stimlist *l, const struct rig *r,
	       uint64_t seed, struct plan *out, struct diag_list *d)
{
	memset(out, 0, sizeof *out);
	out->seed = seed;
	size_t errors0 = diag_count(d, DIAG_ERROR);
	gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
	if (!rng) {
		diag_add(d, DIAG_ERROR, NULL, 0, "out of memory for the trial plan");
		return -1;
	}
	gsl_rng_set(rng, (unsigned long)((seed ^ (seed >> 32)) & 0xffffffffu));
	for (size_t b = 0; b < p->nblocks; b++)
		block_trials(p, &p->blocks[b], (int)b, l, rng, out, d);
	gsl_rng_free(rng);
	for (size_t i = 0; i < out->nblocks; i++)
		for (size_t k = 0; k < out->blocks[i].ntrials; k++)
			out->trials[out->blocks[i].first + k].block = (int)i;
	timing(p, r, out, d);
	out->stim_px = geom_deg_to_px(r, p->size_deg, &out->stim_deg_actual);
	if (out->stim_px < PLAN_MIN_STIM_PX)
		diag_add(d, DIAG_ERROR, p->path, p->size_line, "size_deg = %g is %d px on this rig; "
			 "a stimulus needs at least %d px a side", p->size_deg, out->stim_px,
			 PLAN_MIN_STIM_PX);
	out->est_seconds = estimate_seconds(p, r, out);
	hash_plan(l, out);
	if (diag_count(d, DIAG_ERROR) > errors0) {
		plan_clear(out);
		return -1;
	}
	return 0;
}

void plan_clear(struct plan *pl)
{
	if (!pl)
		return;
	free(pl->trials);
	free(pl->blocks);
	memset(pl, 0, sizeof *pl);
}
