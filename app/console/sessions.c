/* sessions — every session in the database with its subject, protocol, start, status and trial
 * count; open its results, export it, or resume one that was interrupted or ended early (the
 * set-up form opens with the stored protocol, subject, seed and rig). Newest first.
 *
 * Any session can carry notes (events of kind "note", shown under the list for the chosen
 * session); a session without trials can be deleted after a yes/no question. */
#include "console.h"

#include <curses.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "diag.h"
#include "store.h"

struct sessions {
	struct store_session *v;
	size_t n;
	size_t sel, top;
	int ticks;
	char error[300];
	struct console_field note;   /* the note being typed (editing) */
	char **notes;                /* notes of the chosen session, oldest first */
	size_t nnotes;
	char notes_of[37];           /* session the notes belong to */
};

static const struct console_key sessions_keys[] = {
	{"Enter", "results"},
	{"u", "resume"},
	{"x", "export"},
	{"n", "note"},
	{"d", "delete"},
	{"Up/Down", "choose"},
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

static void free_notes(struct sessions *s)
{
	for (size_t i = 0; i < s->nnotes; i++)
		free(s->notes[i]);
	free(s->notes);
	s->notes = NULL;
	s->nnotes = 0;
	s->notes_of[0] = '\0';
}

/* Reads the notes of the chosen session (when it changed, or FORCE). */
static void load_notes(struct console *c, struct sessions *s, bool force)
{
	if (!s->n) {
		free_notes(s);
		return;
	}
	const char *id = row(s, s->sel)->id;
	if (!force && !strcmp(id, s->notes_of))
		return;
	free_notes(s);
	snprintf(s->notes_of, sizeof s->notes_of, "%s", id);
	struct store *db = NULL;
	struct store_event_row *ev = NULL;
	size_t n = 0;
	if (store_open_existing(console_options(c)->db_path, &db, NULL) == 0 &&
	    store_events_load(db, id, &ev, &n, NULL) == 0)
		for (size_t i = 0; i < n; i++)
			if (!strcmp(ev[i].kind, "note") && ev[i].detail) {
				s->notes = xrealloc(s->notes, (s->nnotes + 1) * sizeof *s->notes);
				s->notes[s->nnotes++] = xstrdup(ev[i].detail);
			}
	store_events_free(ev, n);
	store_close(db);
}

static bool resumable(const struct store_session *ss)
{
	return ss->status == STORE_INTERRUPTED || ss->status == STORE_ABORTED ||
	       ss->status == STORE_ENDED_EARLY;
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
	/* Subject and protocol get 12 and 14 columns at 80; a wider terminal shares what it adds
	 * between the two, as their longest values need. */
	int sw = 12, pw = 14, extra = COLS - CONSOLE_MIN_COLS;
	for (size_t i = 0; i < s->n; i++) {
		const struct store_session *ss = row(s, i);
		int ls = ss->subject ? (int)strlen(ss->subject) : 0;
		int lp = ss->protocol_name ? (int)strlen(ss->protocol_name) : 0;
		if (ls > sw)
			sw = ls < 12 + extra / 2 ? ls : 12 + extra / 2;
		if (lp > pw)
			pw = lp < 14 + extra / 2 ? lp : 14 + extra / 2;
	}
	console_putf(c, y++, 2, w, CONSOLE_DIM,
		     "  session   %-*s %-*s started (UTC)    status      trials", sw, "subject", pw,
		     "protocol");
	/* Under the list: the chosen session's notes (the last ones that fit), or the note being
	 * typed. */
	int note_rows = s->note.editing ? 3 : s->nnotes ? (int)(s->nnotes < 3 ? s->nnotes : 3) + 1
							 : 0;
	int rows = LINES - 3 - y - note_rows;
	if (rows < 1)
		return;
	if (s->sel < s->top)
		s->top = s->sel;
	if (s->sel >= s->top + (size_t)rows)
		s->top = s->sel - (size_t)rows + 1;
	for (size_t i = s->top; i < s->n && y < LINES - 3 - note_rows; i++, y++) {
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
		console_putf(c, y, 2, w, role, "%s %.8s  %-*.*s %-*.*s %-16s %-11s %6zu",
			     i == s->sel ? ">" : " ", ss->id, sw, sw, ss->subject ? ss->subject : "",
			     pw, pw, ss->protocol_name ? ss->protocol_name : "", started,
			     store_status_name(ss->status), ss->ntrials);
	}
	y = LINES - 3 - note_rows;
	if (s->note.editing) {
		console_putf(c, y++, 2, w, CONSOLE_HEAD, "Note on session %.8s (Enter stores it, Esc "
			     "drops it)", row(s, s->sel)->id);
		console_field_draw(c, &s->note, y, 4, w - 2, true);
		return;
	}
	if (!s->nnotes)
		return;
	console_putf(c, y++, 2, w, CONSOLE_HEAD, "Notes on %.8s (%zu)", row(s, s->sel)->id,
		     s->nnotes);
	for (size_t i = s->nnotes > 3 ? s->nnotes - 3 : 0; i < s->nnotes; i++)
		console_put(c, y++, 4, w - 2, CONSOLE_PLAIN, s->notes[i]);
}

/* Opens the database to write a note or delete a session: as a writer (a reader's connection is
 * query-only), but only a file that is there already, so a database moved away meanwhile is not
 * made again, empty. Returns 0, or -1 and *ERR. */
static int open_writer(struct console *c, struct store **db, char **err)
{
	const char *path = console_options(c)->db_path;
	if (access(path, F_OK) != 0) {
		*err = xasprintf("no database at %s", path);
		return -1;
	}
	return store_open(path, db, err);
}

static void add_note(struct console *c, struct sessions *s)
{
	struct store *db = NULL;
	char *err = NULL;
	const char *id = row(s, s->sel)->id;
	if (open_writer(c, &db, &err) == 0 && store_event(db, id, "note", s->note.text, &err) == 0)
		console_say(c, CONSOLE_OK, "note stored with session %.8s", id);
	else
		console_say(c, CONSOLE_BAD, "the note was not stored: %s", err ? err : "unknown error");
	store_close(db);
	free(err);
	load_notes(c, s, true);
}

static void answer_delete(struct console *c, void *ud, bool yes)
{
	struct sessions *s = ud;
	if (!yes || !s->n)
		return;
	char id[37];
	snprintf(id, sizeof id, "%s", row(s, s->sel)->id);
	struct store *db = NULL;
	char *err = NULL;
	if (open_writer(c, &db, &err) == 0 && store_session_delete_empty(db, id, &err) == 0)
		console_say(c, CONSOLE_OK, "session %.8s deleted", id);
	else
		console_say(c, CONSOLE_BAD, "not deleted: %s", err ? err : "unknown error");
	store_close(db);
	free(err);
	load(c, s);
	load_notes(c, s, true);
}

static bool sessions_key(struct console *c, void *st, int ch)
{
	struct sessions *s = st;
	struct console_screen *me = console_top(c);
	if (s->note.editing) {
		enum console_field_result r = console_field_key(&s->note, ch);
		if (r != CONSOLE_FIELD_GOING) {
			me->editing = false;
			if (r == CONSOLE_FIELD_DONE && s->n)
				add_note(c, s);
		}
		return true;
	}
	switch (ch) {
	case KEY_UP:
		if (s->sel)
			s->sel--;
		load_notes(c, s, false);
		return true;
	case KEY_DOWN:
		if (s->sel + 1 < s->n)
			s->sel++;
		load_notes(c, s, false);
		return true;
	case 'n':
	case 'N':
		if (!s->n)
			return true;
		console_field_set(&s->note, "");
		console_field_begin(&s->note);
		me->editing = true;
		return true;
	case 'd':
	case 'D': {
		if (!s->n)
			return true;
		const struct store_session *ss = row(s, s->sel);
		if (ss->ntrials) {
			console_say(c, CONSOLE_WARN, "session %.8s holds %zu trial%s; only a session "
				    "without trials can be deleted", ss->id, ss->ntrials,
				    ss->ntrials == 1 ? "" : "s");
			return true;
		}
		if (ss->status == STORE_RUNNING) {
			console_say(c, CONSOLE_WARN, "session %.8s is running; end it first", ss->id);
			return true;
		}
		char q[160];
		snprintf(q, sizeof q, "Delete session %.8s (subject %s, no trials) and its notes?",
			 ss->id, ss->subject ? ss->subject : "");
		console_confirm(c, q, answer_delete, s);
		return true;
	}
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
	if (s->note.editing || ++s->ticks % 20)   /* about every two seconds */
		return false;
	load(c, s);
	load_notes(c, s, true);
	return true;
}

static void sessions_destroy(void *st)
{
	struct sessions *s = st;
	store_sessions_free(s->v, s->n);
	free_notes(s);
	free(s);
}

void console_sessions_push(struct console *c)
{
	struct sessions *s = xcalloc(1, sizeof *s);
	console_field_init(&s->note, "note", CONSOLE_TEXT, 190, "");
	load(c, s);
	load_notes(c, s, true);
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
