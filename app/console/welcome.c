/* welcome — the console's first screen: the safety cautions every session starts from, the
 * database and rig in use, and the ways in (set up a new session, or the sessions already stored).
 * It is the bottom of the screen stack; leaving it leaves the console. */
#include "console.h"

#include <curses.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "diag.h"
#include "store.h"

static const struct console_key welcome_keys[] = {
	{"Enter", "set up a session"},
	{"s", "stored sessions"},
};

static const struct {
	const char *head, *text;
} cautions[] = {
	{"Flashing images",
	 "Brief, high-contrast flashes can trigger seizures in people with photosensitive "
	 "epilepsy. Screen observers as your protocol requires and stop at once if anyone "
	 "feels unwell."},
	{"Approval and consent",
	 "Run observers only under your institution's ethics approval (IRB or ethics "
	 "committee) and after their informed consent. Your review board and local rules come "
	 "before anything this program says."},
	{"Pseudonymous IDs",
	 "Subject IDs are letters and digits only. Never use names, initials or birth dates; "
	 "keep the key that links IDs to people away from the data."},
};

struct welcome {
	char db_note[160];          /* what the database holds */
	enum console_role db_role;
	int ticks;
};

/* Counts the stored sessions (an existing file only: the first screen never creates one). */
static void read_db(struct console *c, struct welcome *w)
{
	const struct console_options *o = console_options(c);
	struct stat sb;
	w->db_role = CONSOLE_DIM;
	if (stat(o->db_path, &sb) != 0) {
		snprintf(w->db_note, sizeof w->db_note,
			 "(a new file; made when the first session starts)");
		return;
	}
	struct store *db = NULL;
	struct store_session *v = NULL;
	size_t n = 0;
	char *err = NULL;
	if (store_open(o->db_path, &db, &err) != 0 ||
	    store_sessions_list(db, NULL, &v, &n, &err) != 0) {
		snprintf(w->db_note, sizeof w->db_note, "cannot be read: %s",
			 err ? err : "unknown error");
		w->db_role = CONSOLE_BAD;
	} else {
		size_t open = 0;
		for (size_t i = 0; i < n; i++)
			open += v[i].status == STORE_INTERRUPTED || v[i].status == STORE_ABORTED ||
				v[i].status == STORE_ENDED_EARLY;
		snprintf(w->db_note, sizeof w->db_note, "%zu session%s stored", n, n == 1 ? "" : "s");
		if (open) {
			size_t len = strlen(w->db_note);
			snprintf(w->db_note + len, sizeof w->db_note - len,
				 "; %zu can be resumed (s)", open);
			w->db_role = CONSOLE_WARN;
		}
	}
	store_sessions_free(v, n);
	store_close(db);
	free(err);
}

/* VALUE at column 12 of row Y and NOTE after it, or on the next row when both do not fit.
 * Returns the row after them. */
static int value_and_note(struct console *c, int y, const char *value, enum console_role role,
			  const char *note)
{
	int x = 12 + console_put(c, y, 12, COLS - 14, CONSOLE_PLAIN, value);
	if (!*note)
		return y + 1;
	if (x + 2 + (int)strlen(note) > COLS - 1) {
		y++;
		x = 10;
	}
	console_put(c, y, x + 2, COLS - x - 3, role, note);
	return y + 1;
}

static void welcome_draw(struct console *c, void *st)
{
	struct welcome *wl = st;
	const struct console_options *o = console_options(c);
	int y = console_body_top(), w = COLS - 4;
	console_put(c, y++, 2, w, CONSOLE_HEAD, "Before anyone sits down");
	y++;
	for (size_t i = 0; i < sizeof cautions / sizeof cautions[0]; i++) {
		console_put(c, y, 2, w, CONSOLE_WARN, console_utf8(c) ? "\u25b2" : "!");
		console_put(c, y++, 4, w - 2, CONSOLE_WARN, cautions[i].head);
		y += console_wrap(c, y, 4, w - 2, 3, CONSOLE_PLAIN, cautions[i].text);
	}
	y++;
	console_put(c, y, 2, 10, CONSOLE_DIM, "Database");
	y = value_and_note(c, y, o->db_path, wl->db_role, wl->db_note);
	console_put(c, y, 2, 10, CONSOLE_DIM, "Rig");
	y = value_and_note(c, y, o->rig_path ? o->rig_path : "(none found)", CONSOLE_WARN,
			   o->rig_is_fallback ? "demo rig: describe your own display before real "
						"sessions" : "");
	if (console_sender(c)) {
		char st[600];
		bool bad;
		console_send_status(console_sender(c), st, sizeof st, &bad);
		console_put(c, y, 2, 10, CONSOLE_DIM, "Sending");
		console_put(c, y++, 12, COLS - 14, bad ? CONSOLE_WARN : CONSOLE_PLAIN, st);
	}
	y++;
	console_put(c, y, 2, w, CONSOLE_OK, "Press Enter when you have read this to set up a session.");
}

/* Reads the database again every few seconds (sessions end while the screen is up). */
static bool welcome_tick(struct console *c, void *st)
{
	struct welcome *w = st;
	if (++w->ticks % 30)
		return false;
	read_db(c, w);
	return true;
}

static void answer_leave(struct console *c, void *ud, bool yes)
{
	(void)ud;
	if (yes)
		console_quit(c);
}

static bool welcome_key(struct console *c, void *st, int ch)
{
	(void)st;
	switch (ch) {
	case '\n':
	case '\r':
	case KEY_ENTER:
		console_setup_push(c, NULL);
		return true;
	case 's':
	case 'S':
		console_sessions_push(c);
		return true;
	case 'q':
	case 'Q':
	case 27:
		if (console_pres_alive(console_presenter(c))) {
			console_confirm(c, "A session is still open. Leave the console and close it? "
					   "Every stored trial is kept.", answer_leave, NULL);
			return true;
		}
		return false;   /* the framework's back key: leaving the first screen quits */
	default:
		return false;
	}
}

void console_welcome_push(struct console *c)
{
	struct welcome *w = xcalloc(1, sizeof *w);
	read_db(c, w);
	struct console_screen s = {
		.title = "before you begin",
		.keys = welcome_keys,
		.nkeys = sizeof welcome_keys / sizeof welcome_keys[0],
		.draw = welcome_draw,
		.key = welcome_key,
		.tick = welcome_tick,
		.destroy = free,
		.st = w,
	};
	console_push(c, &s);
}
