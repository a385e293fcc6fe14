/* rig — the rig profile: an INI file (inih through inifile.c) describing the observer's display.
 *
 *   [screen]  name, width_cm, height_cm, width_px, height_px, distance_cm, refresh_hz, display,
 *             max_image_side
 *   [marker]  corner (none|top-left|top-right|bottom-left|bottom-right), size_px
 *   [luminance] the photometer calibration, read by rig_lum.c
 *   [input]   device (the response keyboard: an event device path or a device name)
 *   [trigger] port (a serial device for trigger codes), baud
 *   [pool]    server (a PostgreSQL server the console sends finished sessions to), schema
 *
 * A table of keys (type, range, place in struct rig) drives the parse; every problem becomes a
 * FILE:LINE diagnostic and parsing goes on. Documented in docs/files.md ("Rig profile"). */
#include "rig_file.h"

#include <ctype.h>
#include <errno.h>
#include <math.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdlib.h>
#include <string.h>

#include "image.h"
#include "decimal.h"
#include "inifile.h"
#include "rig_lum.h"
#include "store_pg.h"
#include "suggest.h"

enum rig_type { RT_NUMBER, RT_INT, RT_TEXT, RT_CORNER };

struct rig_key {
	const char *section, *name;
	enum rig_type type;
	size_t offset;
	double min, max;
	int min_open, required;
	const char *unit;
};

/* Rows of keys[] that the cross-checks below refer to. */
enum { K_CORNER = 8, K_SIZE_PX = 9 };

static const struct rig_key keys[] = {
	{"screen", "name", RT_TEXT, offsetof(struct rig, name), 0, 0, 0, 0, NULL},
	{"screen", "width_cm", RT_NUMBER, offsetof(struct rig, width_cm), 0, 1000, 1, 1, "cm"},
	{"screen", "height_cm", RT_NUMBER, offsetof(struct rig, height_cm), 0, 1000, 1, 1, "cm"},
	{"screen", "width_px", RT_INT, offsetof(struct rig, width_px), 1, 32768, 0, 1, "px"},
	{"screen", "height_px", RT_INT, offsetof(struct rig, height_px), 1, 32768, 0, 1, "px"},
	{"screen", "distance_cm", RT_NUMBER, offsetof(struct rig, distance_cm), 0, 10000, 1, 1, "cm"},
	{"screen", "refresh_hz", RT_NUMBER, offsetof(struct rig, refresh_hz), 20, 1000, 0, 1, "Hz"},
	{"screen", "display", RT_INT, offsetof(struct rig, display), 0, 15, 0, 0, NULL},
	{"marker", "corner", RT_CORNER, offsetof(struct rig, marker_corner), 0, 0, 0, 0, NULL},
	{"marker", "size_px", RT_INT, offsetof(struct rig, marker_px), 1, 500, 0, 0, "px"},
	{"screen", "max_image_side", RT_INT, offsetof(struct rig, max_image_side), 16, 65535, 0, 0, "px"},
	{"input", "device", RT_TEXT, offsetof(struct rig, input_device), 0, 0, 0, 0, NULL},
	{"trigger", "port", RT_TEXT, offsetof(struct rig, trigger_port), 0, 0, 0, 0, NULL},
	{"trigger", "baud", RT_INT, offsetof(struct rig, trigger_baud), 1200, 4000000, 0, 0, "baud"},
	{"pool", "server", RT_TEXT, offsetof(struct rig, pool_server), 0, 0, 0, 0, NULL},
	{"pool", "schema", RT_TEXT, offsetof(struct rig, pool_schema), 0, 0, 0, 0, NULL},
};
#define NKEYS (sizeof keys / sizeof keys[0])
_Static_assert(NKEYS > K_SIZE_PX, "keys[] rows K_CORNER and K_SIZE_PX");

static const char *const corners[] = {"none", "top-left", "top-right", "bottom-left",
				      "bottom-right"};
static const char *const section_names[] = {"screen", "marker", "luminance", "input", "trigger",
						    "pool"};
#define NSECTIONS (sizeof section_names / sizeof section_names[0])

struct rig_ctx {
	struct rig *r;
	const char *file;
	struct diag_list *d;
	const char *section;       /* "screen", "marker" or NULL (unknown, keys ignored) */
	int outside;               /* before any header */
	int section_line[NSECTIONS];
	struct rig_lum_parse *lum;   /* the [luminance] section being read (rig_lum.c) */
	int seen[NKEYS];
};

