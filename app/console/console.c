/* console — the frame of the experimenter's console: terminal set-up and restoration, the screen
 * stack, the main loop with key dispatch, the title bar, message line and key line, the help
 * overlay, the "terminal too small" notice, colours (or none under NO_COLOR) and yes/no questions.
 *
 * The terminal is restored on every way out: a normal quit, SIGINT/SIGTERM/SIGHUP (a flag the loop
 * sees within a tenth of a second), an exit() from anywhere (atexit), and a crash of the console
 * itself (the fatal-signal handler writes back the saved termios and the terminal's own "leave"
 * strings with async-signal-safe calls, then lets the signal kill the process). The presentation
 * runs in a child process (presenter.c), so its crashes never reach this terminal at all.
 *
 * The loop: wait up to 100 ms for a key; run the top screen's tick; repaint when anything changed.
 * Screens live on a fixed stack of 16; each owns its state and frees it in destroy. */
#include "console.h"

#include <curses.h>
#include <langinfo.h>
#include <locale.h>
#include <signal.h>
#include <stdarg.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <termios.h>
#include <unistd.h>

#include "diag.h"
#include "version.h"

#define STACK_MAX 16

struct console {
	struct console_options opt;
	struct console_screen stack[STACK_MAX];
	int depth;
	bool quit, help, color, utf8, dirty;
	int cur_y, cur_x;                 /* cursor to show after painting; -1 = hidden */
	char msg[256];
	enum console_role msg_role;
	/* a pending yes/no question */
	bool asking;
	char question[200];
	void (*answer)(struct console *c, void *ud, bool yes);
	void *answer_ud;
	struct console_pres *pres;        /* the session's presentation child, or NULL */
	struct console_draft draft;       /* the set-up form as last left */
	struct console_send *send;        /* sending finished sessions to a server, or NULL */
};

/* ---- terminal restoration (process-wide; the one place with file-scope state) ---- */

static volatile sig_atomic_t stop_signal;      /* SIGINT/SIGTERM/SIGHUP seen */
static volatile sig_atomic_t curses_on;        /* between initscr and endwin */
static pid_t owner_pid;                        /* only this process restores the terminal */
static struct termios saved_tio;
static bool have_tio;
static char leave_seq[128];                    /* rmcup + cnorm + sgr0 captured at start */
static size_t leave_len;

static void on_stop_signal(int sig)
{
	stop_signal = sig;
}

/* Async-signal-safe: put the terminal back without curses, then die of the same signal. */
static void on_fatal_signal(int sig)
{
	if (curses_on && getpid() == owner_pid) {
		if (leave_len)
			(void)!write(STDOUT_FILENO, leave_seq, leave_len);
		if (have_tio)
			tcsetattr(STDIN_FILENO, TCSANOW, &saved_tio);
		static const char nl[] = "\r\ntachist console: stopped by a fault; terminal restored\r\n";
		(void)!write(STDERR_FILENO, nl, sizeof nl - 1);
		curses_on = 0;
	}
	signal(sig, SIG_DFL);
	raise(sig);
}

static void restore_terminal(void)
{
	if (curses_on && getpid() == owner_pid) {
		curs_set(1);
		endwin();
		curses_on = 0;
		if (have_tio)
			tcsetattr(STDIN_FILENO, TCSANOW, &saved_tio);
	}
}

static void append_cap(const char *name)
{
	char *s = tigetstr(name);
	if (!s || s == (char *)-1)
		return;
	size_t n = strlen(s);
	if (leave_len + n < sizeof leave_seq) {
		memcpy(leave_seq + leave_len, s, n);
		leave_len += n;
	}
}

static void install_handlers(void)
{
	struct sigaction sa;
	memset(&sa, 0, sizeof sa);
	sigemptyset(&sa.sa_mask);
	sa.sa_handler = on_stop_signal;   /* no SA_RESTART: getch returns so the loop sees it */
	sigaction(SIGINT, &sa, NULL);
	sigaction(SIGTERM, &sa, NULL);
	sigaction(SIGHUP, &sa, NULL);
	sa.sa_handler = on_fatal_signal;
	sa.sa_flags = SA_RESETHAND;
	int fatal[] = {SIGSEGV, SIGBUS, SIGFPE, SIGILL, SIGABRT};
	for (size_t i = 0; i < sizeof fatal / sizeof fatal[0]; i++)
		sigaction(fatal[i], &sa, NULL);
	signal(SIGPIPE, SIG_IGN);
}

