/* textview — a scrollable page of lines (all check problems, a child's last messages). The
 * screen owns the lines it was given. A line wider than the screen wraps onto the rows below it
 * (indented, so one line still reads as one), never cut: scrolling goes by screen rows, and the
 * wrapped rows are counted again at each draw, so a resized terminal re-wraps. */
#include "console.h"

#include <curses.h>
#include <stdlib.h>

#include "diag.h"

#define TEXT_INDENT 4

struct textview {
	char **lines;
	size_t n;
	size_t top;      /* the first screen row shown, counted over every wrapped row */
};

static const struct console_key text_keys[] = {
	{"Up/Down", "scroll"},
	{"PgUp/PgDn", "page"},
};

static int text_width(void)
{
	return COLS - 4;
}

/* Screen rows every line needs together at the current width. */
static size_t text_rows(const struct textview *t)
{
	size_t rows = 0;
	for (size_t i = 0; i < t->n; i++) {
		int r = console_wrap_count(text_width(), TEXT_INDENT, t->lines[i]);
		rows += r > 0 ? (size_t)r : 1;
	}
	return rows;
}

/* The largest first row that still fills the page. */
static size_t text_max_top(const struct textview *t)
{
	size_t total = text_rows(t), rows = (size_t)console_body_rows();
	return total > rows ? total - rows : 0;
}

static void text_draw(struct console *c, void *st)
{
	struct textview *t = st;
	size_t max = text_max_top(t);
	if (t->top > max)
		t->top = max;
	int y = console_body_top(), rows = console_body_rows(), end = y + rows;
	size_t at = 0;   /* screen rows before line i */
	for (size_t i = 0; i < t->n && y < end; i++) {
		int need = console_wrap_count(text_width(), TEXT_INDENT, t->lines[i]);
		if (need < 1)
			need = 1;
		if (at + (size_t)need > t->top) {
			int skip = t->top > at ? (int)(t->top - at) : 0;
			int drawn = console_wrap_from(c, y, 2, text_width(), TEXT_INDENT, skip, end - y,
						      CONSOLE_PLAIN, t->lines[i]);
			y += drawn > 0 ? drawn : 1;
		}
		at += (size_t)need;
	}
	size_t total = text_rows(t);
	if (total > (size_t)rows)
		console_putf(c, 1, COLS - 24, 22, CONSOLE_DIM, "rows %zu-%zu of %zu", t->top + 1,
			     t->top + (size_t)rows < total ? t->top + (size_t)rows : total, total);
}

static bool text_key(struct console *c, void *st, int ch)
{
	(void)c;
	struct textview *t = st;
	size_t rows = (size_t)console_body_rows();
	size_t max = text_max_top(t);
	switch (ch) {
	case KEY_UP:
		if (t->top)
			t->top--;
		return true;
	case KEY_DOWN:
		if (t->top < max)
			t->top++;
		return true;
	case KEY_PPAGE:
		t->top = t->top > rows ? t->top - rows : 0;
		return true;
	case KEY_NPAGE:
		t->top = t->top + rows < max ? t->top + rows : max;
		return true;
	default:
		return false;
	}
}

static void text_destroy(void *st)
{
	struct textview *t = st;
	for (size_t i = 0; i < t->n; i++)
		free(t->lines[i]);
	free(t->lines);
	free(t);
}

void console_text_push(struct console *c, const char *title, char **lines, size_t n)
{
	struct textview *t = xcalloc(1, sizeof *t);
	t->lines = lines;
	t->n = n;
	struct console_screen s = {
		.title = title,
		.keys = text_keys,
		.nkeys = sizeof text_keys / sizeof text_keys[0],
		.draw = text_draw,
		.key = text_key,
		.destroy = text_destroy,
		.st = t,
	};
	console_push(c, &s);
}
