/* export — writes a session's trials (or its subject's, or every session's) as CSV, TSV, JSON or a
 * BIDS folder, to a path the experimenter types. The path is checked in place (empty, too long, a
 * folder that does not exist) and an existing file is replaced only after a yes. Tables are
 * written to "PATH.part" and renamed when complete, so a failed export never leaves half a file
 * under the real name. The work is the export module's (the same as `tachist export`). */
#include "console.h"

#include <curses.h>
#include <errno.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "diag.h"
#include "export.h"
#include "store.h"

enum row { ROW_FORMAT, ROW_SCOPE, ROW_PATH, ROW_COUNT };
enum scope { SCOPE_SESSION, SCOPE_SUBJECT, SCOPE_ALL, SCOPE_COUNT };

struct exporter {
	char session_id[37];
	char subject[65];
	size_t ntrials;
	enum export_format format;
	enum scope scope;
	struct console_field path;
	bool path_edited;
	int row;
	char done[CONSOLE_FIELD_MAX + 100];
};

static const struct console_key export_keys[] = {
	{"Up/Down", "move"},
	{"Left/Right", "choose"},
	{"Enter", "edit path"},
	{"w", "write"},
};

static const char *const format_names[] = {
	[EXPORT_CSV] = "CSV (comma-separated, RFC 4180)",
	[EXPORT_TSV] = "TSV (tab-separated)",
	[EXPORT_JSON] = "JSON (sessions and one object per trial)",
	[EXPORT_BIDS] = "BIDS behavioural dataset (a folder)",
};
static const char *const format_ext[] = {
	[EXPORT_CSV] = ".csv", [EXPORT_TSV] = ".tsv", [EXPORT_JSON] = ".json", [EXPORT_BIDS] = "-bids",
};
static const char *const scope_names[SCOPE_COUNT] = {
	[SCOPE_SESSION] = "this session",
	[SCOPE_SUBJECT] = "every session of this subject",
	[SCOPE_ALL] = "every session in the database",
};

static void default_path(struct exporter *e)
{
	char buf[200];
	if (e->scope == SCOPE_ALL)
		snprintf(buf, sizeof buf, "tachist-all%s", format_ext[e->format]);
	else if (e->scope == SCOPE_SUBJECT)
		snprintf(buf, sizeof buf, "%s%s", e->subject, format_ext[e->format]);
	else
		snprintf(buf, sizeof buf, "%s-%.8s%s", e->subject, e->session_id, format_ext[e->format]);
	console_field_set(&e->path, buf);
}

static void export_draw(struct console *c, void *st)
{
	struct exporter *e = st;
	int y = console_body_top(), vx = 14, w = COLS - vx - 2;
	console_putf(c, y, 2, COLS - 4, CONSOLE_HEAD, "Export session %.8s (subject %s, %zu trials)",
		     e->session_id, e->subject, e->ntrials);
	y += 2;
	static const char *const labels[ROW_COUNT] = {"Format", "Trials of", "Path"};
	for (int row = 0; row < ROW_COUNT; row++) {
		bool f = e->row == row;
		console_put(c, y, 2, vx - 2, f ? CONSOLE_HEAD : CONSOLE_DIM, labels[row]);
		if (row == ROW_PATH) {
			console_field_draw(c, &e->path, y, vx, w, f);
			if (!e->path.msg[0])
				console_put(c, y + 1, vx, w, CONSOLE_DIM,
					    e->format == EXPORT_BIDS ? "a folder; made when missing"
								     : "a file; its folder must exist");
			y += 2;
			continue;
		}
		char buf[120];
		snprintf(buf, sizeof buf, "%s %s %s", console_utf8(c) ? "\u25c2" : "<",
			 row == ROW_FORMAT ? format_names[e->format] : scope_names[e->scope],
			 console_utf8(c) ? "\u25b8" : ">");
		console_put(c, y, vx, w, f ? CONSOLE_PICK : CONSOLE_PLAIN, buf);
		y += 2;
	}
	if (e->done[0])
		console_wrap(c, y + 1, 2, COLS - 4, 3, CONSOLE_OK, e->done);
}