/* ---- styles ---- */

static const struct {
	short fg, bg;
	int attr;        /* with colour */
	int plain;       /* under NO_COLOR */
} roles[CONSOLE_ROLE_COUNT] = {
	[CONSOLE_PLAIN] = {-1, -1, 0, 0},
	[CONSOLE_TITLE] = {COLOR_BLACK, COLOR_CYAN, A_BOLD, A_REVERSE | A_BOLD},
	[CONSOLE_HEAD] = {COLOR_CYAN, -1, A_BOLD, A_BOLD | A_UNDERLINE},
	[CONSOLE_DIM] = {COLOR_WHITE, -1, A_DIM, A_DIM},
	[CONSOLE_OK] = {COLOR_GREEN, -1, 0, 0},
	[CONSOLE_WARN] = {COLOR_YELLOW, -1, A_BOLD, A_BOLD},
	[CONSOLE_BAD] = {COLOR_RED, -1, A_BOLD, A_BOLD | A_UNDERLINE},
	[CONSOLE_PICK] = {COLOR_BLACK, COLOR_YELLOW, 0, A_REVERSE},
	[CONSOLE_FIELD] = {COLOR_WHITE, COLOR_BLUE, 0, A_UNDERLINE},
	[CONSOLE_KEY] = {COLOR_MAGENTA, -1, A_BOLD, A_BOLD},
};

void console_style(struct console *c, enum console_role r, bool on)
{
	attr_t a = c->color ? ((attr_t)COLOR_PAIR((int)r) | (attr_t)roles[r].attr)
			    : (attr_t)roles[r].plain;
	if (on)
		attr_on(a, NULL);
	else
		attr_off(a, NULL);
}

static void setup_colors(struct console *c)
{
	const char *nc = getenv("NO_COLOR");
	/* no-color.org: NO_COLOR present and not empty disables colour. */
	c->color = !(nc && *nc) && has_colors();
	if (!c->color)
		return;
	start_color();
	use_default_colors();
	for (int r = 1; r < CONSOLE_ROLE_COUNT; r++)
		init_pair((short)r, roles[r].fg, roles[r].bg);
}

/* ---- drawing helpers ---- */

bool console_utf8(const struct console *c)
{
	return c->utf8;
}

int console_body_top(void)
{
	return 2;
}

int console_body_rows(void)
{
	return LINES - 5;
}

/* Columns of a UTF-8 string (every code point counted as one column, which holds for the
 * characters this console writes). */
static int text_cols(const char *s, size_t n)
{
	int cols = 0;
	for (size_t i = 0; i < n && s[i]; i++)
		if (((unsigned char)s[i] & 0xC0) != 0x80)
			cols++;
	return cols;
}

/* Bytes of S that fit in W columns. */
static size_t fit_bytes(const char *s, int w)
{
	int cols = 0;
	size_t i = 0;
	for (; s[i]; i++) {
		if (((unsigned char)s[i] & 0xC0) != 0x80) {
			if (cols == w)
				break;
			cols++;
		}
	}
	return i;
}

int console_put(struct console *c, int y, int x, int w, enum console_role role, const char *text)
{
	if (y < 0 || y >= LINES || x >= COLS || w <= 0)
		return 0;
	if (x + w > COLS)
		w = COLS - x;
	size_t n = fit_bytes(text, w);
	console_style(c, role, true);
	mvaddnstr(y, x, text, (int)n);
	console_style(c, role, false);
	return text_cols(text, n);
}

int console_putf(struct console *c, int y, int x, int w, enum console_role role, const char *fmt,
		 ...)
{
	char buf[1024];
	va_list ap;
	va_start(ap, fmt);
	vsnprintf(buf, sizeof buf, fmt, ap);
	va_end(ap);
	return console_put(c, y, x, w, role, buf);
}

