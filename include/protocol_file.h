/* protocol_file — reading a protocol file (INI text, parsed with inih through inifile.c) into a
 * validated struct protocol (protocol.h), and the section-kind machinery the parser is built on.
 * Implemented by app/io/protocol.c (and one file per further section kind, such as
 * app/io/protocol_adaptive.c). An io header: core uses protocol.h only. */
#ifndef TACHIST_PROTOCOL_FILE_H
#define TACHIST_PROTOCOL_FILE_H

#include <stdbool.h>
#include <stddef.h>

#include "diag.h"
#include "protocol.h"

/* --- Section kinds -------------------------------------------------------------------------
 * The parser is driven by a table of section kinds (app/io/protocol.c, `sections[]`). A kind is
 * either plain ("[timing]") or named ("[block NAME]"). Adding a kind (for example the adaptive
 * work's "[adaptive NAME]") takes one table row pointing at a `struct protocol_section` defined in
 * its own file; the helpers below parse values with the same messages as every other key. */

struct protocol_ctx;   /* parsing state, opaque */

enum protocol_type {
	PTYPE_NUMBER,   /* double in [min, max] (min excluded when min_open) */
	PTYPE_INT,      /* whole number in [min, max] */
	PTYPE_BOOL,     /* yes|no (also true|false, on|off, 1|0); stored as bool */
	PTYPE_WORD,     /* one of WORDS; stored as the int index (an enum) */
	PTYPE_TEXT,     /* free text; stored as malloc'd char * */
	PTYPE_PATH,     /* a path relative to the protocol file; stored resolved as char * */
	PTYPE_CUSTOM,   /* handed to the section's custom() */
};

/* One valid key of a section kind. OFFSET is into the struct that the kind's base() returns. */
struct protocol_key {
	const char *name;
	enum protocol_type type;
	size_t offset;
	double min, max;
	int min_open;
	const char *const *words;   /* PTYPE_WORD: NULL-terminated */
	int required;
	const char *unit;           /* for messages: "ms", "deg", ... or NULL */
	size_t line_offset;         /* where to store the key's line (an int), 0 = nowhere */
};

struct protocol_section {
	const char *kind;           /* word in the header: "timing", "block", "adaptive" */
	int named;                  /* header is "[kind NAME]" */
	const struct protocol_key *keys;   /* NULL: any key goes to custom() (like [categories]) */
	size_t nkeys;
	/* Starts an instance of the section (NAME is NULL unless named). Returns 0, or -1 to skip the
	 * instance's keys (after reporting why). */
	int (*open)(struct protocol_ctx *c, const char *name, int line);
	/* Base address for the keys' offsets in the current instance. */
	void *(*base)(struct protocol_ctx *c);
	/* PTYPE_CUSTOM keys, and every key when KEYS is NULL (KEY_INDEX is then -1). */
	void (*custom)(struct protocol_ctx *c, int key_index, const char *key, const char *value,
		       int line);
	/* Ends the current instance (defaults, per-instance checks). May be NULL. */
	void (*close)(struct protocol_ctx *c, int header_line);
	/* After the whole file. May be NULL. */
	void (*finish)(struct protocol_ctx *c);
	/* True when an instance NAME exists (lets blocks refer to named sections). May be NULL. */
	int (*defines)(const struct protocol *p, const char *name);
	/* Frees what the kind stored in the protocol. May be NULL. */
	void (*clear)(struct protocol *p);
};

struct protocol *protocol_ctx_protocol(struct protocol_ctx *c);
/* Adds an error (or a warning) at LINE of the protocol file. */
void protocol_ctx_error(struct protocol_ctx *c, int line, const char *fmt, ...)
	__attribute__((format(printf, 3, 4)));
void protocol_ctx_warning(struct protocol_ctx *c, int line, const char *fmt, ...)
	__attribute__((format(printf, 3, 4)));
/* Line where key KEY_INDEX of the current instance was set, 0 when not (yet). */
int protocol_ctx_key_line(struct protocol_ctx *c, int key_index);
/* Parse one value as KEY's type with the standard messages; return 0 or -1 (reported). */
int protocol_value_number(struct protocol_ctx *c, const struct protocol_key *k, const char *value,
			  int line, double *out);
int protocol_value_int(struct protocol_ctx *c, const struct protocol_key *k, const char *value,
		       int line, int *out);
int protocol_value_bool(struct protocol_ctx *c, const struct protocol_key *k, const char *value,
			int line, bool *out);
int protocol_value_word(struct protocol_ctx *c, const struct protocol_key *k, const char *value,
			int line, int *out);
/* VALUE resolved against the protocol's folder (malloc'd). */
char *protocol_resolve_path(const struct protocol *p, const char *value);

/* Loads and validates PATH. Every problem goes to D as FILE:LINE. Returns 0 when the protocol is
 * usable (warnings allowed), -1 on any error. P must be released with protocol_clear. */
int protocol_load(const char *path, struct protocol *p, struct diag_list *d);
/* Same on text in memory (for tests and the fuzzer); PATH names it in messages and anchors
 * relative paths. */
int protocol_parse(const char *path, const char *text, struct protocol *p, struct diag_list *d);
void protocol_clear(struct protocol *p);

#endif
