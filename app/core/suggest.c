/* suggest — nearest-word suggestions for diagnostics (see suggest.h). Two-row dynamic programming
 * over the bytes of both words; words here are short key names, so cost is no concern. */
#include "suggest.h"

#include <ctype.h>
#include <stdlib.h>
#include <string.h>

#include "diag.h"

size_t suggest_distance(const char *a, const char *b)
{
	size_t la = strlen(a), lb = strlen(b);
	size_t *prev = xmalloc((lb + 1) * sizeof *prev);
	size_t *cur = xmalloc((lb + 1) * sizeof *cur);
	for (size_t j = 0; j <= lb; j++)
		prev[j] = j;
	for (size_t i = 1; i <= la; i++) {
		cur[0] = i;
		for (size_t j = 1; j <= lb; j++) {
			size_t sub = prev[j - 1] + (tolower((unsigned char)a[i - 1]) !=
						    tolower((unsigned char)b[j - 1]));
			size_t del = prev[j] + 1, ins = cur[j - 1] + 1;
			size_t m = sub < del ? sub : del;
			cur[j] = m < ins ? m : ins;
		}
		size_t *t = prev; prev = cur; cur = t;
	}
	size_t d = prev[lb];
	free(prev);
	free(cur);
	return d;
}

const char *suggest_nearest(const char *word, const char *const *cands, size_t n)
{
	size_t len = strlen(word);
	size_t limit = len / 3 > 2 ? len / 3 : 2;
	const char *best = NULL;
	size_t bestd = (size_t)-1;
	for (size_t i = 0; i < n; i++) {
		size_t d = suggest_distance(word, cands[i]);
		if (d < bestd) {
			bestd = d;
			best = cands[i];
		}
	}
	if (best && bestd <= limit && bestd < strlen(best))
		return best;
	for (size_t i = 0; len >= 3 && i < n; i++)
		if (!strncmp(cands[i], word, len))
			return cands[i];
	return NULL;
}