/* The one word-wrapping rule: TEXT broken at spaces (or, in a word longer than the row, at the
 * row's end) and at newlines into rows of W columns, rows after the first INDENT columns further
 * in. Rows before SKIP are passed over; up to MAXROWS rows after them are drawn at (Y, X) when C
 * is set. Returns the rows drawn, or with C NULL the rows TEXT needs in all (SKIP and MAXROWS
 * ignored). */
static int wrap_rows(struct console *c, int y, int x, int w, int indent, int skip, int maxrows,
		     enum console_role role, const char *text)
{
	if (w < 1)
		return 0;
	if (indent < 0 || indent >= w)
		indent = 0;
	int row = 0, drawn = 0;
	const char *p = text;
	while (*p && (!c || drawn < maxrows)) {
		int rw = row ? w - indent : w;
		if (*p == '\n') {
			p++;
			if (row++ >= skip)
				drawn++;
			continue;
		}
		size_t fit = fit_bytes(p, rw);
		size_t cut = fit;
		const char *nl = memchr(p, '\n', fit);
		if (nl)
			cut = (size_t)(nl - p);
		else if (p[fit]) {
			size_t sp = fit;
			while (sp > 0 && p[sp] != ' ')
				sp--;
			if (sp > 0)
				cut = sp;
		}
		if (c && row >= skip) {
			char line[1024];
			size_t n = cut < sizeof line ? cut : sizeof line - 1;
			memcpy(line, p, n);
			line[n] = '\0';
			console_put(c, y + drawn, row ? x + indent : x, rw, role, line);
		}
		if (row++ >= skip)
			drawn++;
		p += cut;
		if (*p == ' ' || *p == '\n')
			p++;
	}
	return c ? drawn : row;
}

int console_wrap(struct console *c, int y, int x, int w, int maxrows, enum console_role role,
		 const char *text)
{
	return wrap_rows(c, y, x, w, 0, 0, maxrows, role, text);
}

int console_wrap_from(struct console *c, int y, int x, int w, int indent, int skip, int maxrows,
		      enum console_role role, const char *text)
{
	return wrap_rows(c, y, x, w, indent, skip, maxrows, role, text);
}

int console_wrap_count(int w, int indent, const char *text)
{
	return wrap_rows(NULL, 0, 0, w, indent, 0, 0, CONSOLE_PLAIN, text);
}

void console_bar(struct console *c, int y, int x, int w, double frac)
{
	if (w <= 0)
		return;
	if (!(frac >= 0))
		frac = 0;
	if (frac > 1)
		frac = 1;
	int full = (int)(frac * w + 0.5);
	console_style(c, CONSOLE_OK, true);
	for (int i = 0; i < full; i++)
		mvaddstr(y, x + i, c->utf8 ? "\u2588" : "#");
	console_style(c, CONSOLE_OK, false);
	console_style(c, CONSOLE_DIM, true);
	for (int i = full; i < w; i++)
		mvaddstr(y, x + i, c->utf8 ? "\u2591" : ".");
	console_style(c, CONSOLE_DIM, false);
}

const char *console_shade(const struct console *c, double frac)
{
	static const char *const utf[] = {" ", "\u2591", "\u2592", "\u2593", "\u2588"};
	static const char *const ascii[] = {" ", ".", ":", "*", "#"};
	/* blank for none, then quarters: under 25%, 50%, 75%, and 75% or more */
	int i = !(frac > 0) ? 0 : frac < 0.25 ? 1 : frac < 0.5 ? 2 : frac < 0.75 ? 3 : 4;
	return c->utf8 ? utf[i] : ascii[i];
}

/* ---- stack ---- */

void console_push(struct console *c, const struct console_screen *s)
{
	if (c->depth == STACK_MAX) {
		if (s->destroy)
			s->destroy(s->st);
		console_say(c, CONSOLE_BAD, "too many screens open; close one first");
		return;
	}
	c->stack[c->depth++] = *s;
	c->dirty = true;
}

void console_pop(struct console *c)
{
	if (c->depth == 0)
		return;
	struct console_screen *s = &c->stack[--c->depth];
	if (s->destroy)
		s->destroy(s->st);
	if (c->depth == 0)
		c->quit = true;
	c->dirty = true;
}

