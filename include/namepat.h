/* namepat — file-name patterns that read a level and a clean source's name out of a stimulus file
 * name: literal text, `{level}` (a number: `-`, digits, and a fraction whose point may be `.` or
 * `p`), `{source}` (any non-empty text) and `*` (any text).
 *
 * A parsed pattern is an array of segments it owns. Matching tries the longest number for
 * `{level}` and the shortest text for `{source}` and `*` first. Pure: used by io/stimimport.c. */
#ifndef TACHIST_NAMEPAT_H
#define TACHIST_NAMEPAT_H

#include <stddef.h>

enum namepat_kind { NAMEPAT_TEXT, NAMEPAT_LEVEL, NAMEPAT_SOURCE, NAMEPAT_ANY };

struct namepat_seg {
	enum namepat_kind kind;
	char *text;              /* NAMEPAT_TEXT only */
};

struct namepat {
	struct namepat_seg *v;
	size_t n;
};

struct namepat_match {
	double level;
	const char *source;      /* inside the matched name; NULL when the pattern has no {source} */
	size_t source_len;
};

/* Parses TEXT into P: it must hold exactly one {level} and at most one {source}, and no '/'.
 * Returns 0, or -1 with *WHY set to a static sentence (P is then empty). */
int namepat_parse(const char *text, struct namepat *p, const char **why);
/* 1 when NAME (a file name without extension) matches P, filling M; else 0. */
int namepat_match(const struct namepat *p, const char *name, struct namepat_match *m);
void namepat_clear(struct namepat *p);

#endif