static void write_now(struct console *c, struct exporter *e)
{
	const char *path = e->path.text;
	const char *session = e->scope == SCOPE_SESSION ? e->session_id : NULL;
	const char *subject = e->scope == SCOPE_SUBJECT ? e->subject : NULL;
	struct store *db = NULL;
	char *err = NULL;
	struct export_stats stats;
	memset(&stats, 0, sizeof stats);
	e->done[0] = '\0';
	if (store_open(console_options(c)->db_path, &db, &err) != 0)
		goto fail;
	if (e->format == EXPORT_BIDS) {
		if (export_bids(db, session, subject, path, &stats, &err) != 0)
			goto fail;
		snprintf(e->done, sizeof e->done, "Wrote a BIDS dataset of %zu trials (%zu files) to %s",
			 stats.rows, stats.files, path);
	} else {
		char *part = xasprintf("%s.part", path);
		FILE *out = fopen(part, "w");
		if (!out) {
			err = xasprintf("cannot write %s: %s", part, strerror(errno));
			free(part);
			goto fail;
		}
		int rc = export_table(db, e->format, session, subject, out, &stats, &err);
		if (fclose(out) != 0 && rc == 0) {
			rc = -1;
			err = xasprintf("cannot finish %s: %s", part, strerror(errno));
		}
		if (rc == 0 && rename(part, path) != 0) {
			rc = -1;
			err = xasprintf("cannot rename %s to %s: %s", part, path, strerror(errno));
		}
		if (rc != 0) {
			remove(part);
			free(part);
			goto fail;
		}
		free(part);
		snprintf(e->done, sizeof e->done, "Wrote %zu trials of %zu session%s to %s", stats.rows,
			 stats.sessions, stats.sessions == 1 ? "" : "s", path);
	}
	console_say(c, CONSOLE_OK, "%s", e->done);
	store_close(db);
	return;
fail:
	console_say(c, CONSOLE_BAD, "export failed: %s", err ? err : "unknown error");
	free(err);
	store_close(db);
}

static void answer_replace(struct console *c, void *ud, bool yes)
{
	if (yes)
		write_now(c, ud);
	else
		console_say(c, CONSOLE_DIM, "nothing written; change the path or answer yes");
}

static void try_write(struct console *c, struct exporter *e)
{
	struct console_field *f = &e->path;
	if (console_field_check(f, f->text, f->msg, sizeof f->msg) != 0) {
		e->row = ROW_PATH;
		console_say(c, CONSOLE_BAD, "path: %s", f->msg);
		return;
	}
	struct stat sb;
	if (stat(f->text, &sb) == 0) {
		if (e->format != EXPORT_BIDS && S_ISDIR(sb.st_mode)) {
			snprintf(f->msg, sizeof f->msg, "that is a folder; name a file");
			e->row = ROW_PATH;
			return;
		}
		if (e->format == EXPORT_BIDS && !S_ISDIR(sb.st_mode)) {
			snprintf(f->msg, sizeof f->msg, "that is a file; a BIDS dataset needs a folder");
			e->row = ROW_PATH;
			return;
		}
		char q[CONSOLE_FIELD_MAX + 80];
		snprintf(q, sizeof q, "%s exists. Replace what is there?", f->text);
		console_confirm(c, q, answer_replace, e);
		return;
	}
	write_now(c, e);
}

static bool export_key(struct console *c, void *st, int ch)
{
	struct exporter *e = st;
	struct console_screen *me = console_top(c);
	if (e->path.editing) {
		enum console_field_result r = console_field_key(&e->path, ch);
		if (r != CONSOLE_FIELD_GOING)
			me->editing = false;
		if (r == CONSOLE_FIELD_DONE) {
			e->path_edited = true;
			try_write(c, e);
		}
		return true;
	}
	if (console_form_move(&e->row, ROW_COUNT, ch))
		return true;
	switch (ch) {
	case KEY_LEFT:
	case KEY_RIGHT: {
		int d = ch == KEY_RIGHT ? 1 : -1;
		if (e->row == ROW_FORMAT)
			e->format = (enum export_format)((e->format + 4 + d) % 4);
		else if (e->row == ROW_SCOPE)
			e->scope = (enum scope)((e->scope + SCOPE_COUNT + d) % SCOPE_COUNT);
		else
			return true;
		if (!e->path_edited)
			default_path(e);
		e->done[0] = '\0';
		return true;
	}
	case '\n':
	case '\r':
	case KEY_ENTER:
		if (e->row != ROW_PATH)
			return export_key(c, st, KEY_RIGHT);
		console_field_begin(&e->path);
		me->editing = true;
		return true;
	case 'w':
	case 'W':
		try_write(c, e);
		return true;
	default:
		return false;
	}
}

void console_export_push(struct console *c, const char *session_id)
{
	struct exporter *e = xcalloc(1, sizeof *e);
	snprintf(e->session_id, sizeof e->session_id, "%s", session_id);
	struct store *db = NULL;
	char *err = NULL;
	struct store_session ss;
	memset(&ss, 0, sizeof ss);
	if (store_open(console_options(c)->db_path, &db, &err) == 0 &&
	    store_session_get(db, session_id, &ss, &err) == 0) {
		snprintf(e->subject, sizeof e->subject, "%s", ss.subject ? ss.subject : "");
		e->ntrials = ss.ntrials;
	}
	store_session_clear(&ss);
	store_close(db);
	free(err);
	console_field_init(&e->path, "path", CONSOLE_OUTPATH, 400, "");
	default_path(e);
	e->row = ROW_PATH;
	struct console_screen s = {
		.title = "export",
		.keys = export_keys,
		.nkeys = sizeof export_keys / sizeof export_keys[0],
		.draw = export_draw,
		.key = export_key,
		.destroy = free,
		.st = e,
	};
	console_push(c, &s);
}
