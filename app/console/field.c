/* field — one-line text input for the console's prompts, with its validation message shown in
 * place under the value.
 *
 * A field holds its text as bytes (UTF-8 passes through for paths); the cursor moves over ASCII.
 * Each kind refuses the characters it cannot hold as they are typed (the text stays as it was and
 * the message says why) and validates the whole value on Enter: empty, too long, wrong characters,
 * out of range, a file that does not exist, a folder that does not exist. Esc gives back the
 * value from before editing, so nothing the experimenter typed earlier is lost by a slip. */
#include "console.h"

#include <curses.h>
#include <errno.h>
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

void console_field_init(struct console_field *f, const char *label, enum console_field_kind kind,
			size_t maxlen, const char *initial)
{
	memset(f, 0, sizeof *f);
	f->label = label;
	f->kind = kind;
	f->maxlen = maxlen && maxlen < CONSOLE_FIELD_MAX ? maxlen : CONSOLE_FIELD_MAX - 1;
	console_field_set(f, initial ? initial : "");
}

void console_field_set(struct console_field *f, const char *text)
{
	snprintf(f->text, sizeof f->text, "%s", text);
	f->len = strlen(f->text);
	f->cur = f->len;
	f->msg[0] = '\0';
}

void console_field_begin(struct console_field *f)
{
	memcpy(f->saved, f->text, sizeof f->saved);
	f->editing = true;
	f->cur = f->len;
	f->msg[0] = '\0';
	f->refused = false;
}

static bool is_digit(int ch)
{
	return ch >= '0' && ch <= '9';
}

static bool is_alnum(int ch)
{
	return is_digit(ch) || (ch >= 'a' && ch <= 'z') || (ch >= 'A' && ch <= 'Z');
}

/* Whether CH may be typed into F at the cursor; otherwise a sentence in MSG. */
static bool accepts(struct console_field *f, int ch, char *msg, size_t len)
{
	switch (f->kind) {
	case CONSOLE_ID:
		if (!is_alnum(ch)) {
			snprintf(msg, len, "'%c' is not allowed: letters and digits only "
				 "(a pseudonymous ID, never a name)", ch);
			return false;
		}
		return true;
	case CONSOLE_INTEGER:
		if (!is_digit(ch)) {
			snprintf(msg, len, "'%c' is not allowed: digits only", ch);
			return false;
		}
		return true;
	case CONSOLE_NUMBER:
		if (is_digit(ch))
			return true;
		if (ch == '.' && !strchr(f->text, '.'))
			return true;
		if (ch == '-' && f->cur == 0 && f->min < 0 && !strchr(f->text, '-'))
			return true;
		snprintf(msg, len, "'%c' is not allowed: a number such as 57 or 57.5", ch);
		return false;
	case CONSOLE_TEXT:
	case CONSOLE_FILE:
	case CONSOLE_OUTPATH:
		if (ch < 32 || ch == 127) {
			snprintf(msg, len, "control characters are not allowed");
			return false;
		}
		return true;
	}
	return true;
}

int console_field_check(const struct console_field *f, const char *text, char *msg, size_t len)
{
	size_t n = strlen(text);
	if (n == 0) {
		snprintf(msg, len, "%s needs a value", f->label);
		return -1;
	}
	if (n > f->maxlen) {
		snprintf(msg, len, "too long: at most %zu characters", f->maxlen);
		return -1;
	}
	struct stat st;
	switch (f->kind) {
	case CONSOLE_ID:
		for (size_t i = 0; i < n; i++)
			if (!is_alnum((unsigned char)text[i])) {
				snprintf(msg, len, "letters and digits only (a pseudonymous ID)");
				return -1;
			}
		return 0;
	case CONSOLE_INTEGER:
	case CONSOLE_NUMBER: {
		char *end;
		errno = 0;
		double v = f->kind == CONSOLE_INTEGER ? (double)strtoull(text, &end, 10)
						      : strtod(text, &end);
		if (errno || *end || end == text || !isfinite(v)) {
			snprintf(msg, len, "not a %s", f->kind == CONSOLE_INTEGER ? "whole number"
										   : "number");
			return -1;
		}
		if (f->min < f->max && (v < f->min || v > f->max)) {
			snprintf(msg, len, "out of range: %g to %g", f->min, f->max);
			return -1;
		}
		return 0;
	}
	case CONSOLE_FILE:
		if (stat(text, &st) != 0) {
			snprintf(msg, len, "no such file: %s", text);
			return -1;
		}
		if (S_ISDIR(st.st_mode)) {
			snprintf(msg, len, "that is a folder; name a file");
			return -1;
		}
		return 0;
	case CONSOLE_OUTPATH: {
		char dir[CONSOLE_FIELD_MAX];
		snprintf(dir, sizeof dir, "%s", text);
		char *slash = strrchr(dir, '/');
		if (slash == dir)
			dir[1] = '\0';
		else if (slash)
			*slash = '\0';
		else
			snprintf(dir, sizeof dir, ".");
		if (stat(dir, &st) != 0 || !S_ISDIR(st.st_mode)) {
			snprintf(msg, len, "no such folder: %s", dir);
			return -1;
		}
		return 0;
	}
	case CONSOLE_TEXT:
		return 0;
	}
	return 0;
}