static void err(struct rig_ctx *c, int line, const char *fmt, ...)
	__attribute__((format(printf, 3, 4)));
static void err(struct rig_ctx *c, int line, const char *fmt, ...)
{
	char buf[1024];
	va_list ap;
	va_start(ap, fmt);
	vsnprintf(buf, sizeof buf, fmt, ap);
	va_end(ap);
	diag_add(c->d, DIAG_ERROR, c->file, line, "%s", buf);
}

static void set_value(struct rig_ctx *c, const struct rig_key *k, const char *v, int line)
{
	char *base = (char *)c->r;
	if (!*v) {
		err(c, line, "%s has no value", k->name);
		return;
	}
	if (k->offset == offsetof(struct rig, pool_server)) {
		char *shown = store_pg_shown(v);
		bool has_password = strcmp(shown, v) != 0;
		free(shown);
		if (!store_pg_is_conninfo(v)) {
			err(c, line, "server = %s is not a PostgreSQL server (postgresql://HOST/DB or "
			    "a libpq keyword string such as 'host=HOST dbname=DB')", v);
			return;
		}
		if (has_password) {
			err(c, line, "server must not hold a password (a rig file is not the place "
			    "for one): put it in ~/.pgpass or PGPASSWORD");
			return;
		}
	}
	if (k->offset == offsetof(struct rig, pool_schema) && !store_pg_schema_valid(v)) {
		err(c, line, "schema = %s is not a schema name tachist uses (lower-case letters, "
		    "digits and '_', starting with a letter or '_')", v);
		return;
	}
	if (k->type == RT_TEXT) {
		free(*(char **)(base + k->offset));
		*(char **)(base + k->offset) = xstrdup(v);
		return;
	}
	if (k->type == RT_CORNER) {
		for (size_t i = 0; i < sizeof corners / sizeof corners[0]; i++)
			if (!strcmp(v, corners[i])) {
				*(int *)(base + k->offset) = (int)i;
				return;
			}
		const char *near = suggest_nearest(v, corners, sizeof corners / sizeof corners[0]);
		err(c, line, "corner = %s is not one of none, top-left, top-right, bottom-left, "
		    "bottom-right%s%s%s", v, near ? "; did you mean '" : "", near ? near : "",
		    near ? "'?" : "");
		return;
	}
	char *end;
	errno = 0;
	double x = k->type == RT_INT ? (double)strtol(v, &end, 10) : strtod(v, &end);
	if (*end || errno == ERANGE || !isfinite(x) || !decimal_ok(v)) {
		err(c, line, "%s = %s is not a %s", k->name, v,
		    k->type == RT_INT ? "whole number" : "number");
		return;
	}
	if (x < k->min || x > k->max || (k->min_open && x == k->min)) {
		if (k->min_open)
			err(c, line, "%s = %s is out of range (above %g, up to %g %s)", k->name, v,
			    k->min, k->max, k->unit);
		else
			err(c, line, "%s = %s is out of range (%.15g to %.15g%s%s)", k->name, v, k->min,
			    k->max, k->unit ? " " : "", k->unit ? k->unit : "");
		return;
	}
	if (k->type == RT_INT)
		*(int *)(base + k->offset) = (int)x;
	else
		*(double *)(base + k->offset) = x;
}

