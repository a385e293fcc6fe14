/* protocol — an experiment as the scientist writes it (an INI file, parsed with inih).
 *
 * A protocol names the n choices (category and key), the stimulus list, epoch durations in ms,
 * display settings and one or more blocks. Paths inside are relative to the protocol file and are
 * stored resolved. Loaded by io/protocol.c; the key names are documented in README.md. */
#ifndef TACHIST_PROTOCOL_H
#define TACHIST_PROTOCOL_H

#include <stdbool.h>
#include <stddef.h>

#include "diag.h"
#include "epoch.h"

#define PROTOCOL_MAX_CHOICES 26

struct protocol_choice {
	char *category;   /* category name as in the stimulus list */
	char *key;        /* key name as SDL spells it, lower case: "f", "j", "1", "space" */
	int line;
};

enum protocol_order { ORDER_RANDOM, ORDER_FIXED };
enum protocol_feedback { FEEDBACK_NONE, FEEDBACK_MARK };   /* MARK: a tick or a cross at fixation */
enum protocol_mask { MASK_NONE, MASK_NOISE, MASK_IMAGE };
enum protocol_scaling { SCALING_LINEAR, SCALING_NEAREST };

/* One filter clause: the list column COLUMN must equal one of VALUES (text match). For the
 * `level` column the comparison is numeric. */
struct protocol_filter {
	char *column;
	char **values;
	size_t nvalues;
};

struct protocol_block {
	char *name;
	int line;                      /* line of the block's section header */
	struct protocol_filter *filters;
	size_t nfilters;
	int repeats;                   /* each selected stimulus is shown this many times */
	enum protocol_order order;
	int longest_streak;            /* longest run of one category allowed; 0 = no limit */
	bool practice;
	bool feedback;                 /* feedback shown in this block (practice blocks default yes) */
	bool repeat_faults;            /* trials with timing faults are shown again at the block end */
	char *adaptive;                /* name of an adaptive section, NULL for fixed levels */
	int select_line;               /* line of `select`, 0 when absent (then every row) */
	int adaptive_line;
};

struct protocol {
	char *path;                    /* as given */
	char *dir;                     /* folder of the file, for relative paths */
	char *text;                    /* full file text, stored with each session */
	char *name;                    /* short name for files and tables */
	char *stimuli;                 /* stimulus list path, resolved */
	int stimuli_line;
	struct protocol_choice choices[PROTOCOL_MAX_CHOICES];
	size_t nchoices;
	double epoch_ms[EPOCH_COUNT];
	double size_deg;               /* stimulus width (longer side) in degrees */
	int background;                /* grey level 0..255 */
	double background_cd;          /* background asked in cd/m² (rig calibration), < 0 = unset */
	double background_cd_achieved; /* light of the code chosen for background_cd, cd/m² */
	bool linearize;                /* images through the inverse of the display's curve */
	double fixation_deg;           /* fixation mark size; 0 = none */
	enum protocol_mask mask;
	char *mask_image;              /* resolved path when mask = image */
	enum protocol_feedback feedback;
	enum protocol_scaling scaling;
	int break_every;               /* trials between rest breaks inside a block; 0 = none */
	struct protocol_block *blocks;
	size_t nblocks;
	void *adaptive;                /* adaptive sections, owned by the adaptive module; may be NULL */
	size_t nadaptive;
	int epoch_line[EPOCH_COUNT];   /* line of each [timing] key, 0 when defaulted */
	int size_line;                 /* line of size_deg */
	int background_line, background_cd_line, linearize_line;
	int name_line, mask_image_line, break_line;
};

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
/* Index of CATEGORY among the choices, or -1. */
int protocol_choice_index(const struct protocol *p, const char *category);

#endif
