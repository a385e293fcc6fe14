/* rigedit — the rig profile as numbers the experimenter can change: screen size in cm and px,
 * viewing distance, refresh rate, with pixels per degree and the protocol's stimulus size in
 * pixels (and the degrees those pixels really subtend) worked out as the numbers change. Saving
 * writes a rig INI (the keys of docs/files.md "Rig profile", validated by rig_parse first, so a
 * saved file always loads; every section, key and comment the form does not edit is kept, such as
 * [luminance]) atomically to a path the experimenter types: the profile being edited, or for a new
 * one (or the demo's) the profile the program looks
 * for first ($XDG_CONFIG_HOME/tachist/rig.ini), and hands the path back to the set-up form. */
#include "console.h"

#include <curses.h>
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "diag.h"
#include "geom.h"
#include "ini_edit.h"
#include "rig_file.h"

enum row { ROW_NAME, ROW_WCM, ROW_HCM, ROW_WPX, ROW_HPX, ROW_DIST, ROW_HZ, ROW_DISPLAY,
	   ROW_CORNER, ROW_MARKER, ROW_POOL, ROW_PATH, ROW_COUNT };

struct rigedit {
	struct console_field f[ROW_COUNT];   /* ROW_CORNER is a choice, not a field */
	int row;
	int corner;                 /* enum rig_corner */
	struct rig base;            /* the profile as loaded */
	bool have_base;
	bool from_demo;             /* the base is the demo rig: its other lines are not kept */
	double size_deg;            /* the protocol's stimulus size, 0 when unknown */
	void (*saved)(struct console *c, void *ud, const char *path);
	void *ud;
	char problem[400];
	char *dflt;                 /* the profile path the program looks for first */
};

static const struct console_key rig_keys[] = {
	{"s", "save and use"},
	{"Enter", "edit"},
	{"Up/Down", "move"},
	{"Left/Right", "corner"},
};

static const char *const labels[ROW_COUNT] = {
	"Name", "Width (cm)", "Height (cm)", "Width (px)", "Height (px)", "Distance (cm)",
	"Refresh (Hz)", "Display index", "Marker corner", "Marker (px)",
	"Send finished sessions to", "Save to",
};

static const char *const corners[] = {"none", "top-left", "top-right", "bottom-left",
				      "bottom-right"};
#define NCORNERS (sizeof corners / sizeof corners[0])

/* The rig INI text the fields describe (malloc'd): the loaded profile's text with the keys of
 * [screen] and [marker] this form edits set (an empty optional field removes its key, so the
 * parser's default applies), every other line, section and comment kept as it was. Without a
 * loaded profile the text starts from a comment line. */
static char *rig_text(const struct rigedit *e)
{
	const char *name = e->f[ROW_NAME].len ? e->f[ROW_NAME].text : "bench";
	const char *disp = e->f[ROW_DISPLAY].len ? e->f[ROW_DISPLAY].text : NULL;
	const char *mpx = e->f[ROW_MARKER].len ? e->f[ROW_MARKER].text : NULL;
	const char *base = e->have_base && e->base.text && !e->from_demo ? e->base.text :
			   "; Rig profile written by the tachist console.\n";
	const char *const skeys[] = {"name", "width_cm", "height_cm", "width_px", "height_px",
				     "distance_cm", "refresh_hz", "display"};
	const char *const svals[] = {name, e->f[ROW_WCM].text, e->f[ROW_HCM].text,
				     e->f[ROW_WPX].text, e->f[ROW_HPX].text, e->f[ROW_DIST].text,
				     e->f[ROW_HZ].text, disp};
	const char *const mkeys[] = {"corner", "size_px"};
	const char *const mvals[] = {
		corners[e->corner >= 0 && (size_t)e->corner < NCORNERS ? e->corner : 0], mpx};
	char *screen = ini_edit_set_keys(base, "screen", skeys, svals, 8);
	char *text = ini_edit_set_keys(screen, "marker", mkeys, mvals, 2);
	free(screen);
	/* [pool] server: set, or removed when the field is emptied. */
	if (e->f[ROW_POOL].len || (e->have_base && !e->from_demo && e->base.pool_server)) {
		const char *pkeys[] = {"server"};
		const char *pvals[] = {e->f[ROW_POOL].len ? e->f[ROW_POOL].text : NULL};
		char *pooled = ini_edit_set_keys(text, "pool", pkeys, pvals, 1);
		free(text);
		text = pooled;
	}
	return text;
}

