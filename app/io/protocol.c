/* protocol — the protocol file: INI text (inih through inifile.c) to a validated struct protocol.
 *
 * The parser is a table of section kinds (`sections[]` below): each kind lists its valid keys with
 * their type, range and the place in the struct where the value goes, so most keys need no code of
 * their own. A pass over the file calls open/key/close per section instance, then each kind's
 * finish() checks what spans sections (required sections, block references). Every problem is added
 * to the diagnostics with the protocol's FILE:LINE and parsing goes on, so one `check` shows all of
 * them. Key names and ranges are documented in docs/files.md ("Protocol file"); keep both in step.
 *
 * Adding a section kind: write a `const struct protocol_section` in its own file (using the
 * protocol_ctx_* and protocol_value_* helpers), declare it in its header, and add one row to
 * `sections[]`. A block's `adaptive = NAME` is resolved through the kinds' defines() hooks. */
#include "protocol_file.h"

#include <ctype.h>
#include <errno.h>
#include <math.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdlib.h>
#include <string.h>

#include "decimal.h"
#include "inifile.h"
#include "protocol_adaptive.h"
#include "protocol_screens.h"
#include "protocol_triggers.h"
#include "suggest.h"

struct protocol_ctx {
	struct protocol *p;
	const char *file;
	struct diag_list *d;
	const struct protocol_section *cur;   /* section being read; NULL outside or when skipped */
	int skipping;                         /* keys of a rejected section are ignored */
	int cur_line;                         /* header line of the current instance */
	int seen[32];                         /* line of each key in the current instance */
	int plain_line[16];                   /* header line of each plain kind, 0 = absent */
};

/* --- helpers for section kinds ------------------------------------------------------------ */

struct protocol *protocol_ctx_protocol(struct protocol_ctx *c)
{
	return c->p;
}

static void vadd(struct protocol_ctx *c, enum diag_level lv, int line, const char *fmt,
		 va_list ap)
{
	char buf[1024];
	vsnprintf(buf, sizeof buf, fmt, ap);
	diag_add(c->d, lv, c->file, line, "%s", buf);
}

void protocol_ctx_error(struct protocol_ctx *c, int line, const char *fmt, ...)
{
	va_list ap;
	va_start(ap, fmt);
	vadd(c, DIAG_ERROR, line, fmt, ap);
	va_end(ap);
}

void protocol_ctx_warning(struct protocol_ctx *c, int line, const char *fmt, ...)
{
	va_list ap;
	va_start(ap, fmt);
	vadd(c, DIAG_WARNING, line, fmt, ap);
	va_end(ap);
}

int protocol_ctx_key_line(struct protocol_ctx *c, int key_index)
{
	if (key_index < 0 || key_index >= (int)(sizeof c->seen / sizeof c->seen[0]))
		return 0;
	return c->seen[key_index];
}

static const char *unit_sp(const struct protocol_key *k)
{
	return k->unit ? " " : "";
}

static const char *unit_of(const struct protocol_key *k)
{
	return k->unit ? k->unit : "";
}

static void range_error(struct protocol_ctx *c, const struct protocol_key *k, const char *value,
			int line)
{
	if (k->min_open)
		protocol_ctx_error(c, line, "%s = %s is out of range (above %g, up to %g%s%s)",
				   k->name, value, k->min, k->max, unit_sp(k), unit_of(k));
	else
		protocol_ctx_error(c, line, "%s = %s is out of range (%g to %g%s%s)", k->name, value,
				   k->min, k->max, unit_sp(k), unit_of(k));
}

int protocol_value_number(struct protocol_ctx *c, const struct protocol_key *k, const char *value,
			  int line, double *out)
{
	char *end;
	errno = 0;
	double v = strtod(value, &end);
	if (!decimal_ok(value) || *end || errno == ERANGE || !isfinite(v)) {
		protocol_ctx_error(c, line, "%s = %s is not a number%s%s", k->name, value,
				   k->unit ? " of " : "", unit_of(k));
		return -1;
	}
	if (v < k->min || v > k->max || (k->min_open && v == k->min)) {
		range_error(c, k, value, line);
		return -1;
	}
	*out = v;
	return 0;
}

int protocol_value_int(struct protocol_ctx *c, const struct protocol_key *k, const char *value,
		       int line, int *out)
{
	char *end;
	errno = 0;
	long v = strtol(value, &end, 10);
	if (!*value || *end || errno == ERANGE) {
		protocol_ctx_error(c, line, "%s = %s is not a whole number", k->name, value);
		return -1;
	}
	if ((double)v < k->min || (double)v > k->max || (k->min_open && (double)v == k->min)) {
		range_error(c, k, value, line);
		return -1;
	}
	*out = (int)v;
	return 0;
}

