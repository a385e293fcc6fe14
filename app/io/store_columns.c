/* store_columns — the column tables of the sessions and trials tables, and the two functions
 * that move values between a row struct and a column without knowing which column it is.
 *
 * One descriptor per column (struct store_column in store.h): SQL name, exported name, type,
 * when it is missing, flags, SQL constraint, where its value lives in struct store_session or
 * struct store_trial, and a description with units for the BIDS sidecar. The trials table is in
 * the exported order; the exported session columns (STORE_COL_ROW) come first on every row.
 * The schema (store_schema.c), the insert (store_write.c), the reads (store_read.c), the pool
 * (store_pool.c) and every export writer (export.c) walk these tables. No SQLite here. */
#include <stddef.h>
#include <string.h>

#include "protocol.h"
#include "stimlist.h"
#include "store.h"

#define NONE STORE_NO_FIELD
#define SS(f) offsetof(struct store_session, f)
#define TR(f) offsetof(struct store_trial, f)

static const struct store_column session_cols[] = {
	{"id", "session_id", STORE_UUID, STORE_ALWAYS, STORE_COL_ROW | STORE_COL_META,
	 "PRIMARY KEY NOT NULL", SS(id), NONE, "Session identifier (a random UUID)", NULL},
	{"subject", "subject", STORE_TEXT, STORE_ALWAYS, STORE_COL_ROW | STORE_COL_META,
	 "NOT NULL", SS(subject), NONE, "Pseudonymous subject ID (letters and digits)", NULL},
	{"protocol_name", "protocol", STORE_TEXT, STORE_IF_ZERO, STORE_COL_ROW | STORE_COL_META,
	 "", SS(protocol_name), NONE, "Name of the protocol the session ran", NULL},
	{"protocol_path", "protocol_path", STORE_TEXT, STORE_IF_ZERO, STORE_COL_META, "",
	 SS(protocol_path), NONE, "Protocol file as given when the session began", NULL},
	{"protocol_text", NULL, STORE_TEXT, STORE_IF_ZERO, 0, "", SS(protocol_text), NONE,
	 "Whole text of the protocol file", NULL},
	{"protocol_sha256", "protocol_sha256", STORE_HASH, STORE_IF_ZERO, STORE_COL_META, "",
	 SS(protocol_sha256), NONE, "SHA-256 of the protocol text (hex)", NULL},
	{"stimuli_path", "stimuli_path", STORE_TEXT, STORE_IF_ZERO, STORE_COL_META, "",
	 SS(stimuli_path), NONE, "Stimulus list file", NULL},
	{"stimuli_sha256", "stimuli_sha256", STORE_HASH, STORE_IF_ZERO, STORE_COL_META, "",
	 SS(stimuli_sha256), NONE, "SHA-256 of the stimulus list file (hex)", NULL},
	{"rig_text", NULL, STORE_TEXT, STORE_IF_ZERO, 0, "", SS(rig_text), NONE,
	 "Whole text of the rig profile", NULL},
	{"seed", "seed", STORE_SEED, STORE_ALWAYS, STORE_COL_META, "NOT NULL", SS(seed), NONE,
	 "Seed of the trial plan (the same seed rebuilds the same plan)", NULL},
	{"version", "version", STORE_TEXT, STORE_IF_ZERO, STORE_COL_META, "", SS(version), NONE,
	 "tachist version that began the session", NULL},
	{"timing_mode", "timing_mode", STORE_TEXT, STORE_IF_ZERO, STORE_COL_META, "",
	 SS(timing_mode), NONE, "vsync (a real display) or simulated (headless)", NULL},
	{"refresh_hz", "refresh_hz", STORE_REAL, STORE_IF_ZERO, STORE_COL_META, "",
	 SS(refresh_hz), NONE, "Refresh rate measured before the first block", "Hz"},
	{"started_utc", "started_utc", STORE_TIME, STORE_ALWAYS, STORE_COL_ROW | STORE_COL_META,
	 "NOT NULL", SS(started_utc), NONE, "When the session began (ISO 8601, UTC)", NULL},
	{"ended_utc", "ended_utc", STORE_TIME, STORE_IF_ZERO, STORE_COL_META, "", SS(ended_utc),
	 NONE, "When the session ended (ISO 8601, UTC)", NULL},
	{"status", "status", STORE_STATUS, STORE_ALWAYS, STORE_COL_META,
	 "NOT NULL CHECK (status IN ('running','complete','aborted','interrupted','ended-early'))",
	 SS(status), NONE, "running, complete, ended-early, interrupted or aborted "
	 "(docs/storage-states.md)", NULL},
	{"choices", NULL, STORE_JSON, STORE_IF_ZERO, 0, "", NONE, NONE,
	 "The protocol's categories and keys, as JSON", NULL},
	{"label_names", NULL, STORE_JSON, STORE_IF_ZERO, 0, "", NONE, NONE,
	 "Names of the stimulus list's label columns, as JSON", NULL},
	{"observer", "observer", STORE_TEXT, STORE_IF_ZERO, STORE_COL_META, "", SS(observer), NONE,
	 "keyboard, or the model observer's settings", NULL},
	{"screen_width_cm", "screen_width_cm", STORE_REAL, STORE_IF_ZERO, STORE_COL_META, "",
	 SS(screen_width_cm), NONE, "Visible width of the observer's screen", "cm"},
	{"screen_height_cm", "screen_height_cm", STORE_REAL, STORE_IF_ZERO, STORE_COL_META, "",
	 SS(screen_height_cm), NONE, "Visible height of the observer's screen", "cm"},
	{"screen_width_px", "screen_width_px", STORE_INT, STORE_IF_ZERO, STORE_COL_META, "",
	 SS(screen_width_px), NONE, "Width of the observer's screen", "pixels"},
	{"screen_height_px", "screen_height_px", STORE_INT, STORE_IF_ZERO, STORE_COL_META, "",
	 SS(screen_height_px), NONE, "Height of the observer's screen", "pixels"},
	{"distance_cm", "distance_cm", STORE_REAL, STORE_IF_ZERO, STORE_COL_META, "",
	 SS(distance_cm), NONE, "Viewing distance", "cm"},
	{"nominal_hz", "nominal_hz", STORE_REAL, STORE_IF_ZERO, STORE_COL_META, "",
	 SS(nominal_hz), NONE, "The rig's nominal refresh rate", "Hz"},
	{"stim_deg", "stim_deg", STORE_REAL, STORE_IF_ZERO, STORE_COL_META, "", SS(stim_deg),
	 NONE, "Stimulus size asked for", "degrees of visual angle"},
	{"owner_pid", NULL, STORE_INT, STORE_IF_ZERO, 0, "", SS(owner_pid), NONE,
	 "Process that runs the session", NULL},
	{"owner_host", NULL, STORE_TEXT, STORE_IF_ZERO, 0, "", SS(owner_host), NONE,
	 "Host name of the machine that runs the session", NULL},
	{"planned_trials", "planned_trials", STORE_INT, STORE_IF_ZERO, STORE_COL_META, "",
	 SS(planned_trials), NONE, "Trials in the session's plan (repeats not counted)", NULL},
	{"luminance_measured", "luminance_measured", STORE_TEXT, STORE_IF_ZERO, STORE_COL_META, "",
	 SS(lum_measured), NONE, "Date the rig's display luminance was measured (YYYY-MM-DD)", NULL},
	{"luminance_gamma", "luminance_gamma", STORE_REAL, STORE_IF_UNFLAGGED, STORE_COL_META, "",
	 SS(lum_gamma), SS(has_lum), "Exponent of the display's fitted luminance curve "
	 "L = L_min + (L_max - L_min)(code/255)^gamma, grey channel", NULL},
	{"luminance_min", "luminance_min", STORE_REAL, STORE_IF_UNFLAGGED, STORE_COL_META, "",
	 SS(lum_min_cd), SS(has_lum), "Fitted luminance of code 0 (L_min), grey channel", "cd/m^2"},
	{"luminance_max", "luminance_max", STORE_REAL, STORE_IF_UNFLAGGED, STORE_COL_META, "",
	 SS(lum_max_cd), SS(has_lum), "Fitted luminance of code 255 (L_max), grey channel",
	 "cd/m^2"},
	{"background_luminance", "background_luminance", STORE_REAL, STORE_IF_UNFLAGGED,
	 STORE_COL_META, "", SS(background_cd), SS(has_background_cd),
	 "Luminance of the background code through the rig's calibration", "cd/m^2"},
	{"linearized", "linearized", STORE_BOOL, STORE_ALWAYS, STORE_COL_META, "",
	 SS(linearized), NONE, "Images were passed through the inverse of the display's curve "
	 "(1) or shown as stored (0)", NULL},
	{"design_position", "design_position", STORE_INT, STORE_IF_ZERO, STORE_COL_META, "",
	 SS(design_position), NONE, "The subject's position in the counterbalancing design, from 1 "
	 "(missing without [counterbalance])", NULL},
	{"block_order", "block_order", STORE_TEXT, STORE_IF_ZERO, STORE_COL_META, "",
	 SS(block_order), NONE, "Blocks in the order the design gave this session", NULL},
	{"key_mapping", "key_mapping", STORE_TEXT, STORE_IF_ZERO, STORE_COL_META, "",
	 SS(key_mapping), NONE, "category=key pairs the design gave this session", NULL},
	{"response_device", "response_device", STORE_TEXT, STORE_IF_ZERO, STORE_COL_META, "",
	 SS(response_device), NONE, "Name of the input device whose key-downs were the answers, "
	 "stamped by the kernel (missing: keys through SDL, frame-stamped)", NULL},
	{"response_usb", "response_usb", STORE_TEXT, STORE_IF_ZERO, STORE_COL_META, "",
	 SS(response_usb), NONE, "USB vendor:product id of the response device, when it is one", NULL},
	{"trigger_port", "trigger_port", STORE_TEXT, STORE_IF_ZERO, STORE_COL_META, "",
	 SS(trigger_port), NONE, "Serial port the trigger codes were written to", NULL},
};