/* Parses the fields as a rig; fills R (cleared by the caller) or PROBLEM. */
static int as_rig(struct rigedit *e, struct rig *r)
{
	char *text = rig_text(e);
	struct diag_list d;
	diag_init(&d);
	int rc = rig_parse("(rig being edited)", text, r, &d);
	e->problem[0] = '\0';
	/* A name the INI reader would cut (a comment mark) is refused rather than changed. */
	if (rc == 0 && e->f[ROW_NAME].len && (!r->name || strcmp(r->name, e->f[ROW_NAME].text))) {
		snprintf(e->problem, sizeof e->problem, "the name may not hold ';' or '#' after a "
			 "space, nor begin or end with spaces");
		rc = -1;
	}
	for (size_t i = 0; i < d.n; i++)
		if (d.v[i].level == DIAG_ERROR) {
			snprintf(e->problem, sizeof e->problem, "%s", d.v[i].msg);
			break;
		}
	diag_clear(&d);
	free(text);
	return rc;
}

static void rig_draw(struct console *c, void *st)
{
	struct rigedit *e = st;
	int y = console_body_top(), vx = 18, w = COLS - vx - 2;
	console_put(c, y, 2, COLS - 4, CONSOLE_HEAD, "The observer's display");
	y += 2;
	const char *msg = NULL;
	for (int row = 0; row < ROW_COUNT; row++) {
		bool f = e->row == row;
		if (row == ROW_PATH)
			y++;
		if (row == ROW_POOL) {   /* a long label: the field goes on the next line */
			console_put(c, ++y, 0, 2, CONSOLE_HEAD, f ? (console_utf8(c) ? "\u25b8" : ">") : "");
			int x = 2 + console_put(c, y, 2, COLS - 4, f ? CONSOLE_HEAD : CONSOLE_DIM,
						labels[row]);
			console_put(c, y++, x + 2, COLS - x - 4, CONSOLE_DIM,
				    "a PostgreSQL server: postgresql://HOST/DB, no password");
		} else {
			console_put(c, y, 0, 2, CONSOLE_HEAD, f ? (console_utf8(c) ? "\u25b8" : ">") : "");
			console_put(c, y, 2, vx - 2, f ? CONSOLE_HEAD : CONSOLE_DIM, labels[row]);
		}
		if (row == ROW_CORNER) {
			char buf[80];
			snprintf(buf, sizeof buf, "%s %s %s", console_utf8(c) ? "\u25c2" : "<",
				 corners[e->corner], console_utf8(c) ? "\u25b8" : ">");
			console_put(c, y++, vx, w, f ? CONSOLE_PICK : CONSOLE_PLAIN, buf);
			continue;
		}
		/* One row per field; the focused field's message goes under the list. */
		struct console_field shown = e->f[row];
		if (shown.msg[0] && f)
			msg = e->f[row].msg;
		shown.msg[0] = '\0';
		console_field_draw(c, &shown, y, vx, row == ROW_PATH || row == ROW_NAME ||
				   row == ROW_POOL ? w : 12, f);
		if (row == ROW_DISPLAY && !f)
			console_put(c, y, vx + 14, w - 14, CONSOLE_DIM, "0 = the first display");
		if (row == ROW_MARKER && !f)
			console_put(c, y, vx + 14, w - 14, CONSOLE_DIM,
				    "photodiode patch, drawn with each stimulus");
		y++;
	}
	if (msg)
		console_put(c, y, vx, w, CONSOLE_BAD, msg);
	y++;
	struct rig r;
	memset(&r, 0, sizeof r);
	if (as_rig(e, &r) == 0) {
		double deg1 = 0;
		console_putf(c, y++, 2, COLS - 4, CONSOLE_OK, "%.2f px per degree at the centre of the "
			     "screen; one frame lasts %.3f ms", geom_px_per_deg(&r), 1000.0 / r.refresh_hz);
		if (e->size_deg > 0) {
			int px = geom_deg_to_px(&r, e->size_deg, &deg1);
			console_putf(c, y++, 2, COLS - 4, CONSOLE_OK,
				     "the protocol's stimulus of %.2f deg is %d px, which subtends %.3f deg",
				     e->size_deg, px, deg1);
		}
	} else {
		console_wrap(c, y, 2, COLS - 4, 2, CONSOLE_BAD, e->problem);
	}
	rig_clear(&r);
}

