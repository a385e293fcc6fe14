/* protocol — an experiment as the scientist writes it, as plain data (a core header).
 *
 * A protocol names the n choices (category and key), the stimulus list, epoch durations in ms,
 * display settings and one or more blocks. Paths inside are relative to the protocol file and are
 * stored resolved. The pure lookups declared here live in app/core/protocol_lookup.c; reading,
 * parsing and freeing a protocol file is protocol_file.h (app/io/protocol.c); the key names are
 * documented in docs/files.md. */
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
/* The key legend in the response window: none, the categories, or the categories with their keys. */
enum protocol_legend { LEGEND_OFF, LEGEND_LABELS, LEGEND_KEYS };

/* [counterbalance]: how the subject's position in the design changes the protocol (counterbal.h). */
enum counterbalance_blocks { COUNTERBALANCE_FIXED, COUNTERBALANCE_BALANCED };
enum counterbalance_keys { COUNTERBALANCE_KEYS_FIXED, COUNTERBALANCE_ROTATE };
struct protocol_counterbalance {
	int block_order;               /* enum counterbalance_blocks */
	int key_mapping;               /* enum counterbalance_keys */
	int line;                      /* header line of [counterbalance], 0 = absent */
};

/* What the observer reads ([screens], app/io/protocol_screens.c). */
struct protocol_screens {
	char *font;                    /* font file, resolved; NULL = the system's sans-serif */
	double text_deg;               /* height of a capital letter in degrees of visual angle */
	char *instructions;            /* the session's instructions file, resolved; NULL = none */
	char *instructions_text;       /* its text (UTF-8), read with the protocol */
	enum protocol_legend legend;
	bool break_accuracy;           /* break screens of main blocks show the accuracy so far */
	int font_line, instructions_line, text_line;
};

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
	char *instructions;            /* the block's instructions file, resolved; NULL = none */
	char *instructions_text;       /* its text (UTF-8), read with the protocol */
	int instructions_line;
};

/* [triggers]: one code (1..255) per event for the rig's trigger port; 0 = no code. */
struct protocol_triggers {
	int onset;                              /* every stimulus onset (onset = CODE) */
	int onset_choice[PROTOCOL_MAX_CHOICES]; /* the onset code of each category after parsing:
						 * onset.CATEGORY = CODE, else onset */
	int response, block_start, block_end;
	int line;                               /* the section's header line, 0 = absent */
	/* onset.CATEGORY keys as read, resolved against [categories] when the file ends */
	char *category[PROTOCOL_MAX_CHOICES];
	int category_code[PROTOCOL_MAX_CHOICES], category_line[PROTOCOL_MAX_CHOICES];
	size_t ncategory;
	int onset_line, response_line, block_start_line, block_end_line;
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
	struct protocol_screens screens;
	struct protocol_counterbalance counterbalance;
	struct protocol_block *blocks;
	size_t nblocks;
	void *adaptive;                /* adaptive sections, owned by the adaptive module; may be NULL */
	size_t nadaptive;
	int epoch_line[EPOCH_COUNT];   /* line of each [timing] key, 0 when defaulted */
	int size_line;                 /* line of size_deg */
	int background_line, background_cd_line, linearize_line;
	int name_line, mask_image_line, break_line;
	struct protocol_triggers triggers;   /* protocol_triggers.c */
};

/* Index of CATEGORY among the choices, or -1. */
int protocol_choice_index(const struct protocol *p, const char *category);

#endif