/* Removes the UTF-8 character before the cursor. */
static void erase_before(struct console_field *f)
{
	if (f->cur == 0)
		return;
	size_t start = f->cur - 1;
	while (start > 0 && ((unsigned char)f->text[start] & 0xC0) == 0x80)
		start--;
	memmove(f->text + start, f->text + f->cur, f->len - f->cur + 1);
	f->len -= f->cur - start;
	f->cur = start;
}

bool console_form_move(int *row, int n, int ch)
{
	if (ch == KEY_UP || ch == KEY_BTAB)
		*row = (*row + n - 1) % n;
	else if (ch == KEY_DOWN || ch == '\t')
		*row = (*row + 1) % n;
	else
		return false;
	return true;
}

enum console_field_result console_field_key(struct console_field *f, int ch)
{
	bool typed = ch >= 32 && ch <= 255 && ch != 127;
	if (!typed)
		f->refused = false;
	switch (ch) {
	case 27:   /* Esc */
		console_field_set(f, f->saved);
		f->editing = false;
		return CONSOLE_FIELD_CANCELLED;
	case '\n':
	case '\r':
	case KEY_ENTER:
		if (console_field_check(f, f->text, f->msg, sizeof f->msg) != 0)
			return CONSOLE_FIELD_GOING;
		f->msg[0] = '\0';
		f->editing = false;
		return CONSOLE_FIELD_DONE;
	case KEY_BACKSPACE:
	case 127:
	case 8:
		erase_before(f);
		f->msg[0] = '\0';
		return CONSOLE_FIELD_GOING;
	case KEY_DC:
		if (f->cur < f->len) {
			f->cur++;
			while (f->cur < f->len && ((unsigned char)f->text[f->cur] & 0xC0) == 0x80)
				f->cur++;
			erase_before(f);
		}
		return CONSOLE_FIELD_GOING;
	case KEY_LEFT:
		while (f->cur > 0) {
			f->cur--;
			if (((unsigned char)f->text[f->cur] & 0xC0) != 0x80)
				break;
		}
		return CONSOLE_FIELD_GOING;
	case KEY_RIGHT:
		while (f->cur < f->len) {
			f->cur++;
			if (f->cur == f->len || ((unsigned char)f->text[f->cur] & 0xC0) != 0x80)
				break;
		}
		return CONSOLE_FIELD_GOING;
	case KEY_HOME:
	case 1:    /* Ctrl-A */
		f->cur = 0;
		return CONSOLE_FIELD_GOING;
	case KEY_END:
	case 5:    /* Ctrl-E */
		f->cur = f->len;
		return CONSOLE_FIELD_GOING;
	case 21:   /* Ctrl-U: clear */
		f->text[0] = '\0';
		f->len = f->cur = 0;
		f->msg[0] = '\0';
		return CONSOLE_FIELD_GOING;
	default:
		break;
	}
	if (ch > 255 || ch < 0)
		return CONSOLE_FIELD_GOING;   /* other function keys do nothing here */
	if (ch < 128 && !accepts(f, ch, f->msg, sizeof f->msg)) {
		f->refused = true;
		return CONSOLE_FIELD_GOING;
	}
	if (ch >= 128 && f->kind != CONSOLE_TEXT && f->kind != CONSOLE_FILE &&
	    f->kind != CONSOLE_OUTPATH) {
		snprintf(f->msg, sizeof f->msg, "only plain letters and digits are allowed here");
		f->refused = true;
		return CONSOLE_FIELD_GOING;
	}
	/* Count characters, not bytes, against the limit. */
	size_t chars = 0;
	for (size_t i = 0; i < f->len; i++)
		if (((unsigned char)f->text[i] & 0xC0) != 0x80)
			chars++;
	bool continuation = ch >= 128 && (ch & 0xC0) == 0x80;
	if ((!continuation && chars >= f->maxlen) || f->len + 1 >= sizeof f->text) {
		snprintf(f->msg, sizeof f->msg, "too long: at most %zu characters", f->maxlen);
		f->refused = true;
		return CONSOLE_FIELD_GOING;
	}
	memmove(f->text + f->cur + 1, f->text + f->cur, f->len - f->cur + 1);
	f->text[f->cur++] = (char)ch;
	f->len++;
	if (!f->refused)
		f->msg[0] = '\0';
	return CONSOLE_FIELD_GOING;
}