/* Makes the folders of the default profile path (config folder, then tachist/). */
static void make_default_folder(const char *path)
{
	char *dir = xstrdup(path);
	char *slash = strrchr(dir, '/');
	if (slash) {
		*slash = '\0';
		char *parent = strrchr(dir, '/');
		if (parent && parent != dir) {
			*parent = '\0';
			mkdir(dir, 0755);
			*parent = '/';
		}
		mkdir(dir, 0755);
	}
	free(dir);
}

static void save(struct console *c, struct rigedit *e)
{
	if (!strcmp(e->f[ROW_PATH].text, e->dflt))
		make_default_folder(e->dflt);
	for (int row = 0; row < ROW_COUNT; row++) {
		struct console_field *f = &e->f[row];
		bool optional = row == ROW_NAME || row == ROW_DISPLAY || row == ROW_MARKER ||
				row == ROW_POOL;
		if (row == ROW_CORNER || (optional && !f->len))
			continue;
		if (console_field_check(f, f->text, f->msg, sizeof f->msg) != 0) {
			e->row = row;
			return;
		}
	}
	struct rig r;
	memset(&r, 0, sizeof r);
	if (as_rig(e, &r) != 0) {
		console_say(c, CONSOLE_BAD, "not saved: %s", e->problem);
		rig_clear(&r);
		return;
	}
	rig_clear(&r);
	char *text = rig_text(e);
	char err[600];
	const char *path = e->f[ROW_PATH].text;
	if (ini_edit_replace_file(path, text, err, sizeof err) != 0) {
		console_say(c, CONSOLE_BAD, "%s", err);
		free(text);
		return;
	}
	free(text);
	char *copy = xstrdup(path);
	void (*saved)(struct console *, void *, const char *) = e->saved;
	void *ud = e->ud;
	console_pop(c);
	if (saved)
		saved(c, ud, copy);
	console_say(c, CONSOLE_OK, "rig saved to %s", copy);
	free(copy);
}

static bool rig_key(struct console *c, void *st, int ch)
{
	struct rigedit *e = st;
	struct console_screen *me = console_top(c);
	struct console_field *f = &e->f[e->row];
	if (e->row != ROW_CORNER && f->editing) {
		if (console_field_key(f, ch) != CONSOLE_FIELD_GOING)
			me->editing = false;
		return true;
	}
	if (console_form_move(&e->row, ROW_COUNT, ch))
		return true;
	switch (ch) {
	case KEY_LEFT:
	case KEY_RIGHT:
		if (e->row == ROW_CORNER)
			e->corner = (e->corner + (int)NCORNERS + (ch == KEY_RIGHT ? 1 : -1)) %
				    (int)NCORNERS;
		return true;
	case '\n':
	case '\r':
	case KEY_ENTER:
		if (e->row == ROW_CORNER)
			return rig_key(c, st, KEY_RIGHT);
		console_field_begin(f);
		me->editing = true;
		return true;
	case 's':
	case 'S':
		save(c, e);
		return true;
	default:
		return false;
	}
}

static void rig_destroy(void *st)
{
	struct rigedit *e = st;
	rig_clear(&e->base);
	free(e->dflt);
	free(e);
}

