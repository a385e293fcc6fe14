/* counterbal — balanced block orders and rotated key mappings by subject position (counterbal.h).
 * Called by the loader (app/io/inputs.c) before the plan is built, and by `check --subjects`. */
#include "counterbal.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "diag.h"

size_t counterbal_rows(size_t n)
{
	if (n < 2)
		return 1;
	return n % 2 ? 2 * n : n;
}

void counterbal_williams(size_t n, size_t position, size_t *out)
{
	if (!n)
		return;
	size_t rows = counterbal_rows(n);
	size_t r = position >= 1 ? (position - 1) % rows : 0;
	bool mirror = r >= n;
	if (mirror)
		r -= n;
	/* First row 0, 1, n-1, 2, n-2, ...; row r adds r to every entry (mod n). */
	for (size_t k = 0, lo = 1, hi = n - 1; k < n; k++) {
		size_t first;
		if (k == 0)
			first = 0;
		else if (k % 2)
			first = lo++;
		else
			first = hi--;
		out[k] = (first + r) % n;
	}
	if (mirror)
		for (size_t k = 0; k < n / 2; k++) {
			size_t t = out[k];
			out[k] = out[n - 1 - k];
			out[n - 1 - k] = t;
		}
}

void counterbal_rotation(size_t n, size_t position, size_t *out)
{
	size_t r = position >= 1 ? (position - 1) % (n ? n : 1) : 0;
	for (size_t i = 0; i < n; i++)
		out[i] = (i + r) % n;
}

/* Appends "SEP TEXT" to the malloc'd string *S. */
static void append(char **s, const char *text)
{
	char *n = xasprintf("%s%s%s", *s ? *s : "", *s && **s ? "," : "", text);
	free(*s);
	*s = n;
}

void counterbal_apply(struct protocol *p, size_t position, char **order, char **mapping)
{
	if (p->counterbalance.block_order == COUNTERBALANCE_BALANCED) {
		size_t nmain = 0;
		size_t *slot = xmalloc((p->nblocks + 1) * sizeof *slot);
		for (size_t i = 0; i < p->nblocks; i++)
			if (!p->blocks[i].practice)
				slot[nmain++] = i;
		size_t *perm = xmalloc((nmain + 1) * sizeof *perm);
		counterbal_williams(nmain, position, perm);
		struct protocol_block *main = xmalloc((nmain + 1) * sizeof *main);
		for (size_t k = 0; k < nmain; k++)
			main[k] = p->blocks[slot[perm[k]]];
		/* Practice blocks first, in their order; then the main blocks in the design's. */
		struct protocol_block *all = xmalloc((p->nblocks + 1) * sizeof *all);
		size_t m = 0;
		for (size_t i = 0; i < p->nblocks; i++)
			if (p->blocks[i].practice)
				all[m++] = p->blocks[i];
		for (size_t k = 0; k < nmain; k++)
			all[m++] = main[k];
		memcpy(p->blocks, all, p->nblocks * sizeof *all);
		free(all);
		free(main);
		free(perm);
		free(slot);
	}
	if (p->counterbalance.key_mapping == COUNTERBALANCE_ROTATE && p->nchoices > 1) {
		size_t idx[PROTOCOL_MAX_CHOICES];
		char *keys[PROTOCOL_MAX_CHOICES];
		counterbal_rotation(p->nchoices, position, idx);
		for (size_t i = 0; i < p->nchoices; i++)
			keys[i] = p->choices[idx[i]].key;
		for (size_t i = 0; i < p->nchoices; i++)
			p->choices[i].key = keys[i];
	}
	if (order) {
		*order = NULL;
		for (size_t i = 0; i < p->nblocks; i++)
			append(order, p->blocks[i].name);
	}
	if (mapping) {
		*mapping = NULL;
		for (size_t i = 0; i < p->nchoices; i++) {
			char *kv = xasprintf("%s=%s", p->choices[i].category, p->choices[i].key);
			append(mapping, kv);
			free(kv);
		}
	}
}
