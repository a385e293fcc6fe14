/* suggest — "did you mean": the nearest word from a list by edit distance, for messages about
 * misspelt keys, sections and categories. */
#ifndef TACHIST_SUGGEST_H
#define TACHIST_SUGGEST_H

#include <stddef.h>

/* Levenshtein distance (insert, delete, substitute; case-insensitive). */
size_t suggest_distance(const char *a, const char *b);
/* The candidate nearest to WORD when it is close enough to be a plausible misspelling (distance at
 * most max(2, strlen(WORD)/3), or WORD is a prefix of it), else NULL. Ties go to the first. */
const char *suggest_nearest(const char *word, const char *const *cands, size_t n);

#endif