static void number_field(struct console_field *f, const char *label, enum console_field_kind k,
			 double v, double min, double max)
{
	char buf[32] = "";
	if (v > 0)
		snprintf(buf, sizeof buf, k == CONSOLE_INTEGER ? "%.0f" : "%g", v);
	console_field_init(f, label, k, 10, buf);
	f->min = min;
	f->max = max;
}

void console_rig_push(struct console *c, const char *path, double size_deg,
		      void (*saved)(struct console *c, void *ud, const char *path), void *ud)
{
	struct rigedit *e = xcalloc(1, sizeof *e);
	e->size_deg = size_deg;
	e->saved = saved;
	e->ud = ud;
	struct diag_list d;
	diag_init(&d);
	if (path && *path && rig_load(path, &e->base, &d) == 0)
		e->have_base = true;
	diag_clear(&d);
	const struct rig *b = &e->base;
	/* Ranges as the rig parser accepts them (docs/files.md "Rig profile"). */
	number_field(&e->f[ROW_WCM], "width", CONSOLE_NUMBER, b->width_cm, 0.1, 1000);
	number_field(&e->f[ROW_HCM], "height", CONSOLE_NUMBER, b->height_cm, 0.1, 1000);
	number_field(&e->f[ROW_WPX], "width", CONSOLE_INTEGER, b->width_px, 1, 100000);
	number_field(&e->f[ROW_HPX], "height", CONSOLE_INTEGER, b->height_px, 1, 100000);
	number_field(&e->f[ROW_DIST], "distance", CONSOLE_NUMBER, b->distance_cm, 0.1, 10000);
	number_field(&e->f[ROW_HZ], "refresh", CONSOLE_NUMBER, b->refresh_hz, 20, 1000);
	/* Starting from the demo rig, the new profile gets a name of its own, not the demo's. */
	const struct console_options *o = console_options(c);
	bool demo = o->rig_is_fallback && o->rig_path && path && !strcmp(o->rig_path, path);
	e->from_demo = demo;
	console_field_init(&e->f[ROW_NAME], "name", CONSOLE_TEXT, 60,
			   e->have_base && b->name && !demo ? b->name : "");
	char num[16];
	snprintf(num, sizeof num, "%d", e->have_base ? b->display : 0);
	console_field_init(&e->f[ROW_DISPLAY], "display index", CONSOLE_INTEGER, 2, num);
	e->f[ROW_DISPLAY].min = 0;
	e->f[ROW_DISPLAY].max = 15;
	snprintf(num, sizeof num, "%d", e->have_base && b->marker_px > 0 ? b->marker_px : 40);
	console_field_init(&e->f[ROW_MARKER], "marker size", CONSOLE_INTEGER, 3, num);
	e->f[ROW_MARKER].min = 1;
	e->f[ROW_MARKER].max = 500;
	console_field_init(&e->f[ROW_POOL], "server", CONSOLE_TEXT, 400,
			   e->have_base && !demo && b->pool_server ? b->pool_server : "");
	e->corner = e->have_base ? (int)b->marker_corner : RIG_MARKER_NONE;
	const char *xdg = getenv("XDG_CONFIG_HOME"), *home = getenv("HOME");
	char *dflt = xdg && *xdg ? xasprintf("%s/tachist/rig.ini", xdg)
		   : home && *home ? xasprintf("%s/.config/tachist/rig.ini", home)
				   : xstrdup("rig.ini");
	/* A profile being edited is saved back where it came from; a new one (or the demo's) goes
	 * where the program looks first. */
	console_field_init(&e->f[ROW_PATH], "path", CONSOLE_OUTPATH, 400,
			   e->have_base && !demo ? path : dflt);
	e->dflt = dflt;
	struct console_screen s = {
		.title = "rig",
		.keys = rig_keys,
		.nkeys = sizeof rig_keys / sizeof rig_keys[0],
		.draw = rig_draw,
		.key = rig_key,
		.destroy = rig_destroy,
		.st = e,
	};
	console_push(c, &s);
}