/* Columns of a UTF-8 string (one per code point, as the console counts them). */
static int cols_of(const char *s)
{
	int n = 0;
	for (; *s; s++)
		if (((unsigned char)*s & 0xC0) != 0x80)
			n++;
	return n;
}

/* A value wider than W columns, shortened to W with a mark where text is left out, so a long
 * value never looks complete when it is not: a path keeps its end (the file's name), other text
 * its start. Writes into BUF and returns it. */
static const char *elide(struct console *c, const struct console_field *f, int w, char *buf,
			 size_t size)
{
	const char *mark = console_utf8(c) ? "\u2026" : "...";
	int mcols = console_utf8(c) ? 1 : 3, keep = w - mcols;
	bool path = f->kind == CONSOLE_FILE || f->kind == CONSOLE_OUTPATH;
	const char *t = f->text;
	if (path) {
		const char *p = t + f->len;
		int n = 0;
		while (p > t && n < keep) {
			p--;
			if (((unsigned char)*p & 0xC0) != 0x80)
				n++;
		}
		snprintf(buf, size, "%s%s", mark, p);
	} else {
		size_t b = 0;
		int n = 0;
		while (t[b] && n < keep) {
			b++;
			while (t[b] && ((unsigned char)t[b] & 0xC0) == 0x80)
				b++;
			n++;
		}
		snprintf(buf, size, "%.*s%s", (int)b, t, mark);
	}
	return buf;
}

void console_field_draw(struct console *c, const struct console_field *f, int y, int x, int w,
			bool focused)
{
	enum console_role role = f->editing ? CONSOLE_FIELD : focused ? CONSOLE_PICK : CONSOLE_PLAIN;
	/* Scroll so the cursor stays visible. */
	size_t start = 0;
	if (f->editing && (int)f->cur > w - 2)
		start = f->cur - (size_t)(w - 2);
	while (start > 0 && ((unsigned char)f->text[start] & 0xC0) == 0x80)
		start++;
	if (f->editing) {
		console_style(c, CONSOLE_FIELD, true);
		mvhline(y, x, ' ', w);
		console_style(c, CONSOLE_FIELD, false);
	}
	const char *shown = f->text + start;
	if (!f->editing && !f->len)
		shown = "(empty)";
	char cut[CONSOLE_FIELD_MAX + 8];
	if (!f->editing && f->len && w > 8 && cols_of(f->text) > w)
		shown = elide(c, f, w, cut, sizeof cut);
	console_put(c, y, x, w, !f->editing && !f->len ? CONSOLE_DIM : role, shown);
	if (f->editing) {
		int cx = x;
		for (size_t i = start; i < f->cur; i++)
			if (((unsigned char)f->text[i] & 0xC0) != 0x80)
				cx++;
		console_cursor(c, y, cx < x + w ? cx : x + w - 1);
	}
	if (f->msg[0])
		console_put(c, y + 1, x, COLS - x - 1, CONSOLE_BAD, f->msg);
}