struct console_screen *console_top(struct console *c)
{
	return c->depth ? &c->stack[c->depth - 1] : NULL;
}

void console_quit(struct console *c)
{
	c->quit = true;
}

void console_say(struct console *c, enum console_role role, const char *fmt, ...)
{
	va_list ap;
	va_start(ap, fmt);
	vsnprintf(c->msg, sizeof c->msg, fmt, ap);
	va_end(ap);
	c->msg_role = role;
	c->dirty = true;
}

void console_confirm(struct console *c, const char *question,
		     void (*answer)(struct console *c, void *ud, bool yes), void *ud)
{
	c->asking = true;
	snprintf(c->question, sizeof c->question, "%s", question);
	c->answer = answer;
	c->answer_ud = ud;
	c->dirty = true;
}

struct console_pres *console_presenter(struct console *c)
{
	return c->pres;
}

void console_set_presenter(struct console *c, struct console_pres *p)
{
	if (c->pres && c->pres != p)
		console_pres_destroy(c->pres, 5000);
	c->pres = p;
}

const struct console_send *console_sender(const struct console *c)
{
	return c->send;
}

const struct console_options *console_options(const struct console *c)
{
	return &c->opt;
}

struct console_draft *console_draft(struct console *c)
{
	return &c->draft;
}

/* ---- painting ---- */

static void draw_title(struct console *c, const struct console_screen *s)
{
	console_style(c, CONSOLE_TITLE, true);
	mvhline(0, 0, ' ', COLS);
	console_style(c, CONSOLE_TITLE, false);
	char left[160];
	snprintf(left, sizeof left, " tachist %s \u00b7 %s", TACHIST_VERSION, s ? s->title : "");
	if (!c->utf8)
		snprintf(left, sizeof left, " tachist %s - %s", TACHIST_VERSION, s ? s->title : "");
	console_put(c, 0, 0, COLS, CONSOLE_TITLE, left);
	char right[160];
	snprintf(right, sizeof right, "db %s ", c->opt.db_path);
	int rw = text_cols(right, strlen(right));
	int lw = text_cols(left, strlen(left));
	if (COLS - rw > lw + 2)
		console_put(c, 0, COLS - rw, rw, CONSOLE_TITLE, right);
}

/* The key line: this screen's keys from the left, the framework's at the right end ("Esc back",
 * or "Esc leave" on the first screen, and "? help"). Keys that do not fit are never dropped
 * silently: the help key then reads "? more keys" and the overlay lists them all. */
static void draw_keys(struct console *c, const struct console_screen *s)
{
	int y = LINES - 1, x = 1;
	mvhline(y, 0, ' ', COLS);
	if (c->asking) {
		x += console_put(c, y, x, COLS - x, CONSOLE_KEY, "y");
		x += console_put(c, y, x, COLS - x, CONSOLE_PLAIN, " yes  ");
		x += console_put(c, y, x, COLS - x, CONSOLE_KEY, "n");
		console_put(c, y, x, COLS - x, CONSOLE_PLAIN, " no");
		return;
	}
	const char *back = c->depth > 1 ? "back" : "leave";
	size_t shown = 0;
	int right = COLS - 1 - (int)strlen("Esc ") - (int)strlen(back) - 2 - (int)strlen("? help");
	for (; s && shown < s->nkeys; shown++) {
		const char *k = s->keys[shown].key, *w = s->keys[shown].what;
		int need = text_cols(k, strlen(k)) + 1 + text_cols(w, strlen(w)) + 2;
		/* The last key may use the room "more keys" would need. */
		int room = shown + 1 == s->nkeys ? right : right - (int)strlen(" more keys");
		if (x + need > room)
			break;
		x += console_put(c, y, x, COLS - x, CONSOLE_KEY, k);
		x += console_put(c, y, x + 1, COLS - x, CONSOLE_DIM, w) + 3;
	}
	bool more = s && shown < s->nkeys;
	int rx = right + (more ? -(int)strlen(" more keys") : 0);
	rx += console_put(c, y, rx, 3, CONSOLE_KEY, "Esc");
	rx += console_put(c, y, rx + 1, COLS - rx, CONSOLE_DIM, back) + 3;
	console_put(c, y, rx, 1, CONSOLE_KEY, "?");
	console_put(c, y, rx + 2, COLS - rx - 2, more ? CONSOLE_WARN : CONSOLE_DIM,
		    more ? "more keys" : "help");
}

