/* protocol_triggers — the "[triggers]" section (see protocol_triggers.h).
 *
 *   [triggers]
 *   onset = 10           ; every stimulus onset
 *   onset.animal = 11    ; the onset of an image of category 'animal' (instead of onset's)
 *   response = 50        ; an answer that counts
 *   block_start = 100
 *   block_end = 101
 *
 * Every key is read by custom() (the section has no fixed key table because of onset.CATEGORY);
 * the categories are resolved when the whole file has been read, since [categories] may come
 * after this section. */
#include "protocol_triggers.h"

#include <stddef.h>
#include <stdlib.h>
#include <string.h>

#include "suggest.h"

struct tkey {
	const char *name;
	size_t code, line;   /* offsets in struct protocol_triggers */
};

static const struct tkey tkeys[] = {
	{"onset", offsetof(struct protocol_triggers, onset),
	 offsetof(struct protocol_triggers, onset_line)},
	{"response", offsetof(struct protocol_triggers, response),
	 offsetof(struct protocol_triggers, response_line)},
	{"block_start", offsetof(struct protocol_triggers, block_start),
	 offsetof(struct protocol_triggers, block_start_line)},
	{"block_end", offsetof(struct protocol_triggers, block_end),
	 offsetof(struct protocol_triggers, block_end_line)},
};
#define NTKEYS (sizeof tkeys / sizeof tkeys[0])

static int triggers_open(struct protocol_ctx *c, const char *name, int line)
{
	(void)name;
	protocol_ctx_protocol(c)->triggers.line = line;
	return 0;
}

static void *triggers_base(struct protocol_ctx *c)
{
	return &protocol_ctx_protocol(c)->triggers;
}

static void triggers_entry(struct protocol_ctx *c, int key_index, const char *key,
			   const char *value, int line)
{
	(void)key_index;
	struct protocol_triggers *t = &protocol_ctx_protocol(c)->triggers;
	const struct protocol_key k = {key, PTYPE_INT, 0, 1, 255, 0, NULL, 0, NULL, 0};
	int code;
	if (!strncmp(key, "onset.", 6)) {
		const char *cat = key + 6;
		if (!*cat) {
			protocol_ctx_error(c, line, "'%s' names no category (onset.CATEGORY = CODE)", key);
			return;
		}
		for (size_t i = 0; i < t->ncategory; i++)
			if (!strcmp(t->category[i], cat)) {
				protocol_ctx_error(c, line, "duplicate key '%s' (first set on line %d)", key,
						   t->category_line[i]);
				return;
			}
		if (t->ncategory == PROTOCOL_MAX_CHOICES) {
			protocol_ctx_error(c, line, "more onset.CATEGORY codes than categories (%d)",
					   PROTOCOL_MAX_CHOICES);
			return;
		}
		if (protocol_value_int(c, &k, value, line, &code))
			return;
		t->category[t->ncategory] = xstrdup(cat);
		t->category_code[t->ncategory] = code;
		t->category_line[t->ncategory++] = line;
		return;
	}
	const char *names[NTKEYS + 1];
	for (size_t i = 0; i < NTKEYS; i++) {
		names[i] = tkeys[i].name;
		if (strcmp(tkeys[i].name, key))
			continue;
		int *at_line = (int *)((char *)t + tkeys[i].line);
		if (*at_line) {
			protocol_ctx_error(c, line, "duplicate key '%s' (first set on line %d)", key,
					   *at_line);
			return;
		}
		*at_line = line;
		if (!protocol_value_int(c, &k, value, line, &code))
			*(int *)((char *)t + tkeys[i].code) = code;
		return;
	}
	names[NTKEYS] = "onset.CATEGORY";
	const char *near = suggest_nearest(key, names, NTKEYS);
	if (near)
		protocol_ctx_error(c, line, "unknown key '%s' in [triggers]; did you mean '%s'?", key,
				   near);
	else
		protocol_ctx_error(c, line, "unknown key '%s' in [triggers] (onset, onset.CATEGORY, "
				   "response, block_start, block_end)", key);
}

static void triggers_finish(struct protocol_ctx *c)
{
	struct protocol *p = protocol_ctx_protocol(c);
	struct protocol_triggers *t = &p->triggers;
	for (size_t i = 0; i < PROTOCOL_MAX_CHOICES; i++)
		t->onset_choice[i] = t->onset;
	for (size_t i = 0; i < t->ncategory; i++) {
		int ci = protocol_choice_index(p, t->category[i]);
		if (ci < 0) {
			protocol_ctx_error(c, t->category_line[i], "onset.%s: '%s' is not one of the "
					   "protocol's [categories]", t->category[i], t->category[i]);
			continue;
		}
		t->onset_choice[ci] = t->category_code[i];
	}
}

static void triggers_clear(struct protocol *p)
{
	for (size_t i = 0; i < p->triggers.ncategory; i++)
		free(p->triggers.category[i]);
}

const struct protocol_section protocol_triggers_section = {
	"triggers", 0, NULL, 0, triggers_open, triggers_base, triggers_entry, NULL, triggers_finish,
	NULL, triggers_clear,
};