static const struct store_column trial_cols[] = {
	{"session_id", NULL, STORE_UUID, STORE_ALWAYS, 0,
	 "NOT NULL REFERENCES sessions(id) ON DELETE CASCADE", TR(session_id), NONE,
	 "Session the trial belongs to", NULL},
	{"block", "block", STORE_INT, STORE_ALWAYS, STORE_COL_ONE_BASED, "NOT NULL", TR(block),
	 NONE, "Block number in the session plan, from 1", NULL},
	{"block_name", "block_name", STORE_TEXT, STORE_IF_ZERO, 0, "", TR(block_name), NONE,
	 "Name of the block in the protocol", NULL},
	{"practice", "practice", STORE_BOOL, STORE_ALWAYS, 0, "NOT NULL DEFAULT 0", TR(practice),
	 NONE, "1 in a practice block, 0 otherwise", NULL},
	{"block_trial", "block_trial", STORE_INT, STORE_ALWAYS, STORE_COL_ONE_BASED, "NOT NULL",
	 TR(block_trial), NONE, "Trial number within the block, from 1", NULL},
	{"trial", "trial", STORE_INT, STORE_ALWAYS, STORE_COL_ONE_BASED, "NOT NULL", TR(trial),
	 NONE, "Trial number within the session, from 1, in the order shown", NULL},
	{"stim", NULL, STORE_INT, STORE_IF_NEG, 0, "", TR(stim), NONE,
	 "Row of the image in the stimulus list, from 0", NULL},
	{"image", "image", STORE_TEXT, STORE_IF_ZERO, 0, "", TR(image), NONE,
	 "Image as written in the stimulus list (relative to the list file)", NULL},
	{"category", "category", STORE_TEXT, STORE_IF_ZERO, 0, "", TR(category), NONE,
	 "True category of the image", NULL},
	{"choice", NULL, STORE_INT, STORE_IF_NEG, 0, "", TR(choice), NONE,
	 "Index of the true category among the protocol's categories", NULL},
	{"level", "level", STORE_REAL, STORE_IF_UNFLAGGED, 0, "", TR(level), TR(has_level),
	 "Graded variable of the image, as given in the stimulus list or chosen by the staircase",
	 "arbitrary"},
	{"source", "source", STORE_TEXT, STORE_IF_ZERO, STORE_COL_LABELS_AFTER, "", TR(source),
	 NONE, "Clean image the shown one was made from, as in the stimulus list", NULL},
	{"labels", NULL, STORE_JSON, STORE_IF_ZERO, 0, "", NONE, NONE,
	 "The stimulus list's label values of the image, as JSON", NULL},
	{"response_key", "response_key", STORE_TEXT, STORE_IF_ZERO, 0, "", TR(response_key), NONE,
	 "Key the observer pressed (missing when no answer)", NULL},
	{"response", NULL, STORE_INT, STORE_IF_NEG, 0, "", TR(response), NONE,
	 "Index of the chosen category", NULL},
	{"response_category", "response", STORE_TEXT, STORE_IF_ZERO, 0, "",
	 TR(response_category), NONE, "Category the observer chose (missing when no answer)",
	 NULL},
	{"correct", "correct", STORE_INT, STORE_IF_NEG, 0, "", TR(correct), NONE,
	 "1 when the chosen category was the true one, 0 when not (missing when no answer)", NULL},
	{"rt_ms", "rt_ms", STORE_REAL, STORE_IF_UNFLAGGED, 0, "", TR(rt_ms), TR(has_rt),
	 "Reaction time from the stimulus onset flip to the key press", "ms"},
	{"rt_clock", "rt_clock", STORE_TEXT, STORE_IF_ZERO, 0, "", TR(rt_clock), NONE,
	 "What stamped the key press: frame (read after a flip, so quantised to the refresh), "
	 "kernel (the input device's own event time) or model (the model observer's drawn time)",
	 NULL},
	{"timed_out", "timed_out", STORE_BOOL, STORE_ALWAYS, 0, "NOT NULL DEFAULT 0",
	 TR(timed_out), NONE, "1 when the response window closed without an answer", NULL},
	{"anticipation", "anticipation", STORE_BOOL, STORE_ALWAYS, 0, "NOT NULL DEFAULT 0",
	 TR(anticipation), NONE, "1 when a choice key was pressed before an answer could count",
	 NULL},
	{"key_sdl_ms", NULL, STORE_INT64, STORE_IF_ZERO, 0, "", TR(key_sdl_ms), NONE,
	 "SDL's own time stamp of the key event", "ms"},
	{"frames_planned", "frames_planned", STORE_INT, STORE_ALWAYS, 0, "", TR(frames_planned),
	 NONE, "Stimulus frames planned", "frames"},
	{"frames_actual", "frames_actual", STORE_INT, STORE_ALWAYS, 0, "", TR(frames_actual), NONE,
	 "Stimulus frames shown, from the flip times", "frames"},
	{"dropped_frames", "dropped_frames", STORE_INT, STORE_ALWAYS, 0, "", TR(dropped_frames),
	 NONE, "Frames lost during the trial (an interval over 1.5 refresh periods)", "frames"},
	{"timing_ok", "timing_ok", STORE_BOOL, STORE_ALWAYS, 0, "", TR(timing_ok), NONE,
	 "1 when the exposure was exact and no frame dropped during the stimulus epochs", NULL},
	{"onset_ns", "onset_ns", STORE_INT64, STORE_ALWAYS, 0, "", TR(onset_ns), NONE,
	 "Stimulus onset flip on the session's monotonic clock", "ns"},
	{"trigger_ns", NULL, STORE_INT64, STORE_IF_ZERO, 0, "", TR(trigger_ns), NONE,
	 "When the onset trigger code's write call returned (CLOCK_MONOTONIC)", "ns"},
	{"offset_ns", NULL, STORE_INT64, STORE_ALWAYS, 0, "", TR(offset_ns), NONE,
	 "Stimulus offset flip on the session's monotonic clock", "ns"},
	{"start_ns", NULL, STORE_INT64, STORE_ALWAYS, 0, "", TR(start_ns), NONE,
	 "First flip of the trial on the session's monotonic clock", "ns"},
	{"staircase", "staircase", STORE_INT, STORE_IF_NEG, 0, "", TR(staircase), NONE,
	 "Adaptive staircase that chose the level, from 0 (missing for fixed levels)", NULL},
	{"level_requested", NULL, STORE_REAL, STORE_IF_UNFLAGGED, 0, "", TR(level_requested),
	 TR(has_level_requested), "Level the adaptive rule asked for before snapping to an image",
	 "arbitrary"},
	{"repeat_of", "repeat_of", STORE_INT, STORE_IF_NEG, STORE_COL_ONE_BASED, "", TR(repeat_of),
	 NONE, "Trial number (from 1) this trial repeats after a timing fault", NULL},
#ifdef TACHIST_TEST_COLUMN
	{"test_column", "test_column", STORE_INT, STORE_ALWAYS, 0, "", TR(test_column), NONE,
	 "A column of the column-table test build", NULL},
#endif
};

