/* adapt_history — staircase thresholds from stored trials (see adapt_history.h).
 *
 * One pass over the store's trial iterator (sessions by start time, trials in order). Trials of a
 * session are gathered per plan block while the iterator stays in that session; when it moves on
 * (or ends), the session's protocol text is parsed, each adaptive block's outcomes are replayed
 * and the rows appended. Only a block's first run counts: its planned trials are the block_trial
 * numbers below staircases × trials; later runs of the block and timing-fault repeats are left
 * out, as the staircases never saw them. */
#include "adapt_history.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "diag.h"
#include "protocol_file.h"
#include "store.h"

struct pending {
	int block;
	char *name;
	struct adapt_outcome *v;
	int *block_trial;          /* beside each outcome */
	size_t n, cap;
};

struct session_acc {
	struct store_session ss;   /* copy of the fields used: id, subject, protocol path/text */
	struct pending *blocks;
	size_t nblocks;
};

static void acc_clear(struct session_acc *a)
{
	for (size_t i = 0; i < a->nblocks; i++) {
		free(a->blocks[i].name);
		free(a->blocks[i].v);
		free(a->blocks[i].block_trial);
	}
	free(a->blocks);
	free(a->ss.subject);
	free(a->ss.protocol_path);
	free(a->ss.protocol_text);
	memset(a, 0, sizeof *a);
}

static void acc_start(struct session_acc *a, const struct store_session *ss)
{
	acc_clear(a);
	memcpy(a->ss.id, ss->id, sizeof a->ss.id);
	a->ss.subject = ss->subject ? xstrdup(ss->subject) : NULL;
	a->ss.protocol_path = xstrdup(ss->protocol_path ? ss->protocol_path : "protocol");
	a->ss.protocol_text = ss->protocol_text ? xstrdup(ss->protocol_text) : NULL;
}

static void acc_add(struct session_acc *a, const struct store_trial *t)
{
	struct pending *p = NULL;
	for (size_t i = 0; i < a->nblocks && !p; i++)
		if (a->blocks[i].block == t->block)
			p = &a->blocks[i];
	if (!p) {
		a->blocks = xrealloc(a->blocks, (a->nblocks + 1) * sizeof *a->blocks);
		p = &a->blocks[a->nblocks++];
		memset(p, 0, sizeof *p);
		p->block = t->block;
		p->name = xstrdup(t->block_name ? t->block_name : "");
	}
	if (p->n == p->cap) {
		p->cap = p->cap ? 2 * p->cap : 64;
		p->v = xrealloc(p->v, p->cap * sizeof *p->v);
		p->block_trial = xrealloc(p->block_trial, p->cap * sizeof *p->block_trial);
	}
	p->block_trial[p->n] = t->block_trial;
	p->v[p->n++] = (struct adapt_outcome){t->staircase, t->stim,
					      t->has_level ? t->level : NAN, t->correct};
}

static void flush(struct session_acc *a, struct adapt_history *h)
{
	if (!a->nblocks || !a->ss.protocol_text)
		return;
	struct protocol p;
	struct diag_list d;
	diag_init(&d);
	protocol_parse(a->ss.protocol_path, a->ss.protocol_text, &p, &d);
	diag_clear(&d);
	for (size_t i = 0; i < a->nblocks; i++) {
		struct pending *pb = &a->blocks[i];
		const struct protocol_block *blk = NULL;
		for (size_t k = 0; k < p.nblocks && !blk; k++)
			if (!strcmp(p.blocks[k].name, pb->name))
				blk = &p.blocks[k];
		const struct adapt_spec *as = blk && blk->adaptive
			? adapt_spec_find(p.adaptive, p.nadaptive, blk->adaptive) : NULL;
		if (!as)
			continue;
		size_t ns = adapt_spec_nstairs(as, p.nchoices);
		long planned = (long)ns * as->base.max_trials;
		size_t m = 0;
		for (size_t k = 0; k < pb->n; k++)
			if (pb->block_trial[k] >= 0 && pb->block_trial[k] < planned)
				pb->v[m++] = pb->v[k];
		struct adapt_estimate *est = xcalloc(ns ? ns : 1, sizeof *est);
		if (adapt_history_estimates(as, p.nchoices, pb->v, m, est, ns) == (int)ns) {
			for (size_t k = 0; k < ns; k++) {
				h->rows = xrealloc(h->rows, (h->n + 1) * sizeof *h->rows);
				struct adapt_history_row *r = &h->rows[h->n++];
				memset(r, 0, sizeof *r);
				memcpy(r->session, a->ss.id, sizeof r->session);
				r->subject = a->ss.subject ? xstrdup(a->ss.subject) : NULL;
				r->block = pb->block;
				r->block_name = xstrdup(pb->name);
				r->section = xstrdup(as->name);
				r->rule = as->base.rule;
				r->staircase = (int)k;
				if (as->per_category && k / as->nstarts < p.nchoices)
					r->category = xstrdup(p.choices[k / as->nstarts].category);
				r->start = as->starts[k % as->nstarts];
				r->est = est[k];
			}
		}
		free(est);
	}
	protocol_clear(&p);
}

int adapt_history_load(struct store *s, const char *session, const char *subject,
		       struct adapt_history *h, char **err)
{
	memset(h, 0, sizeof *h);
	struct store_iter *it;
	if (store_iter_open(s, session, subject, &it, err) < 0)
		return -1;
	struct session_acc acc;
	memset(&acc, 0, sizeof acc);
	const struct store_trial *t;
	const struct store_session *ss;
	int rc;
	while ((rc = store_iter_next(it, &t, &ss, err)) == 1) {
		if (!ss)
			continue;
		if (strcmp(acc.ss.id, ss->id)) {
			flush(&acc, h);
			acc_start(&acc, ss);
		}
		if (t->staircase >= 0 && t->repeat_of < 0)
			acc_add(&acc, t);
	}
	if (rc == 0)
		flush(&acc, h);
	acc_clear(&acc);
	store_iter_close(it);
	if (rc < 0) {
		adapt_history_clear(h);
		return -1;
	}
	return 0;
}

void adapt_history_clear(struct adapt_history *h)
{
	if (!h)
		return;
	for (size_t i = 0; i < h->n; i++) {
		free(h->rows[i].subject);
		free(h->rows[i].block_name);
		free(h->rows[i].section);
		free(h->rows[i].category);
	}
	free(h->rows);
	memset(h, 0, sizeof *h);
}
