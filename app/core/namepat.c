/* namepat — file-name patterns with {level}, {source} and * (see namepat.h). Matching is a
 * backtracking walk over the segments; names are short, so its cost does not matter. */
#include "namepat.h"

#include <stdlib.h>
#include <string.h>

#include "diag.h"

void namepat_clear(struct namepat *p)
{
	for (size_t i = 0; i < p->n; i++)
		free(p->v[i].text);
	free(p->v);
	memset(p, 0, sizeof *p);
}

static void push(struct namepat *p, enum namepat_kind k, const char *text, size_t len)
{
	p->v = xrealloc(p->v, (p->n + 1) * sizeof *p->v);
	p->v[p->n].kind = k;
	p->v[p->n].text = NULL;
	if (text) {
		p->v[p->n].text = xmalloc(len + 1);
		memcpy(p->v[p->n].text, text, len);
		p->v[p->n].text[len] = '\0';
	}
	p->n++;
}

int namepat_parse(const char *s, struct namepat *p, const char **why)
{
	memset(p, 0, sizeof *p);
	int nlevel = 0, nsource = 0;
	while (*s) {
		if (*s == '{') {
			const char *e = strchr(s, '}');
			if (!e) {
				*why = "a '{' without its '}'";
				goto fail;
			}
			size_t len = (size_t)(e - s - 1);
			if (len == 5 && !strncmp(s + 1, "level", 5)) {
				push(p, NAMEPAT_LEVEL, NULL, 0);
				nlevel++;
			} else if (len == 6 && !strncmp(s + 1, "source", 6)) {
				push(p, NAMEPAT_SOURCE, NULL, 0);
				nsource++;
			} else {
				*why = "unknown placeholder (use {level}, {source} or *)";
				goto fail;
			}
			s = e + 1;
		} else if (*s == '*') {
			push(p, NAMEPAT_ANY, NULL, 0);
			s++;
		} else {
			size_t len = strcspn(s, "{*");
			if (memchr(s, '}', len) || memchr(s, '/', len)) {
				*why = "a '}' without its '{', or a '/' (the pattern matches file names only)";
				goto fail;
			}
			push(p, NAMEPAT_TEXT, s, len);
			s += len;
		}
	}
	if (nlevel != 1) {
		*why = "the pattern needs exactly one {level}";
		goto fail;
	}
	if (nsource > 1) {
		*why = "{source} may appear once";
		goto fail;
	}
	return 0;
fail:
	namepat_clear(p);
	return -1;
}

/* True when S[0..len) is a level: [-]digits[(.|p)digits]; its value goes to *V. */
static int level_text(const char *s, size_t len, double *v)
{
	char buf[64];
	if (len == 0 || len >= sizeof buf)
		return 0;
	size_t i = 0;
	if (s[i] == '-')
		i++;
	size_t d0 = i;
	while (i < len && s[i] >= '0' && s[i] <= '9')
		i++;
	if (i == d0)
		return 0;
	if (i < len) {
		if (s[i] != '.' && s[i] != 'p')
			return 0;
		size_t f0 = ++i;
		while (i < len && s[i] >= '0' && s[i] <= '9')
			i++;
		if (i == f0 || i != len)
			return 0;
	}
	memcpy(buf, s, len);
	buf[len] = '\0';
	char *p = strchr(buf, 'p');
	if (p)
		*p = '.';
	*v = strtod(buf, NULL);
	return 1;
}

static int match_at(const struct namepat *p, size_t k, const char *s, size_t pos, size_t len,
		    struct namepat_match *m)
{
	if (k == p->n)
		return pos == len;
	const struct namepat_seg *g = &p->v[k];
	switch (g->kind) {
	case NAMEPAT_TEXT: {
		size_t tl = strlen(g->text);
		return tl <= len - pos && !memcmp(s + pos, g->text, tl) &&
		       match_at(p, k + 1, s, pos + tl, len, m);
	}
	case NAMEPAT_LEVEL:
		for (size_t e = len; e > pos; e--) {   /* longest number first */
			double v;
			if (level_text(s + pos, e - pos, &v) && match_at(p, k + 1, s, e, len, m)) {
				m->level = v;
				return 1;
			}
		}
		return 0;
	case NAMEPAT_SOURCE:
	case NAMEPAT_ANY:
		for (size_t e = pos + (g->kind == NAMEPAT_SOURCE); e <= len; e++) {   /* shortest first */
			if (match_at(p, k + 1, s, e, len, m)) {
				if (g->kind == NAMEPAT_SOURCE) {
					m->source = s + pos;
					m->source_len = e - pos;
				}
				return 1;
			}
		}
		return 0;
	}
	return 0;
}

int namepat_match(const struct namepat *p, const char *name, struct namepat_match *m)
{
	memset(m, 0, sizeof *m);
	return match_at(p, 0, name, 0, strlen(name), m);
}
