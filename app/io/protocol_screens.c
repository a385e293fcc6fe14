/* protocol_screens — "[screens]" and the blocks' instruction files (see protocol_screens.h).
 *
 * Keys of [screens]: font (PATH), text_deg (capital height in degrees, default 0.5), instructions
 * (PATH), legend (off | labels | keys, default off), break_accuracy (yes | no, default no). The
 * files are read in the finish hook, after every block is known. */
#include "protocol_screens.h"

#include <errno.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#define TEXT_DEG_DEFAULT 0.5

static const char *const legend_words[] = {"off", "labels", "keys", NULL};

static const struct protocol_key screens_keys[] = {
	{"font", PTYPE_PATH, offsetof(struct protocol_screens, font), 0, 0, 0, NULL, 0, NULL,
	 offsetof(struct protocol_screens, font_line)},
	{"text_deg", PTYPE_NUMBER, offsetof(struct protocol_screens, text_deg), 0, 10, 1, NULL, 0,
	 "deg", offsetof(struct protocol_screens, text_line)},
	{"instructions", PTYPE_PATH, offsetof(struct protocol_screens, instructions), 0, 0, 0, NULL,
	 0, NULL, offsetof(struct protocol_screens, instructions_line)},
	{"legend", PTYPE_WORD, offsetof(struct protocol_screens, legend), 0, 0, 0, legend_words, 0,
	 NULL, 0},
	{"break_accuracy", PTYPE_BOOL, offsetof(struct protocol_screens, break_accuracy), 0, 0, 0,
	 NULL, 0, NULL, 0},
};

static void *screens_base(struct protocol_ctx *c)
{
	return &protocol_ctx_protocol(c)->screens;
}

/* True when the N bytes at S are well-formed UTF-8 (RFC 3629: no overlong forms, no surrogates,
 * nothing above U+10FFFF) without NUL bytes. */
static bool utf8_ok(const unsigned char *s, size_t n)
{
	for (size_t i = 0; i < n;) {
		unsigned c = s[i];
		size_t len = c < 0x80 ? 1 : (c & 0xe0) == 0xc0 ? 2 : (c & 0xf0) == 0xe0 ? 3
			   : (c & 0xf8) == 0xf0 ? 4 : 0;
		if (!len || c == 0 || i + len > n)
			return false;
		unsigned long cp = len == 1 ? c : len == 2 ? c & 0x1f : len == 3 ? c & 0x0f : c & 0x07;
		for (size_t k = 1; k < len; k++) {
			if ((s[i + k] & 0xc0) != 0x80)
				return false;
			cp = cp << 6 | (s[i + k] & 0x3f);
		}
		static const unsigned long least[5] = {0, 0, 0x80, 0x800, 0x10000};
		if (cp < least[len] || cp > 0x10ffff || (cp >= 0xd800 && cp <= 0xdfff))
			return false;
		i += len;
	}
	return true;
}

/* Reads the instructions file PATH (named on LINE) into a malloc'd string; NULL after reporting. */
static char *read_text(struct protocol_ctx *c, const char *path, int line)
{
	struct stat sb;
	if (stat(path, &sb) == 0 && !S_ISREG(sb.st_mode)) {
		/* A FIFO or a device would block or never end. */
		protocol_ctx_error(c, line, "instructions file %s is not a regular file", path);
		return NULL;
	}
	FILE *f = fopen(path, "rb");
	if (!f) {
		protocol_ctx_error(c, line, "cannot read the instructions file %s (%s)", path,
				   strerror(errno));
		return NULL;
	}
	char *buf = xmalloc(PROTOCOL_INSTRUCTIONS_MAX + 1);
	size_t n = fread(buf, 1, PROTOCOL_INSTRUCTIONS_MAX + 1, f);
	bool bad = ferror(f);
	fclose(f);
	const char *why = bad ? "it cannot be read"
			: n > PROTOCOL_INSTRUCTIONS_MAX ? "it is longer than 16384 bytes"
			: !utf8_ok((const unsigned char *)buf, n) ? "it is not UTF-8 text" : NULL;
	if (why) {
		protocol_ctx_error(c, line, "instructions file %s: %s", path, why);
		free(buf);
		return NULL;
	}
	buf[n] = '\0';
	/* A UTF-8 byte-order mark is not text. */
	if (n >= 3 && !memcmp(buf, "\xef\xbb\xbf", 3))
		memmove(buf, buf + 3, n - 2);
	return buf;
}