int protocol_value_bool(struct protocol_ctx *c, const struct protocol_key *k, const char *value,
			int line, bool *out)
{
	static const char *const yes[] = {"yes", "true", "on", "1"};
	static const char *const no[] = {"no", "false", "off", "0"};
	for (size_t i = 0; i < 4; i++) {
		if (!strcasecmp(value, yes[i])) { *out = true; return 0; }
		if (!strcasecmp(value, no[i])) { *out = false; return 0; }
	}
	protocol_ctx_error(c, line, "%s = %s is not yes or no", k->name, value);
	return -1;
}

int protocol_value_word(struct protocol_ctx *c, const struct protocol_key *k, const char *value,
			int line, int *out)
{
	size_t n = 0;
	char list[256] = "";
	for (; k->words[n]; n++) {
		if (!strcmp(value, k->words[n])) {
			*out = (int)n;
			return 0;
		}
		size_t len = strlen(list);
		snprintf(list + len, sizeof list - len, "%s%s", n ? ", " : "", k->words[n]);
	}
	const char *near = suggest_nearest(value, k->words, n);
	if (near)
		protocol_ctx_error(c, line, "%s = %s is not one of %s; did you mean '%s'?", k->name,
				   value, list, near);
	else
		protocol_ctx_error(c, line, "%s = %s is not one of %s", k->name, value, list);
	return -1;
}

char *protocol_resolve_path(const struct protocol *p, const char *value)
{
	if (value[0] == '/' || !p->dir || !strcmp(p->dir, "."))
		return xstrdup(value);
	return xasprintf("%s/%s", p->dir, value);
}

/* --- [experiment] ------------------------------------------------------------------------- */

static const struct protocol_key experiment_keys[] = {
	{"name", PTYPE_TEXT, offsetof(struct protocol, name), 0, 0, 0, NULL, 0, NULL,
	 offsetof(struct protocol, name_line)},
	{"list", PTYPE_PATH, offsetof(struct protocol, stimuli), 0, 0, 0, NULL, 1, NULL,
	 offsetof(struct protocol, stimuli_line)},
	{"break_every", PTYPE_INT, offsetof(struct protocol, break_every), 0, 100000, 0, NULL, 0,
	 "trials", offsetof(struct protocol, break_line)},
};