const struct store_table store_sessions_table = {
	"sessions", session_cols, sizeof session_cols / sizeof session_cols[0], "", "",
};

const struct store_table store_trials_table = {
	"trials", trial_cols, sizeof trial_cols / sizeof trial_cols[0],
	", PRIMARY KEY (session_id, trial)", "WITHOUT ROWID",
};

static const char *const status_words[STORE_NSTATUS] = {
	"running", "complete", "aborted", "interrupted", "ended-early",
};

const char *store_status_name(enum store_status st)
{
	return (unsigned)st < STORE_NSTATUS ? status_words[st] : "?";
}

int store_status_parse(const char *name, enum store_status *out)
{
	for (int i = 0; i < STORE_NSTATUS; i++)
		if (name && !strcmp(name, status_words[i])) {
			*out = (enum store_status)i;
			return 0;
		}
	return -1;
}

const char *store_type_sql(enum store_type t, bool postgres)
{
	switch (t) {
	case STORE_INT:
		return postgres ? "integer" : "INTEGER";
	case STORE_INT64:
	case STORE_SEED:
		return postgres ? "bigint" : "INTEGER";
	case STORE_BOOL:
		return postgres ? "boolean" : "INTEGER";
	case STORE_REAL:
		return postgres ? "double precision" : "REAL";
	case STORE_TIME:
		return postgres ? "timestamptz" : "TEXT";
	case STORE_UUID:
		return postgres ? "uuid" : "TEXT";
	case STORE_JSON:
		return postgres ? "jsonb" : "TEXT";
	case STORE_TEXT:
	case STORE_HASH:
	case STORE_STATUS:
		break;
	}
	return postgres ? "text" : "TEXT";
}

