/* sessions — every session in the database with its subject, protocol, start, status and trial
 * count; open its results, export it, or resume one that was interrupted or ended early (the
 * set-up form opens with the stored protocol, subject and seed). Newest first. */
#include "console.h"

#include <curses.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "diag.h"
#include "store.h"

struct sessions {
	struct store_session *v;
	size_t n;
	size_t sel, top;
	int ticks;
	char error[300];
};

static const struct console_key sessions_keys[] = {
	{"Up/Down", "choose"},
	{"Enter", "results"},
	{"u", "resume"},
	{"x", "export"},
};

static void load(struct console *c, struct sessions *s)
{
	store_sessions_free(s->v, s->n);
	s->v = NULL;
	s->n = 0;
	s->error[0] = '\0';
	struct store *db = NULL;
	char *err = NULL;
	if (store_open_existing(console_options(c)->db_path, &db, &err) != 0 ||
	    store_sessions_list(db, NULL, &s->v, &s->n, &err) != 0) {
		snprintf(s->error, sizeof s->error, "%s", err ? err : "the database cannot be read");
		s->v = NULL;
		s->n = 0;
	}
	store_close(db);
	free(err);
	if (s->sel >= s->n)
		s->sel = s->n ? s->n - 1 : 0;
}

/* Row I on screen is session N-1-I (newest first). */
static struct store_session *row(struct sessions *s, size_t i)
{
	return &s->v[s->n - 1 - i];
}

static bool resumable(const struct store_session *ss)
{
	return ss->status == STORE_INTERRUPTED || ss->status == STORE_ABORTED;
}

static void sessions_draw(struct console *c, void *st)
{
	struct sessions *s = st;
	int y = console_body_top(), w = COLS - 4;
	if (s->error[0]) {
		console_wrap(c, y, 2, w, 4, CONSOLE_BAD, s->error);
		return;
	}
	if (!s->n) {
		console_put(c, y, 2, w, CONSOLE_DIM, "No sessions stored in this database yet.");
		return;
	}
	console_putf(c, y++, 2, w, CONSOLE_HEAD, "%zu session%s", s->n, s->n == 1 ? "" : "s");
	y++;
	console_put(c, y++, 2, w, CONSOLE_DIM,
		    "  session   subject      protocol         started (UTC)      status       trials");
	int rows = LINES - 3 - y;
	if (rows < 1)
		return;
	if (s->sel < s->top)
		s->top = s->sel;
	if (s->sel >= s->top + (size_t)rows)
		s->top = s->sel - (size_t)rows + 1;
	for (size_t i = s->top; i < s->n && y < LINES - 3; i++, y++) {
		const struct store_session *ss = row(s, i);
		char started[20] = "";
		if (ss->started_utc) {
			snprintf(started, sizeof started, "%.16s", ss->started_utc);
			for (char *p = started; *p; p++)
				if (*p == 'T')
					*p = ' ';
		}
		enum console_role role = i == s->sel ? CONSOLE_PICK
				       : ss->status == STORE_INTERRUPTED ? CONSOLE_WARN
				       : ss->status == STORE_ABORTED ? CONSOLE_WARN : CONSOLE_PLAIN;
		console_putf(c, y, 2, w, role, "%s %.8s  %-12.12s %-16.16s %-18s %-12s %6zu",
			     i == s->sel ? ">" : " ", ss->id, ss->subject ? ss->subject : "",
			     ss->protocol_name ? ss->protocol_name : "", started,
			     store_status_name(ss->status), ss->ntrials);
	}
}

static bool sessions_key(struct console *c, void *st, int ch)
{
	struct sessions *s = st;
	switch (ch) {
	case KEY_UP:
		if (s->sel)
			s->sel--;
		return true;
	case KEY_DOWN:
		if (s->sel + 1 < s->n)
			s->sel++;
		return true;
	case '\n':
	case '\r':
	case KEY_ENTER:
		if (s->n)
			console_results_push(c, row(s, s->sel)->id);
		return true;
	case 'u':
	case 'U': {
		if (!s->n)
			return true;
		const struct store_session *ss = row(s, s->sel);
		if (!resumable(ss)) {
			console_say(c, CONSOLE_WARN, "session %.8s is %s; only interrupted or ended "
				    "sessions can be resumed", ss->id, store_status_name(ss->status));
			return true;
		}
		struct console_pres *p = console_presenter(c);
		if (p && console_pres_alive(p)) {
			console_say(c, CONSOLE_WARN, "another session is open; close it first");
			return true;
		}
		console_setup_push(c, ss->id);
		return true;
	}
	case 'x':
	case 'X':
		if (s->n)
			console_export_push(c, row(s, s->sel)->id);
		return true;
	default:
		return false;
	}
}

/* Reloads when the screen comes back to the top (a resumed session may have changed). */
static bool sessions_tick(struct console *c, void *st)
{
	struct sessions *s = st;
	if (++s->ticks % 20)   /* about every two seconds */
		return false;
	load(c, s);
	return true;
}

static void sessions_destroy(void *st)
{
	struct sessions *s = st;
	store_sessions_free(s->v, s->n);
	free(s);
}

void console_sessions_push(struct console *c)
{
	struct sessions *s = xcalloc(1, sizeof *s);
	load(c, s);
	struct console_screen scr = {
		.title = "sessions",
		.keys = sessions_keys,
		.nkeys = sizeof sessions_keys / sizeof sessions_keys[0],
		.draw = sessions_draw,
		.key = sessions_key,
		.tick = sessions_tick,
		.destroy = sessions_destroy,
		.st = s,
	};
	console_push(c, &scr);
}