static void screens_finish(struct protocol_ctx *c)
{
	struct protocol *p = protocol_ctx_protocol(c);
	struct protocol_screens *s = &p->screens;
	if (!s->text_line)
		s->text_deg = TEXT_DEG_DEFAULT;
	struct stat sb;
	if (s->font && stat(s->font, &sb) == 0 && !S_ISREG(sb.st_mode)) {
		protocol_ctx_error(c, s->font_line, "font file %s is not a regular file", s->font);
	} else if (s->font) {
		FILE *f = fopen(s->font, "rb");
		if (!f)
			protocol_ctx_error(c, s->font_line, "cannot read the font file %s (%s)", s->font,
					   strerror(errno));
		else
			fclose(f);
	}
	if (s->instructions)
		s->instructions_text = read_text(c, s->instructions, s->instructions_line);
	for (size_t i = 0; i < p->nblocks; i++) {
		struct protocol_block *b = &p->blocks[i];
		if (b->instructions)
			b->instructions_text = read_text(c, b->instructions, b->instructions_line);
	}
}

static void screens_clear(struct protocol *p)
{
	free(p->screens.font);
	free(p->screens.instructions);
	free(p->screens.instructions_text);
	for (size_t i = 0; i < p->nblocks; i++) {
		free(p->blocks[i].instructions);
		free(p->blocks[i].instructions_text);
	}
	memset(&p->screens, 0, sizeof p->screens);
}

const struct protocol_section protocol_screens_section = {
	"screens", 0, screens_keys, sizeof screens_keys / sizeof screens_keys[0], NULL, screens_base,
	NULL, NULL, screens_finish, NULL, screens_clear,
};

/* --- [counterbalance] ---------------------------------------------------------------------- */

static const char *const order_words[] = {"fixed", "balanced", NULL};
static const char *const mapping_words[] = {"fixed", "rotate", NULL};

static const struct protocol_key counterbalance_keys[] = {
	{"block_order", PTYPE_WORD, offsetof(struct protocol_counterbalance, block_order), 0, 0, 0,
	 order_words, 0, NULL, offsetof(struct protocol_counterbalance, line)},
	{"key_mapping", PTYPE_WORD, offsetof(struct protocol_counterbalance, key_mapping), 0, 0, 0,
	 mapping_words, 0, NULL, 0},
};

static void *counterbalance_base(struct protocol_ctx *c)
{
	return &protocol_ctx_protocol(c)->counterbalance;
}

static void counterbalance_finish(struct protocol_ctx *c)
{
	struct protocol *p = protocol_ctx_protocol(c);
	if (p->counterbalance.block_order != COUNTERBALANCE_BALANCED)
		return;
	size_t nmain = 0;
	for (size_t i = 0; i < p->nblocks; i++)
		nmain += !p->blocks[i].practice;
	if (nmain < 2)
		protocol_ctx_warning(c, p->counterbalance.line, "block_order = balanced has %zu main "
				     "block%s to order; every subject gets the same order", nmain,
				     nmain == 1 ? "" : "s");
}

const struct protocol_section protocol_counterbalance_section = {
	"counterbalance", 0, counterbalance_keys,
	sizeof counterbalance_keys / sizeof counterbalance_keys[0], NULL, counterbalance_base, NULL,
	NULL, counterbalance_finish, NULL, NULL,
};