void store_column_value(const struct store_column *c, const void *row, struct store_value *v)
{
	memset(v, 0, sizeof *v);
	if (c->off == STORE_NO_FIELD) {
		v->missing = true;
		return;
	}
	const char *p = (const char *)row + c->off;
	switch (c->type) {
	case STORE_TEXT:
	case STORE_TIME:
		memcpy(&v->s, p, sizeof v->s);
		v->missing = !v->s;
		break;
	case STORE_UUID:
	case STORE_HASH:
		v->s = p;
		v->missing = !p[0];
		break;
	case STORE_INT: {
		int x;
		memcpy(&x, p, sizeof x);
		v->i = x;
		v->r = x;
		break;
	}
	case STORE_INT64:
		memcpy(&v->i, p, sizeof v->i);
		v->r = (double)v->i;
		break;
	case STORE_REAL:
		memcpy(&v->r, p, sizeof v->r);
		break;
	case STORE_BOOL: {
		bool b;
		memcpy(&b, p, sizeof b);
		v->i = b;
		v->r = b;
		break;
	}
	case STORE_SEED: {
		uint64_t u;
		memcpy(&u, p, sizeof u);
		v->i = (int64_t)u;   /* SQLite keeps the same 64 bits in its signed integer */
		break;
	}
	case STORE_STATUS: {
		enum store_status st;
		memcpy(&st, p, sizeof st);
		v->s = store_status_name(st);
		break;
	}
	case STORE_JSON:
		v->missing = true;
		return;
	}
	switch (c->missing) {
	case STORE_ALWAYS:
		break;
	case STORE_IF_NEG:
		v->missing = v->i < 0;
		break;
	case STORE_IF_ZERO:
		if (c->type == STORE_REAL)
			v->missing = !(v->r > 0);
		else if (c->type == STORE_INT || c->type == STORE_INT64)
			v->missing = v->i == 0;
		break;
	case STORE_IF_UNFLAGGED: {
		bool has;
		memcpy(&has, (const char *)row + c->has_off, sizeof has);
		v->missing = !has;
		break;
	}
	}
}