static void draw_help(struct console *c, const struct console_screen *s)
{
	int n = (int)(s ? s->nkeys : 0) + 7;
	int h = n + 4, w = 64;
	if (h > LINES - 2)
		h = LINES - 2;
	int y0 = (LINES - h) / 2, x0 = (COLS - w) / 2;
	for (int y = y0; y < y0 + h; y++) {
		console_style(c, CONSOLE_FIELD, true);
		mvhline(y, x0, ' ', w);
		console_style(c, CONSOLE_FIELD, false);
	}
	console_putf(c, y0, x0 + 2, w - 4, CONSOLE_FIELD, "Keys on \"%s\"", s ? s->title : "");
	int y = y0 + 2;
	for (size_t i = 0; s && i < s->nkeys && y < y0 + h - 1; i++, y++) {
		console_put(c, y, x0 + 2, 16, CONSOLE_FIELD, s->keys[i].key);
		console_put(c, y, x0 + 19, w - 21, CONSOLE_FIELD, s->keys[i].what);
	}
	static const struct console_key global[] = {
		{"Esc or q", "back to the screen before (on the first: leave)"},
		{"?", "show or hide this help"},
		{"Ctrl-L", "repaint the screen"},
		{"Ctrl-C", "leave now; stored trials are kept"},
	};
	y++;
	for (size_t i = 0; i < 4 && y < y0 + h - 1; i++, y++) {
		console_put(c, y, x0 + 2, 16, CONSOLE_FIELD, global[i].key);
		console_put(c, y, x0 + 19, w - 21, CONSOLE_FIELD, global[i].what);
	}
	console_put(c, y0 + h - 1, x0 + 2, w - 4, CONSOLE_FIELD, "any key closes this help");
}

static void draw_too_small(struct console *c)
{
	erase();
	char line[200];
	snprintf(line, sizeof line,
		 "This terminal is %dx%d. The console needs at least %dx%d. "
		 "Make the window larger to go on, or press Esc or q to leave.",
		 COLS, LINES, CONSOLE_MIN_COLS, CONSOLE_MIN_LINES);
	console_wrap(c, 0, 0, COLS, LINES, CONSOLE_WARN, line);
	refresh();
}

/* The message line above the key line; a message too long for it wraps onto the row above
 * (over the screen's last row) rather than being cut. */
static void draw_message(struct console *c, enum console_role role, const char *text)
{
	int need = console_wrap_count(COLS - 2, 0, text);
	need = need < 1 ? 1 : need > 2 ? 2 : need;
	for (int y = LINES - 1 - need; y < LINES - 1; y++)
		mvhline(y, 0, ' ', COLS);
	console_wrap(c, LINES - 1 - need, 1, COLS - 2, need, role, text);
}

static void paint(struct console *c)
{
	if (COLS < CONSOLE_MIN_COLS || LINES < CONSOLE_MIN_LINES) {
		draw_too_small(c);
		return;
	}
	struct console_screen *s = console_top(c);
	erase();
	c->cur_y = -1;
	draw_title(c, s);
	if (s && s->draw)
		s->draw(c, s->st);
	if (c->asking)
		draw_message(c, CONSOLE_WARN, c->question);
	else if (c->msg[0])
		draw_message(c, c->msg_role, c->msg);
	draw_keys(c, s);
	if (c->help)
		draw_help(c, s);
	if (c->cur_y >= 0 && !c->help && !c->asking) {
		move(c->cur_y, c->cur_x);
		curs_set(1);
	} else {
		curs_set(0);
	}
	refresh();
}

void console_cursor(struct console *c, int y, int x)
{
	c->cur_y = y;
	c->cur_x = x;
}

/* ---- the loop ---- */

