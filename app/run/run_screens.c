/* run_screens — what the observer reads: the text size and font from the protocol's [screens],
 * the key legend (on instruction screens always, in the response window when the protocol asks),
 * and the lines of the instruction, break, pause and end screens. Screens are held and left by
 * run_block.c (break_screen, observer_pause) and run_all; this file only says what is on them.
 *
 * Text lines are built into a struct run_text (malloc'd lines), wrapped to 80% of the display's
 * width at spaces. The legend of the response window is kept in the session (s->legend) and handed
 * to the trial loop, which draws it in the response epoch only, below the stimulus rectangle. */
#include "run_private.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "display.h"
#include "geom.h"
#include "image.h"
#include "trialloop.h"

void run_text_add(struct run_text *t, const char *line)
{
	t->v = xrealloc(t->v, (t->n + 1) * sizeof *t->v);
	t->v[t->n++] = xstrdup(line);
}

void run_text_free(struct run_text *t)
{
	for (size_t i = 0; i < t->n; i++)
		free(t->v[i]);
	free(t->v);
	t->v = NULL;
	t->n = 0;
}

/* Adds TEXT (paragraphs separated by newlines) wrapped at spaces to WIDTH pixels. */
static void add_wrapped(struct run_session *s, struct run_text *t, const char *text, int width)
{
	const char *p = text;
	while (*p) {
		size_t len = strcspn(p, "\n");
		char *para = xasprintf("%.*s", (int)len, p);
		size_t plen = strlen(para);
		if (plen && para[plen - 1] == '\r')
			para[--plen] = '\0';
		char *line = xstrdup("");
		char *word = para;
		while (*word) {
			size_t wl = strcspn(word, " ");
			char *cand = xasprintf("%s%s%.*s", line, *line ? " " : "", (int)wl, word);
			if (*line && display_text_width(s->disp, cand) > width) {
				run_text_add(t, line);
				free(cand);
				cand = xasprintf("%.*s", (int)wl, word);
			}
			free(line);
			line = cand;
			word += wl;
			while (*word == ' ')
				word++;
		}
		run_text_add(t, line);
		free(line);
		free(para);
		p += len;
		if (*p == '\n')
			p++;
	}
}

/* The key's name as the observer reads it: letters in capitals, named keys as words. */
static void key_label(const char *key, char *out, size_t len)
{
	snprintf(out, len, "%s", key);
	if (strlen(out) == 1 && out[0] >= 'a' && out[0] <= 'z')
		out[0] = (char)(out[0] - 'a' + 'A');
	else if (!strcmp(out, "space"))
		snprintf(out, len, "SPACE");
}

/* The legend in one or more lines no wider than WIDTH: "ring S   bar D ..." (keys) or
 * "ring   bar ..." (labels). */
static void legend_lines(struct run_session *s, struct run_text *t, bool keys, int width)
{
	char *line = xstrdup("");
	for (size_t i = 0; i < s->proto.nchoices; i++) {
		char k[32], item[128];
		key_label(s->proto.choices[i].key, k, sizeof k);
		if (keys)
			snprintf(item, sizeof item, "%s %s", s->proto.choices[i].category, k);
		else
			snprintf(item, sizeof item, "%s", s->proto.choices[i].category);
		char *cand = xasprintf("%s%s%s", line, *line ? "     " : "", item);
		if (*line && display_text_width(s->disp, cand) > width) {
			run_text_add(t, line);
			free(cand);
			cand = xstrdup(item);
		}
		free(line);
		line = cand;
	}
	run_text_add(t, line);
	free(line);
}