void store_trial_from_record(struct store_trial *out, const char *session_id,
			     const struct trial_record *t, const struct protocol *p,
			     const struct stimlist *l)
{
	memset(out, 0, sizeof *out);
	const struct stim *item = (l && t->stim >= 0 && (size_t)t->stim < l->n)
					  ? &l->items[t->stim] : NULL;
	const struct protocol_block *blk = (p && t->block >= 0 && (size_t)t->block < p->nblocks)
						   ? &p->blocks[t->block] : NULL;
	const char *category = item ? item->category : NULL;
	if (!category && p && t->choice >= 0 && (size_t)t->choice < p->nchoices)
		category = p->choices[t->choice].category;
	snprintf(out->session_id, sizeof out->session_id, "%s", session_id);
	out->block = t->block;
	out->block_name = blk ? blk->name : NULL;
	out->practice = blk && blk->practice;
	out->block_trial = t->block_trial;
	out->trial = t->trial;
	out->stim = t->stim >= 0 ? t->stim : -1;
	out->image = item ? item->image : NULL;
	out->category = category;
	out->choice = t->choice >= 0 ? t->choice : -1;
	out->has_level = t->has_level;
	out->level = t->level;
	out->source = item ? item->source : NULL;
	out->nlabels = item ? l->nlabels : 0;
	out->label_names = item ? (const char *const *)l->label_names : NULL;
	out->label_values = item ? (const char *const *)item->labels : NULL;
	out->response_key = t->response_key[0] ? t->response_key : NULL;
	out->response = t->response >= 0 ? t->response : -1;
	out->response_category = (p && t->response >= 0 && (size_t)t->response < p->nchoices)
					 ? p->choices[t->response].category : NULL;
	out->correct = t->correct >= 0 ? t->correct : -1;
	out->has_rt = t->has_rt;
	out->rt_ms = t->rt_ms;
	out->rt_clock = t->rt_clock ? t->rt_clock : "frame";
	out->timed_out = t->timed_out;
	out->anticipation = t->anticipation;
	out->key_sdl_ms = t->key_sdl_ms;
	out->frames_planned = t->frames_planned;
	out->frames_actual = t->frames_actual;
	out->dropped_frames = t->dropped_frames;
	out->timing_ok = t->timing_ok;
	out->onset_ns = t->onset_ns;
	out->trigger_ns = t->trigger_ns;
	out->offset_ns = t->offset_ns;
	out->start_ns = t->start_ns;
	out->staircase = t->staircase >= 0 ? t->staircase : -1;
	out->has_level_requested = t->staircase >= 0;
	out->level_requested = t->level_requested;
	out->repeat_of = t->repeat_of >= 0 ? t->repeat_of : -1;
#ifdef TACHIST_TEST_COLUMN
	out->test_column = 7 * t->trial + 3;
#endif
}