static void handle_key(struct console *c, int ch)
{
	struct console_screen *s = console_top(c);
	bool small = COLS < CONSOLE_MIN_COLS || LINES < CONSOLE_MIN_LINES;
	if (small) {
		if (ch == 'q' || ch == 'Q' || ch == 27)
			c->quit = true;
		return;
	}
	if (c->help) {
		c->help = false;
		return;
	}
	if (c->asking) {
		if (ch == 'y' || ch == 'Y' || ch == 'n' || ch == 'N' || ch == 27) {
			c->asking = false;
			bool yes = ch == 'y' || ch == 'Y';
			if (c->answer)
				c->answer(c, c->answer_ud, yes);
		}
		return;
	}
	/* Esc first puts a message away; only the next Esc goes back. */
	if (ch == 27 && c->msg[0] && !(s && s->editing)) {
		c->msg[0] = '\0';
		return;
	}
	c->msg[0] = '\0';
	if (ch == 12) {   /* Ctrl-L */
		clearok(curscr, TRUE);
		return;
	}
	if (s && s->key && s->key(c, s->st, ch))
		return;
	if (s && s->editing)
		return;
	if (ch == '?')
		c->help = true;
	/* The one back key of every screen (a screen that must ask first takes it itself). */
	if (ch == 27 || ch == 'q' || ch == 'Q')
		console_pop(c);
}

int console_main(const struct console_options *o)
{
	if (!isatty(STDIN_FILENO) || !isatty(STDOUT_FILENO)) {
		fprintf(stderr, "tachist console: needs a terminal on standard input and output\n");
		return 1;
	}
	setlocale(LC_ALL, "");
	struct console *c = xcalloc(1, sizeof *c);
	c->opt = *o;
	if (!c->opt.db_path)
		c->opt.db_path = "tachist.db";
	const char *cs = nl_langinfo(CODESET);
	c->utf8 = cs && (!strcmp(cs, "UTF-8") || !strcmp(cs, "utf8"));

	owner_pid = getpid();
	have_tio = tcgetattr(STDIN_FILENO, &saved_tio) == 0;
	install_handlers();
	atexit(restore_terminal);
	if (!getenv("ESCDELAY"))
		set_escdelay(25);
	if (!newterm(NULL, stdout, stdin)) {
		fprintf(stderr, "tachist console: this terminal type is not known (TERM=%s)\n",
			getenv("TERM") ? getenv("TERM") : "");
		free(c);
		return 1;
	}
	curses_on = 1;
	append_cap("rmcup");
	append_cap("cnorm");
	append_cap("sgr0");
	cbreak();      /* Ctrl-C stays a signal so it works in every screen */
	noecho();
	nonl();
	keypad(stdscr, TRUE);
	timeout(100);
	curs_set(0);
	setup_colors(c);

	if (!c->opt.rig_is_fallback)
		c->send = console_send_start(c->opt.self_exe, c->opt.db_path, c->opt.rig_path);
	console_welcome_push(c);
	c->dirty = true;
	int rc = 0;
	while (!c->quit && c->depth > 0) {
		if (stop_signal) {
			rc = 1;
			break;
		}
		if (c->pres && console_pres_poll(c->pres))
			c->dirty = true;
		if (c->send && console_send_poll(c->send))
			c->dirty = true;
		struct console_screen *s = console_top(c);
		if (s && s->tick && s->tick(c, s->st))
			c->dirty = true;
		if (c->dirty) {
			paint(c);
			c->dirty = false;
		}
		int ch = getch();
		if (ch == ERR)
			continue;
		c->dirty = true;
		if (ch == KEY_RESIZE)
			continue;
		handle_key(c, ch);
	}
	while (c->depth > 0)
		console_pop(c);
	if (c->pres) {
		/* Say what is happening: closing can take a trial's length. */
		if (COLS >= 20 && LINES >= 3) {
			erase();
			console_put(c, 1, 1, COLS - 2, CONSOLE_WARN,
				    "Closing the session; every stored trial is kept ...");
			refresh();
		}
		if (stop_signal)
			console_pres_interrupt(c->pres);
		console_pres_destroy(c->pres, 5000);
		c->pres = NULL;
	}
	console_send_stop(c->send);
	restore_terminal();
	if (stop_signal)
		fprintf(stderr, "tachist console: stopped by signal %d; stored trials are kept\n",
			(int)stop_signal);
	free(c);
	return rc;
}