int run_screens_setup(struct run_session *s, struct trialloop_config *tc, struct diag_list *d,
		      char **err)
{
	const struct protocol_screens *ps = &s->proto.screens;
	double deg = 0;
	int cap = geom_deg_to_px(&s->rig, ps->text_deg, &deg);
	char e[512];
	if (display_set_text(s->disp, ps->font, cap, e, sizeof e)) {
		*err = xasprintf("%s", e);
		return -1;
	}
	if (ps->legend == LEGEND_OFF)
		return 0;
	int w, h;
	display_size(s->disp, &w, &h);
	legend_lines(s, &s->legend, ps->legend == LEGEND_KEYS, w * 9 / 10);
	/* Below the stimulus rectangle, one capital height of gap. */
	int top = (h + s->plan.stim_px) / 2 + cap;
	int bottom = top + (int)s->legend.n * display_text_line_px(s->disp);
	if (bottom > h) {
		diag_add(d, DIAG_WARNING, s->proto.path, 0, "the key legend (%zu line%s of %d px) "
			 "does not fit below the stimulus on a %d px high display; it is left out",
			 s->legend.n, s->legend.n == 1 ? "" : "s", display_text_line_px(s->disp), h);
		run_text_free(&s->legend);
		return 0;
	}
	tc->legend = (const char *const *)s->legend.v;
	tc->nlegend = s->legend.n;
	tc->legend_y = top;
	return 0;
}

void run_screen_instructions(struct run_session *s, size_t block, bool first, struct run_text *t)
{
	int w, h;
	display_size(s->disp, &w, &h);
	const struct protocol_block *pb = run_pblock(s, block);
	if (first && s->proto.screens.instructions_text) {
		add_wrapped(s, t, s->proto.screens.instructions_text, w * 8 / 10);
		run_text_add(t, "");
	}
	char *title = xasprintf("Block %zu of %zu%s", block + 1, s->plan.nblocks,
				pb->practice ? " (practice)" : "");
	run_text_add(t, title);
	free(title);
	if (pb->instructions_text) {
		run_text_add(t, "");
		add_wrapped(s, t, pb->instructions_text, w * 8 / 10);
	}
	run_text_add(t, "");
	run_text_add(t, "Your keys:");
	for (size_t i = 0; i < s->proto.nchoices; i++) {
		char k[32];
		key_label(s->proto.choices[i].key, k, sizeof k);
		char *line = xasprintf("%s  =  %s", k, s->proto.choices[i].category);
		run_text_add(t, line);
		free(line);
	}
	run_text_add(t, "");
	run_text_add(t, "Press SPACE to begin");
}

void run_screen_break(struct run_session *s, size_t block, size_t done, size_t total,
		      size_t correct, size_t answered, struct run_text *t)
{
	const struct protocol_block *pb = run_pblock(s, block);
	run_text_add(t, "Rest a moment");
	run_text_add(t, "");
	char *line = xasprintf("Block %zu of %zu%s: %zu of %zu trials done", block + 1,
			       s->plan.nblocks, pb->practice ? " (practice)" : "", done, total);
	run_text_add(t, line);
	free(line);
	if ((pb->practice || s->proto.screens.break_accuracy) && answered > 0) {
		line = xasprintf("Correct so far: %.0f%%", 100.0 * (double)correct / (double)answered);
		run_text_add(t, line);
		free(line);
	}
	run_text_add(t, "");
	run_text_add(t, "Press SPACE to go on");
}

void run_screen_pause(struct run_text *t)
{
	run_text_add(t, "Paused");
	run_text_add(t, "");
	run_text_add(t, "The experimenter will come to you.");
	run_text_add(t, "You may stop taking part at any time, without giving a reason:");
	run_text_add(t, "just tell the experimenter.");
}

void run_screen_end(struct run_text *t)
{
	run_text_add(t, "The session is over.");
	run_text_add(t, "");
	run_text_add(t, "Thank you for taking part!");
	run_text_add(t, "The experimenter will come to you.");
}

void run_screen_shot(struct run_session *s, const char *name, const struct run_text *t)
{
	if (!s->screenshot_dir)
		return;
	for (size_t i = 0; i < s->nshot_names; i++)
		if (!strcmp(s->shot_names[i], name))
			return;
	s->shot_names = xrealloc(s->shot_names, (s->nshot_names + 1) * sizeof *s->shot_names);
	s->shot_names[s->nshot_names++] = xstrdup(name);
	display_clear(s->disp);
	display_draw_text(s->disp, (const char *const *)t->v, t->n);
	int w, h;
	uint8_t *px = display_read_pixels(s->disp, &w, &h);
	if (!px)
		return;
	struct image img = {w, h, px};
	char *path = xasprintf("%s/screen-%s.png", s->screenshot_dir, name);
	char err[256];
	image_save_png(path, &img, err, sizeof err);
	free(path);
	free(px);
}
