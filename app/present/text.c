/* text — fonts through fontconfig, lines through SDL2_ttf, a small texture cache (see text.h).
 *
 * Layout: a struct text holds one open font at one size and TEXT_CACHE rendered lines (text, grey,
 * texture, size); the least recently used line is replaced when the cache is full. Called by
 * display.c (text screens) and the trial loop's legend through display.h. */
#include "text.h"

#include <stdbool.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <SDL.h>
#include <SDL_ttf.h>
#include <fontconfig/fontconfig.h>

#include "diag.h"

#define TEXT_CACHE 48

struct text_line {
	char *s;
	uint8_t grey;
	SDL_Texture *tex;
	int w, h;
	uint64_t used;
};

struct text {
	SDL_Renderer *r;
	TTF_Font *font;
	int cap, line;
	struct text_line cache[TEXT_CACHE];
	uint64_t clock;
};

char *text_find_font(const char *family, char *err, size_t errlen)
{
	if (!FcInit()) {
		snprintf(err, errlen, "fontconfig cannot read its configuration");
		return NULL;
	}
	FcPattern *pat = FcNameParse((const FcChar8 *)(family ? family : "sans-serif"));
	if (!pat) {
		FcFini();
		snprintf(err, errlen, "fontconfig cannot parse the font name '%s'", family);
		return NULL;
	}
	FcConfigSubstitute(NULL, pat, FcMatchPattern);
	FcDefaultSubstitute(pat);
	FcResult res;
	FcPattern *match = FcFontMatch(NULL, pat, &res);
	FcPatternDestroy(pat);
	char *file = NULL;
	FcChar8 *f = NULL;
	if (match && FcPatternGetString(match, FC_FILE, 0, &f) == FcResultMatch && f)
		file = xstrdup((const char *)f);
	if (match)
		FcPatternDestroy(match);
	FcFini();   /* the file name is ours now; fontconfig's caches are not kept for the session */
	if (!file)
		snprintf(err, errlen, "fontconfig finds no font for '%s'; install a font package "
			 "(fonts-dejavu-core) or name a font file in the protocol", family ? family : "sans-serif");
	return file;
}

/* The height of the capital H at the font's current size, or -1. */
static int cap_height(TTF_Font *f)
{
	int minx, maxx, miny, maxy, adv;
	if (TTF_GlyphMetrics32(f, 'H', &minx, &maxx, &miny, &maxy, &adv))
		return -1;
	return maxy - miny;
}

struct text *text_open(SDL_Renderer *r, const char *font_file, int cap_px, char *err, size_t errlen)
{
	if (cap_px < 4)
		cap_px = 4;
	char *found = NULL;
	if (!font_file && !(font_file = found = text_find_font(NULL, err, errlen)))
		return NULL;
	if (!TTF_WasInit() && TTF_Init()) {
		snprintf(err, errlen, "cannot start the font renderer (%s)", TTF_GetError());
		free(found);
		return NULL;
	}
	/* Open at an estimate (a capital is about 0.7 em in common sans-serif faces), then step the
	 * size until the hinted capital H is CAP_PX high, or as near as the font allows. */
	int size = (int)(cap_px / 0.7 + 0.5);
	TTF_Font *f = TTF_OpenFont(font_file, size);
	if (!f) {
		snprintf(err, errlen, "cannot open the font %s (%s)", font_file, TTF_GetError());
		free(found);
		TTF_Quit();
		return NULL;
	}
	free(found);
	int best = size, best_off = 1 << 30;
	for (int step = 0; step < 12; step++) {
		int c = cap_height(f);
		if (c < 0)
			break;
		int off = abs(c - cap_px);
		if (off < best_off) {
			best_off = off;
			best = size;
		}
		if (c == cap_px)
			break;
		size += c < cap_px ? 1 : -1;
		if (size < 2 || TTF_SetFontSize(f, size))
			break;
	}
	if (TTF_SetFontSize(f, best) || cap_height(f) < 0) {
		snprintf(err, errlen, "the font has no capital H to size it by (%s)", TTF_GetError());
		TTF_CloseFont(f);
		TTF_Quit();
		return NULL;
	}
	struct text *t = xcalloc(1, sizeof *t);
	t->r = r;
	t->font = f;
	t->cap = cap_height(f);
	t->line = TTF_FontLineSkip(f);
	return t;
}

void text_close(struct text *t)
{
	if (!t)
		return;
	for (int i = 0; i < TEXT_CACHE; i++) {
		free(t->cache[i].s);
		if (t->cache[i].tex)
			SDL_DestroyTexture(t->cache[i].tex);
	}
	TTF_CloseFont(t->font);
	TTF_Quit();
	free(t);
}

int text_cap_px(const struct text *t) { return t->cap; }
int text_line_px(const struct text *t) { return t->line; }

int text_width(struct text *t, const char *line)
{
	int w = 0, h = 0;
	if (!*line || TTF_SizeUTF8(t->font, line, &w, &h))
		return 0;
	return w;
}

/* The cached rendering of LINE in GREY, rendered now when missing; NULL on failure. */
static struct text_line *cached(struct text *t, const char *line, uint8_t grey)
{
	struct text_line *slot = &t->cache[0];
	for (int i = 0; i < TEXT_CACHE; i++) {
		struct text_line *c = &t->cache[i];
		if (c->s && c->grey == grey && !strcmp(c->s, line)) {
			c->used = ++t->clock;
			return c;
		}
		if (c->used < slot->used)
			slot = c;
	}
	SDL_Color col = {grey, grey, grey, 255};
	SDL_Surface *surf = TTF_RenderUTF8_Blended(t->font, line, col);
	if (!surf)
		return NULL;
	SDL_Texture *tex = SDL_CreateTextureFromSurface(t->r, surf);
	int w = surf->w, h = surf->h;
	SDL_FreeSurface(surf);
	if (!tex)
		return NULL;
	SDL_SetTextureBlendMode(tex, SDL_BLENDMODE_BLEND);
	free(slot->s);
	if (slot->tex)
		SDL_DestroyTexture(slot->tex);
	*slot = (struct text_line){xstrdup(line), grey, tex, w, h, ++t->clock};
	return slot;
}

int text_draw(struct text *t, const char *line, int cx, int y, uint8_t grey, int rect[4])
{
	if (rect)
		rect[0] = rect[1] = rect[2] = rect[3] = 0;
	if (!*line)
		return 0;
	struct text_line *c = cached(t, line, grey);
	if (!c)
		return -1;
	SDL_Rect dst = {cx - c->w / 2, y, c->w, c->h};
	if (SDL_RenderCopy(t->r, c->tex, NULL, &dst))
		return -1;
	if (rect) {
		rect[0] = dst.x;
		rect[1] = dst.y;
		rect[2] = dst.w;
		rect[3] = dst.h;
	}
	return 0;
}