static int on_entry(void *user, const char *section, const char *key, const char *value, int line)
{
	struct rig_ctx *c = user;
	if (!section) {   /* a broken header: skip its keys */
		c->outside = 0;
		c->section = NULL;
		return 0;
	}
	if (!key) {
		c->outside = 0;
		c->section = NULL;
		for (size_t i = 0; i < NSECTIONS; i++)
			if (!strcmp(section, section_names[i])) {
				if (c->section_line[i]) {
					err(c, line, "section [%s] appears twice (first on line %d)", section,
					    c->section_line[i]);
					return 0;
				}
				c->section_line[i] = line;
				c->section = section_names[i];
				return 0;
			}
		const char *near = suggest_nearest(section, section_names, NSECTIONS);
		if (near)
			err(c, line, "unknown section [%s]; did you mean [%s]?", section, near);
		else
			err(c, line, "unknown section [%s] (a rig has [screen], [marker], [luminance], [input], [trigger] and [pool])", section);
		return 0;
	}
	if (c->outside) {
		err(c, line, "key '%s' is outside any section (start with [screen])", key);
		return 0;
	}
	if (!c->section)
		return 0;
	if (!strcmp(c->section, "luminance")) {
		if (!c->lum)
			c->lum = rig_lum_parse_new();
		rig_lum_parse_entry(c->lum, c->file, key, value, line, c->d);
		return 0;
	}
	const char *names[NKEYS];
	size_t n = 0;
	for (size_t i = 0; i < NKEYS; i++) {
		if (strcmp(keys[i].section, c->section))
			continue;
		names[n++] = keys[i].name;
		if (strcmp(keys[i].name, key))
			continue;
		if (c->seen[i]) {
			err(c, line, "duplicate key '%s' (first set on line %d)", key, c->seen[i]);
			return 0;
		}
		c->seen[i] = line;
		set_value(c, &keys[i], value, line);
		return 0;
	}
	const char *near = suggest_nearest(key, names, n);
	if (near)
		err(c, line, "unknown key '%s' in [%s]; did you mean '%s'?", key, c->section, near);
	else
		err(c, line, "unknown key '%s' in [%s]", key, c->section);
	return 0;
}

int rig_parse(const char *path, const char *text, struct rig *r, struct diag_list *d)
{
	memset(r, 0, sizeof *r);
	r->path = path ? xstrdup(path) : NULL;
	r->text = xstrdup(text);
	r->marker_px = 40;
	r->trigger_baud = 115200;
	r->max_image_side = (int)IMAGE_MAX_SIDE_DEFAULT;
	size_t errors0 = diag_count(d, DIAG_ERROR);
	struct rig_ctx c = {.r = r, .file = path, .d = d, .outside = 1};
	inifile_parse(path, text, on_entry, &c, d);
	if (!c.section_line[0]) {
		err(&c, 0, "missing section [screen] (it must set width_cm, height_cm, width_px, "
		    "height_px, distance_cm, refresh_hz)");
	} else {
		for (size_t i = 0; i < NKEYS; i++)
			if (keys[i].required && !c.seen[i])
				err(&c, c.section_line[0], "missing required key '%s' in [screen]",
				    keys[i].name);
	}
	if (c.seen[K_SIZE_PX] && !c.seen[K_CORNER])
		diag_add(d, DIAG_WARNING, path, c.seen[K_SIZE_PX], "size_px is ignored unless corner is set");
	if (c.lum) {
		r->lum = rig_lum_parse_finish(c.lum, path, c.section_line[2], d);
		c.lum = NULL;
	}
	int errors = diag_count(d, DIAG_ERROR) > errors0;
	if (!errors && r->marker_corner != RIG_MARKER_NONE &&
	    (r->marker_px * 2 > r->width_px || r->marker_px * 2 > r->height_px))
		err(&c, c.seen[K_SIZE_PX] ? c.seen[K_SIZE_PX] : c.seen[K_CORNER], "marker of %d px does not fit in a corner "
		    "of a %dx%d px screen", r->marker_px, r->width_px, r->height_px);
	if (!errors) {
		double h = r->width_px / r->width_cm, v = r->height_px / r->height_cm;
		if (fabs(h - v) > 0.05 * h)
			diag_add(d, DIAG_WARNING, path, c.section_line[0],
				 "pixels are not square (%.1f px/cm across, %.1f px/cm down): check the "
				 "sizes in cm and px", h, v);
	}
	if (diag_count(d, DIAG_ERROR) > errors0) {
		rig_clear(r);
		return -1;
	}
	return 0;
}

int rig_load(const char *path, struct rig *r, struct diag_list *d)
{
	char *text = inifile_read(path, NULL, d);
	if (!text) {
		memset(r, 0, sizeof *r);
		return -1;
	}
	int rc = rig_parse(path, text, r, d);
	free(text);
	return rc;
}

void rig_clear(struct rig *r)
{
	if (!r)
		return;
	free(r->path);
	free(r->text);
	free(r->name);
	free(r->lum);
	free(r->input_device);
	free(r->trigger_port);
	free(r->pool_server);
	free(r->pool_schema);
	memset(r, 0, sizeof *r);
}