static void *protocol_base(struct protocol_ctx *c)
{
	return c->p;
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

static void experiment_close(struct protocol_ctx *c, int line)
{
	(void)line;
	struct protocol *p = c->p;
	if (p->name && !name_ok(p->name)) {
		protocol_ctx_error(c, p->name_line, "name = %s: use 1 to 64 letters, digits, '_' or '-'",
				   p->name);
	}
}

static const struct protocol_section experiment_section = {
	"experiment", 0, experiment_keys, sizeof experiment_keys / sizeof experiment_keys[0],
	NULL, protocol_base, NULL, experiment_close, NULL, NULL, NULL,
};

/* --- [categories]: CATEGORY = KEY --------------------------------------------------------- */

/* Key names as SDL spells them, lower case, besides single letters, digits and punctuation. */
static const char *const named_keys[] = {
	"space", "return", "tab", "backspace", "left", "right", "up", "down",
	"keypad 0", "keypad 1", "keypad 2", "keypad 3", "keypad 4", "keypad 5", "keypad 6",
	"keypad 7", "keypad 8", "keypad 9", "f1", "f2", "f3", "f4", "f5", "f6", "f7", "f8", "f9",
	"f10", "f11", "f12",
};

static int key_name_ok(const char *k)
{
	if (strlen(k) == 1)
		return isalnum((unsigned char)k[0]) || strchr(",./'[]-=`\\", k[0]) != NULL;
	for (size_t i = 0; i < sizeof named_keys / sizeof named_keys[0]; i++)
		if (!strcmp(k, named_keys[i]))
			return 1;
	return 0;
}

static void categories_entry(struct protocol_ctx *c, int key_index, const char *category,
			  const char *value, int line)
{
	(void)key_index;
	struct protocol *p = c->p;
	for (size_t i = 0; i < p->nchoices; i++)
		if (!strcmp(p->choices[i].category, category)) {
			protocol_ctx_error(c, line, "duplicate key '%s' (first set on line %d)", category,
					   p->choices[i].line);
			return;
		}
	if (strpbrk(category, ",&")) {
		protocol_ctx_error(c, line, "category '%s': names may not contain ',' or '&'",
				   category);
		return;
	}
	if (!*value) {
		protocol_ctx_error(c, line, "category '%s' has no key", category);
		return;
	}
	char key[32];
	size_t n = strlen(value);
	if (n >= sizeof key)
		n = sizeof key - 1;
	for (size_t i = 0; i < n; i++)
		key[i] = (char)tolower((unsigned char)value[i]);
	key[n] = '\0';
	if (!strcmp(key, "escape")) {
		protocol_ctx_error(c, line, "category '%s': escape is reserved for pausing", category);
		return;
	}
	if (!key_name_ok(key) || strlen(value) >= sizeof key) {
		protocol_ctx_error(c, line, "category '%s': '%s' is not a key name (a letter, digit, "
				   "punctuation mark, space, return, tab, an arrow, keypad 0-9 or f1-f12)",
				   category, value);
		return;
	}
	for (size_t i = 0; i < p->nchoices; i++)
		if (!strcmp(p->choices[i].key, key)) {
			protocol_ctx_error(c, line, "categories '%s' and '%s' share the key '%s' (line %d)",
					   p->choices[i].category, category, key, p->choices[i].line);
			return;
		}
	if (p->nchoices == PROTOCOL_MAX_CHOICES) {
		protocol_ctx_error(c, line, "more than %d categories", PROTOCOL_MAX_CHOICES);
		return;
	}
	struct protocol_choice *ch = &p->choices[p->nchoices++];
	ch->category = xstrdup(category);
	ch->key = xstrdup(key);
	ch->line = line;
}

static void categories_close(struct protocol_ctx *c, int line)
{
	if (c->p->nchoices < 2)
		protocol_ctx_error(c, line, "[categories] names %zu categor%s; a forced choice needs at "
				   "least 2", c->p->nchoices, c->p->nchoices == 1 ? "y" : "ies");
}

static const struct protocol_section categories_section = {
	"categories", 0, NULL, 0, NULL, protocol_base, categories_entry, categories_close, NULL,
	NULL, NULL,
};

/* --- [timing]: epoch durations in ms ------------------------------------------------------ */

#define EPOCH_KEY(word, e, lo, open, req) \
	{word, PTYPE_NUMBER, offsetof(struct protocol, epoch_ms) + (e) * sizeof(double), lo, \
	 60000, open, NULL, req, "ms", offsetof(struct protocol, epoch_line) + (e) * sizeof(int)}

static const struct protocol_key timing_keys[] = {
	EPOCH_KEY("fixation_ms", EPOCH_FIXATION, 0, 0, 0),
	EPOCH_KEY("blank_ms", EPOCH_BLANK, 0, 0, 0),
	EPOCH_KEY("stimulus_ms", EPOCH_STIMULUS, 0, 1, 1),
	EPOCH_KEY("mask_ms", EPOCH_MASK, 0, 0, 0),
	EPOCH_KEY("response_ms", EPOCH_RESPONSE, 0, 0, 0),
	EPOCH_KEY("feedback_ms", EPOCH_FEEDBACK, 0, 0, 0),
	EPOCH_KEY("iti_ms", EPOCH_ITI, 0, 0, 0),
};

static const struct protocol_section timing_section = {
	"timing", 0, timing_keys, sizeof timing_keys / sizeof timing_keys[0], NULL, protocol_base,
	NULL, NULL, NULL, NULL, NULL,
};

/* --- [display] ---------------------------------------------------------------------------- */

static const char *const mask_words[] = {"none", "noise", "image", NULL};
static const char *const feedback_words[] = {"none", "mark", NULL};
static const char *const scaling_words[] = {"linear", "nearest", NULL};

static const struct protocol_key display_keys[] = {
	{"size_deg", PTYPE_NUMBER, offsetof(struct protocol, size_deg), 0, 90, 1, NULL, 1, "deg",
	 offsetof(struct protocol, size_line)},
	{"background", PTYPE_INT, offsetof(struct protocol, background), 0, 255, 0, NULL, 0, NULL,
	 offsetof(struct protocol, background_line)},
	{"background_cd", PTYPE_NUMBER, offsetof(struct protocol, background_cd), 0, 10000, 0, NULL,
	 0, "cd/m2", offsetof(struct protocol, background_cd_line)},
	{"linearize", PTYPE_BOOL, offsetof(struct protocol, linearize), 0, 0, 0, NULL, 0, NULL,
	 offsetof(struct protocol, linearize_line)},
	{"fixation_deg", PTYPE_NUMBER, offsetof(struct protocol, fixation_deg), 0, 10, 0, NULL, 0,
	 "deg", 0},
	{"mask", PTYPE_WORD, offsetof(struct protocol, mask), 0, 0, 0, mask_words, 0, NULL, 0},
	{"mask_image", PTYPE_PATH, offsetof(struct protocol, mask_image), 0, 0, 0, NULL, 0, NULL,
	 offsetof(struct protocol, mask_image_line)},
	{"feedback", PTYPE_WORD, offsetof(struct protocol, feedback), 0, 0, 0, feedback_words, 0,
	 NULL, 0},
	{"scaling", PTYPE_WORD, offsetof(struct protocol, scaling), 0, 0, 0, scaling_words, 0, NULL,
	 0},
};

static void display_close(struct protocol_ctx *c, int line)
{
	struct protocol *p = c->p;
	if (p->mask == MASK_IMAGE && !p->mask_image)
		protocol_ctx_error(c, line, "mask = image needs mask_image = PATH");
	if (p->mask != MASK_IMAGE && p->mask_image)
		protocol_ctx_warning(c, p->mask_image_line, "mask_image is ignored unless mask = image");
	if (p->background_line && p->background_cd_line)
		protocol_ctx_error(c, p->background_cd_line, "give the background as a code "
				   "(background, line %d) or in cd/m2 (background_cd), not both",
				   p->background_line);
}

static const struct protocol_section display_section = {
	"display", 0, display_keys, sizeof display_keys / sizeof display_keys[0], NULL,
	protocol_base, NULL, display_close, NULL, NULL, NULL,
};

/* --- [block NAME] ------------------------------------------------------------------------- */

static const char *const order_words[] = {"random", "fixed", NULL};

enum { BK_SELECT, BK_REPEATS, BK_ORDER, BK_LONGEST_STREAK, BK_PRACTICE, BK_FEEDBACK,
       BK_REPEAT_FAULTS, BK_ADAPTIVE, BK_INSTRUCTIONS };

static const struct protocol_key block_keys[] = {
	[BK_SELECT] = {"select", PTYPE_CUSTOM, 0, 0, 0, 0, NULL, 0, NULL,
		       offsetof(struct protocol_block, select_line)},
	[BK_REPEATS] = {"repeats", PTYPE_INT, offsetof(struct protocol_block, repeats), 1, 1000, 0,
			NULL, 0, NULL, 0},
	[BK_ORDER] = {"order", PTYPE_WORD, offsetof(struct protocol_block, order), 0, 0, 0,
		      order_words, 0, NULL, 0},
	[BK_LONGEST_STREAK] = {"longest_streak", PTYPE_INT,
			       offsetof(struct protocol_block, longest_streak), 0, 1000, 0, NULL, 0,
			       "trials", 0},
	[BK_PRACTICE] = {"practice", PTYPE_BOOL, offsetof(struct protocol_block, practice), 0, 0, 0,
			 NULL, 0, NULL, 0},
	[BK_FEEDBACK] = {"feedback", PTYPE_BOOL, offsetof(struct protocol_block, feedback), 0, 0, 0,
			 NULL, 0, NULL, 0},
	[BK_REPEAT_FAULTS] = {"repeat_faults", PTYPE_BOOL,
			      offsetof(struct protocol_block, repeat_faults), 0, 0, 0, NULL, 0, NULL,
			      0},
	[BK_ADAPTIVE] = {"adaptive", PTYPE_TEXT, offsetof(struct protocol_block, adaptive), 0, 0, 0,
			 NULL, 0, NULL, offsetof(struct protocol_block, adaptive_line)},
	[BK_INSTRUCTIONS] = {"instructions", PTYPE_PATH, offsetof(struct protocol_block, instructions),
			     0, 0, 0, NULL, 0, NULL, offsetof(struct protocol_block, instructions_line)},
};

static int block_open(struct protocol_ctx *c, const char *name, int line)
{
	struct protocol *p = c->p;
	if (!name_ok(name)) {
		protocol_ctx_error(c, line, "block name '%s': use 1 to 64 letters, digits, '_' or '-'",
				   name);
		return -1;
	}
	for (size_t i = 0; i < p->nblocks; i++)
		if (!strcmp(p->blocks[i].name, name)) {
			protocol_ctx_error(c, line, "block '%s' is defined twice (first on line %d)", name,
					   p->blocks[i].line);
			return -1;
		}
	p->blocks = xrealloc(p->blocks, (p->nblocks + 1) * sizeof *p->blocks);
	struct protocol_block *b = &p->blocks[p->nblocks++];
	memset(b, 0, sizeof *b);
	b->name = xstrdup(name);
	b->line = line;
	b->repeats = 1;
	b->order = ORDER_RANDOM;
	return 0;
}

static void *block_base(struct protocol_ctx *c)
{
	return &c->p->blocks[c->p->nblocks - 1];
}

static char *trim(char *s)
{
	while (isspace((unsigned char)*s))
		s++;
	char *e = s + strlen(s);
	while (e > s && isspace((unsigned char)e[-1]))
		*--e = '\0';
	return s;
}

static void filters_free(struct protocol_filter *f, size_t n)
{
	for (size_t i = 0; i < n; i++) {
		free(f[i].column);
		for (size_t j = 0; j < f[i].nvalues; j++)
			free(f[i].values[j]);
		free(f[i].values);
	}
	free(f);
}

/* select = COLUMN=VALUE[,VALUE...] [& COLUMN=VALUE...]: a row is taken when, for every clause,
 * its COLUMN equals one of the VALUES (numerically for `level`). */
static void block_select(struct protocol_ctx *c, const char *value, int line)
{
	struct protocol_block *b = block_base(c);
	char *copy = xstrdup(value);
	struct protocol_filter *f = NULL;
	size_t nf = 0;
	int bad = 0;
	char *save = NULL;
	if (!*trim(copy)) {
		protocol_ctx_error(c, line, "select has no value (leave the key out to take every row)");
		free(copy);
		return;
	}
	/* strtok_r skips empty clauses: "&&&" would select every row, so look for them first. */
	for (const char *a = value;; ) {
		const char *amp = strchr(a, '&');
		size_t n = amp ? (size_t)(amp - a) : strlen(a);
		size_t k = 0;
		while (k < n && isspace((unsigned char)a[k]))
			k++;
		if (k == n) {
			protocol_ctx_error(c, line, "select: an empty clause (around '&'); write "
					   "COLUMN=VALUE[,VALUE...] on each side of '&'");
			free(copy);
			return;
		}
		if (!amp)
			break;
		a = amp + 1;
	}
	for (char *cl = strtok_r(copy, "&", &save); cl; cl = strtok_r(NULL, "&", &save)) {
		cl = trim(cl);
		char *eq = strchr(cl, '=');
		if (!eq || eq == cl) {
			protocol_ctx_error(c, line, "select: '%s' is not COLUMN=VALUE[,VALUE...]", cl);
			bad = 1;
			continue;
		}
		*eq = '\0';
		char *col = trim(cl);
		char *vals = trim(eq + 1);
		for (size_t i = 0; i < nf; i++)
			if (!strcmp(f[i].column, col)) {
				protocol_ctx_error(c, line, "select: column '%s' appears twice", col);
				bad = 1;
			}
		f = xrealloc(f, (nf + 1) * sizeof *f);
		struct protocol_filter *cur = &f[nf++];
		cur->column = xstrdup(col);
		cur->values = NULL;
		cur->nvalues = 0;
		char *s2 = NULL;
		for (char *v = strtok_r(vals, ",", &s2); v; v = strtok_r(NULL, ",", &s2)) {
			v = trim(v);
			if (!*v)
				continue;
			if (!strcmp(col, "level")) {
				char *end;
				errno = 0;
				double x = strtod(v, &end);
				if (!decimal_ok(v) || *end || errno == ERANGE || !isfinite(x)) {
					protocol_ctx_error(c, line, "select: level value '%s' is not a number",
							   v);
					bad = 1;
				}
			}
			cur->values = xrealloc(cur->values, (cur->nvalues + 1) * sizeof *cur->values);
			cur->values[cur->nvalues++] = xstrdup(v);
		}
		if (!cur->nvalues) {
			protocol_ctx_error(c, line, "select: column '%s' has no values", col);
			bad = 1;
		}
	}
	free(copy);
	if (bad) {
		filters_free(f, nf);
		return;
	}
	b->filters = f;
	b->nfilters = nf;
}

static void block_custom(struct protocol_ctx *c, int key_index, const char *key,
			 const char *value, int line)
{
	(void)key;
	if (key_index == BK_SELECT)
		block_select(c, value, line);
}

static void block_close(struct protocol_ctx *c, int line)
{
	(void)line;
	struct protocol_block *b = block_base(c);
	if (!protocol_ctx_key_line(c, BK_FEEDBACK))
		b->feedback = b->practice;
}

static void block_finish(struct protocol_ctx *c);

static const struct protocol_section block_section = {
	"block", 1, block_keys, sizeof block_keys / sizeof block_keys[0], block_open, block_base,
	block_custom, block_close, block_finish, NULL, NULL,
};

/* --- the table of section kinds ----------------------------------------------------------- */

static const struct protocol_section *const sections[] = {
	&experiment_section,
	&categories_section,
	&timing_section,
	&display_section,
	&block_section,
	&protocol_adaptive_section,   /* "[adaptive NAME]", app/io/protocol_adaptive.c */
	&protocol_screens_section,    /* "[screens]", app/io/protocol_screens.c */
	&protocol_counterbalance_section,   /* "[counterbalance]", app/io/protocol_screens.c */
	&protocol_triggers_section,   /* "[triggers]", app/io/protocol_triggers.c */
};
#define NSECTIONS (sizeof sections / sizeof sections[0])

static void block_finish(struct protocol_ctx *c)
{
	struct protocol *p = c->p;
	if (!p->nblocks)
		protocol_ctx_error(c, 0, "no [block NAME] section: a protocol needs at least one block");
	for (size_t i = 0; i < p->nblocks; i++) {
		struct protocol_block *b = &p->blocks[i];
		if (b->feedback && p->feedback == FEEDBACK_NONE)
			protocol_ctx_warning(c, b->line, "block '%s' asks for feedback but [display] "
					     "feedback = none", b->name);
		if (!b->adaptive)
			continue;
		int found = 0;
		for (size_t k = 0; k < NSECTIONS && !found; k++)
			found = sections[k]->defines && sections[k]->defines(p, b->adaptive);
		if (!found)
			protocol_ctx_error(c, b->adaptive_line, "block '%s': adaptive = %s names no "
					   "[adaptive %s] section", b->name, b->adaptive, b->adaptive);
	}
}

/* [experiment], [categories], [timing] and [display]: the first rows of sections[]. */
#define NREQUIRED_PLAIN 4

/* Words earlier versions of the protocol used, each an error naming the word that replaced it.
 * KIND is the section the key belonged to; a NULL KIND marks a section name. */
static const struct {
	const char *kind, *old, *now;
} retired[] = {
	{NULL, "choices", "categories"},
	{"block", "max_run", "longest_streak"},
	{"adaptive", "grain", "grid_step"},
	{"adaptive", "place", "test_at"},
	{"adaptive", "quantile", "percentile"},
};

/* The replacement of OLD (a key of section KIND, or a section name when KIND is NULL), or NULL. */
static const char *retired_word(const char *kind, const char *old)
{
	for (size_t i = 0; i < sizeof retired / sizeof retired[0]; i++)
		if (!strcmp(retired[i].old, old) &&
		    (kind ? retired[i].kind && !strcmp(retired[i].kind, kind) : !retired[i].kind))
			return retired[i].now;
	return NULL;
}

static void close_instance(struct protocol_ctx *c)
{
	const struct protocol_section *s = c->cur;
	if (!s)
		return;
	for (size_t i = 0; i < s->nkeys; i++)
		if (s->keys[i].required && !c->seen[i])
			protocol_ctx_error(c, c->cur_line, "missing required key '%s' in [%s]",
					   s->keys[i].name, s->kind);
	if (s->close)
		s->close(c, c->cur_line);
	c->cur = NULL;
}

static void open_section(struct protocol_ctx *c, const char *header, int line)
{
	close_instance(c);
	c->skipping = 1;
	char *copy = xstrdup(header);
	char *kind = copy, *name = copy;
	while (*name && !isspace((unsigned char)*name))
		name++;
	if (*name)
		*name++ = '\0';
	name = trim(name);
	size_t k = 0;
	for (; k < NSECTIONS; k++)
		if (!strcmp(sections[k]->kind, kind))
			break;
	/* An old section name is an error, but its lines are still read under the new name so the
	 * file gets one message, not a second one for the section missing. */
	const char *now = k == NSECTIONS ? retired_word(NULL, kind) : NULL;
	if (now) {
		protocol_ctx_error(c, line, "[%s] is now called [%s]: rename the section", kind, now);
		for (k = 0; k < NSECTIONS && strcmp(sections[k]->kind, now); k++)
			;
	}
	if (k == NSECTIONS) {
		const char *kinds[NSECTIONS];
		for (size_t i = 0; i < NSECTIONS; i++)
			kinds[i] = sections[i]->kind;
		const char *near = suggest_nearest(kind, kinds, NSECTIONS);
		size_t at = 0;
		while (near && kinds[at] != near)
			at++;
		if (near)
			protocol_ctx_error(c, line, "unknown section [%s]; did you mean [%s%s]?", header,
					   near, sections[at]->named ? " NAME" : "");
		else
			protocol_ctx_error(c, line, "unknown section [%s]", header);
		goto done;
	}
	const struct protocol_section *s = sections[k];
	if (s->named && !*name) {
		protocol_ctx_error(c, line, "[%s] needs a name: [%s NAME]", kind, kind);
		goto done;
	}
	if (!s->named && *name) {
		protocol_ctx_error(c, line, "[%s] takes no name (found '%s')", kind, name);
		goto done;
	}
	if (!s->named) {
		if (k < sizeof c->plain_line / sizeof c->plain_line[0]) {
			if (c->plain_line[k]) {
				protocol_ctx_error(c, line, "section [%s] appears twice (first on line %d)",
						   kind, c->plain_line[k]);
				goto done;
			}
			c->plain_line[k] = line;
		}
	}
	if (s->open && s->open(c, s->named ? name : NULL, line))
		goto done;
	c->cur = s;
	c->cur_line = line;
	c->skipping = 0;
	memset(c->seen, 0, sizeof c->seen);
done:
	free(copy);
}

static void set_key(struct protocol_ctx *c, const char *key, const char *value, int line)
{
	const struct protocol_section *s = c->cur;
	if (!s->keys) {
		s->custom(c, -1, key, value, line);
		return;
	}
	size_t i = 0;
	for (; i < s->nkeys; i++)
		if (!strcmp(s->keys[i].name, key))
			break;
	const char *now = i == s->nkeys ? retired_word(s->kind, key) : NULL;
	if (now) {
		protocol_ctx_error(c, line, "'%s' is now called '%s': rename the key", key, now);
		return;
	}
	if (i == s->nkeys) {
		const char *names[32];
		size_t n = s->nkeys < 32 ? s->nkeys : 32;
		for (size_t j = 0; j < n; j++)
			names[j] = s->keys[j].name;
		const char *near = suggest_nearest(key, names, n);
		if (near)
			protocol_ctx_error(c, line, "unknown key '%s' in [%s]; did you mean '%s'?", key,
					   s->kind, near);
		else
			protocol_ctx_error(c, line, "unknown key '%s' in [%s]", key, s->kind);
		return;
	}
	const struct protocol_key *k = &s->keys[i];
	if (i < sizeof c->seen / sizeof c->seen[0]) {
		if (c->seen[i]) {
			protocol_ctx_error(c, line, "duplicate key '%s' (first set on line %d)", key,
					   c->seen[i]);
			return;
		}
		c->seen[i] = line;
	}
	char *base = s->base ? s->base(c) : NULL;
	if (base && k->line_offset)
		*(int *)(base + k->line_offset) = line;
	if (!*value && k->type != PTYPE_CUSTOM) {
		protocol_ctx_error(c, line, "%s has no value", key);
		return;
	}
	switch (k->type) {
	case PTYPE_NUMBER: {
		double v;
		if (!protocol_value_number(c, k, value, line, &v))
			*(double *)(base + k->offset) = v;
		break;
	}
	case PTYPE_INT: {
		int v;
		if (!protocol_value_int(c, k, value, line, &v))
			*(int *)(base + k->offset) = v;
		break;
	}
	case PTYPE_BOOL: {
		bool v;
		if (!protocol_value_bool(c, k, value, line, &v))
			*(bool *)(base + k->offset) = v;
		break;
	}
	case PTYPE_WORD: {
		int v;
		if (!protocol_value_word(c, k, value, line, &v))
			*(int *)(base + k->offset) = v;
		break;
	}
	case PTYPE_TEXT:
		free(*(char **)(base + k->offset));
		*(char **)(base + k->offset) = xstrdup(value);
		break;
	case PTYPE_PATH:
		free(*(char **)(base + k->offset));
		*(char **)(base + k->offset) = protocol_resolve_path(c->p, value);
		break;
	case PTYPE_CUSTOM:
		s->custom(c, (int)i, key, value, line);
		break;
	}
}

static int on_entry(void *user, const char *section, const char *key, const char *value, int line)
{
	struct protocol_ctx *c = user;
	if (!section) {   /* a broken header: skip until the next one */
		close_instance(c);
		c->skipping = 1;
		return 0;
	}
	if (!key) {
		open_section(c, section, line);
		return 0;
	}
	if (c->skipping && *section)
		return 0;
	if (!c->cur) {
		protocol_ctx_error(c, line, "key '%s' is outside any section (start with [experiment])",
				   key);
		return 0;
	}
	set_key(c, key, value, line);
	return 0;
}

static void defaults(struct protocol *p)
{
	p->epoch_ms[EPOCH_FIXATION] = 500;
	p->epoch_ms[EPOCH_BLANK] = 0;
	p->epoch_ms[EPOCH_MASK] = 0;
	p->epoch_ms[EPOCH_RESPONSE] = 0;
	p->epoch_ms[EPOCH_FEEDBACK] = 500;
	p->epoch_ms[EPOCH_ITI] = 500;
	p->background = 128;
	p->background_cd = -1;
	p->fixation_deg = 0.3;
	p->mask = MASK_NONE;
	p->feedback = FEEDBACK_MARK;
	p->scaling = SCALING_LINEAR;
}

/* The file name without folder and extension, with characters a name may not hold as '_'. */
static char *default_name(const char *path)
{
	const char *b = strrchr(path, '/');
	b = b ? b + 1 : path;
	char *n = xstrdup(*b ? b : "protocol");
	char *dot = strrchr(n, '.');
	if (dot && dot != n)
		*dot = '\0';
	for (char *q = n; *q; q++)
		if (!isalnum((unsigned char)*q) && *q != '_' && *q != '-')
			*q = '_';
	if (strlen(n) > 64)
		n[64] = '\0';
	return n;
}

int protocol_parse(const char *path, const char *text, struct protocol *p, struct diag_list *d)
{
	memset(p, 0, sizeof *p);
	defaults(p);
	p->path = xstrdup(path);
	const char *slash = strrchr(path, '/');
	p->dir = slash ? xasprintf("%.*s", (int)(slash - path), path) : xstrdup(".");
	if (slash == path)
		strcpy(p->dir, "/");
	p->text = xstrdup(text);
	size_t errors0 = diag_count(d, DIAG_ERROR);
	struct protocol_ctx c = {.p = p, .file = path, .d = d};
	inifile_parse(path, text, on_entry, &c, d);
	close_instance(&c);
	/* The plain kinds every protocol needs are the first rows of sections[]. */
	for (size_t k = 0; k < NREQUIRED_PLAIN; k++)
		if (!c.plain_line[k]) {
			const struct protocol_section *s = sections[k];
			char need[256] = "";
			for (size_t i = 0; i < s->nkeys; i++)
				if (s->keys[i].required) {
					size_t len = strlen(need);
					snprintf(need + len, sizeof need - len, "%s%s", len ? ", " : "",
						 s->keys[i].name);
				}
			if (*need)
				protocol_ctx_error(&c, 0, "missing section [%s] (it must set %s)", s->kind,
						   need);
			else
				protocol_ctx_error(&c, 0, "missing section [%s]", s->kind);
		}
	for (size_t k = 0; k < NSECTIONS; k++)
		if (sections[k]->finish)
			sections[k]->finish(&c);
	if (!p->name)
		p->name = default_name(path);
	return diag_count(d, DIAG_ERROR) > errors0 ? -1 : 0;
}

int protocol_load(const char *path, struct protocol *p, struct diag_list *d)
{
	char *text = inifile_read(path, NULL, d);
	if (!text) {
		memset(p, 0, sizeof *p);
		return -1;
	}
	int rc = protocol_parse(path, text, p, d);
	free(text);
	return rc;
}

void protocol_clear(struct protocol *p)
{
	if (!p)
		return;
	for (size_t k = 0; k < NSECTIONS; k++)
		if (sections[k]->clear)
			sections[k]->clear(p);
	free(p->path);
	free(p->dir);
	free(p->text);
	free(p->name);
	free(p->stimuli);
	for (size_t i = 0; i < p->nchoices; i++) {
		free(p->choices[i].category);
		free(p->choices[i].key);
	}
	free(p->mask_image);
	for (size_t i = 0; i < p->nblocks; i++) {
		struct protocol_block *b = &p->blocks[i];
		free(b->name);
		filters_free(b->filters, b->nfilters);
		free(b->adaptive);
	}
	free(p->blocks);
	memset(p, 0, sizeof *p);
}
