/* textview — a scrollable page of lines (all check problems, a child's last messages). The
 * screen owns the lines it was given. */
#include "console.h"

#include <curses.h>
#include <stdlib.h>

#include "diag.h"

struct textview {
	char **lines;
	size_t n;
	size_t top;
};

static const struct console_key text_keys[] = {
	{"Up/Down", "scroll"},
	{"PgUp/PgDn", "page"},
};

static void text_draw(struct console *c, void *st)
{
	struct textview *t = st;
	int y = console_body_top(), rows = console_body_rows();
	for (size_t i = t->top; i < t->n && y < console_body_top() + rows; i++, y++)
		console_put(c, y, 2, COLS - 4, CONSOLE_PLAIN, t->lines[i]);
	if (t->n > (size_t)rows)
		console_putf(c, 1, COLS - 24, 22, CONSOLE_DIM, "lines %zu-%zu of %zu", t->top + 1,
			     t->top + (size_t)rows < t->n ? t->top + (size_t)rows : t->n, t->n);
}

static bool text_key(struct console *c, void *st, int ch)
{
	(void)c;
	struct textview *t = st;
	size_t rows = (size_t)console_body_rows();
	size_t max = t->n > rows ? t->n - rows : 0;
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
