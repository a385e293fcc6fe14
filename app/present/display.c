/* display — SDL2 window, renderer and drawing (see display.h).
 *
 * One window and one renderer per session. Text goes through text.c (SDL2_ttf, a fontconfig
 * font): the protocol's font and size once display_set_text is called, before that the system's
 * sans-serif with capitals 1/60 of the output's height. */
#include "display.h"

#include <ctype.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <SDL.h>
#include <gsl/gsl_rng.h>

#include "diag.h"
#include "text.h"

struct display {
	SDL_Window *win;
	SDL_Renderer *r;
	int w, h;
	int screen_w, screen_h;
	int grey;
	bool vsync, headless;
	char driver[32];
	struct text *text;      /* NULL until the first text is drawn or display_set_text */
};

struct display *display_open(const struct display_opts *o, char *err, size_t errlen)
{
	if (o->headless && !getenv("SDL_VIDEODRIVER"))
		SDL_SetHint(SDL_HINT_VIDEODRIVER, "dummy");
	/* Our own SIGINT/SIGTERM handlers, not SDL's (the run layer installs them). */
	SDL_SetHint(SDL_HINT_NO_SIGNAL_HANDLERS, "1");
	if (SDL_InitSubSystem(SDL_INIT_VIDEO | SDL_INIT_EVENTS)) {
		snprintf(err, errlen, "cannot start the video system (%s)%s", SDL_GetError(),
			 o->headless ? "" : "; use --headless on a machine without a display");
		return NULL;
	}
	struct display *d = xcalloc(1, sizeof *d);
	d->grey = o->background;
	d->headless = o->headless;
	snprintf(d->driver, sizeof d->driver, "%s", SDL_GetCurrentVideoDriver() ? SDL_GetCurrentVideoDriver() : "?");
	int nd = SDL_GetNumVideoDisplays();
	int di = o->display_index >= 0 && o->display_index < nd ? o->display_index : 0;
	SDL_DisplayMode mode;
	if (SDL_GetDesktopDisplayMode(di, &mode) == 0) {
		d->screen_w = mode.w;
		d->screen_h = mode.h;
	}
	Uint32 flags = SDL_WINDOW_SHOWN;
	int ww = o->width_px > 0 ? o->width_px : 800, wh = o->height_px > 0 ? o->height_px : 600;
	bool dummy = !strcmp(d->driver, "dummy") || !strcmp(d->driver, "offscreen");
	if (!o->headless && !o->window)
		flags |= SDL_WINDOW_FULLSCREEN_DESKTOP;
	if (!dummy && d->screen_w > 0 && (o->window || o->headless)) {
		/* A window never larger than the screen it is on. */
		if (ww > d->screen_w) ww = d->screen_w;
		if (wh > d->screen_h) wh = d->screen_h;
	}
	d->win = SDL_CreateWindow(o->title ? o->title : "tachist", SDL_WINDOWPOS_CENTERED_DISPLAY(di),
				  SDL_WINDOWPOS_CENTERED_DISPLAY(di), ww, wh, flags);
	if (!d->win) {
		snprintf(err, errlen, "cannot open a window (%s)", SDL_GetError());
		goto fail;
	}
	Uint32 rflags = o->headless ? SDL_RENDERER_SOFTWARE
				    : SDL_RENDERER_ACCELERATED | (o->vsync ? SDL_RENDERER_PRESENTVSYNC : 0);
	d->r = SDL_CreateRenderer(d->win, -1, rflags);
	if (!d->r && !o->headless)
		d->r = SDL_CreateRenderer(d->win, -1, o->vsync ? SDL_RENDERER_PRESENTVSYNC : 0);
	if (!d->r) {
		snprintf(err, errlen, "cannot create a renderer (%s)", SDL_GetError());
		goto fail;
	}
	SDL_RendererInfo info;
	if (SDL_GetRendererInfo(d->r, &info) == 0)
		d->vsync = (info.flags & SDL_RENDERER_PRESENTVSYNC) != 0;
	SDL_GetRendererOutputSize(d->r, &d->w, &d->h);
	if (d->headless || dummy || d->screen_w <= 0) {
		if (dummy || d->screen_w <= 0) {
			d->screen_w = d->w;
			d->screen_h = d->h;
		}
	}
	if (!o->headless)
		SDL_ShowCursor(SDL_DISABLE);
	SDL_SetRenderDrawBlendMode(d->r, SDL_BLENDMODE_NONE);
	return d;
fail:
	display_close(d);
	return NULL;
}

void display_close(struct display *d)
{
	if (!d)
		return;
	text_close(d->text);
	if (d->r)
		SDL_DestroyRenderer(d->r);
	if (d->win)
		SDL_DestroyWindow(d->win);
	SDL_ShowCursor(SDL_ENABLE);
	SDL_QuitSubSystem(SDL_INIT_VIDEO | SDL_INIT_EVENTS);
	free(d);
}

struct SDL_Renderer *display_renderer(struct display *d) { return d->r; }

void display_size(const struct display *d, int *w, int *h)
{
	*w = d->w;
	*h = d->h;
}

void display_screen_size(const struct display *d, int *w, int *h)
{
	*w = d->screen_w;
	*h = d->screen_h;
}

bool display_has_vsync(const struct display *d) { return d->vsync; }
const char *display_driver(const struct display *d) { return d->driver; }
void display_set_background(struct display *d, int grey) { d->grey = grey; }

struct SDL_Texture *display_texture_rgba(struct display *d, int w, int h, const uint8_t *rgba,
					 bool nearest, char *err, size_t errlen)
{
	SDL_Texture *t = SDL_CreateTexture(d->r, SDL_PIXELFORMAT_RGBA32, SDL_TEXTUREACCESS_STATIC, w, h);
	if (!t) {
		snprintf(err, errlen, "cannot create a %d×%d texture (%s)", w, h, SDL_GetError());
		return NULL;
	}
	if (SDL_UpdateTexture(t, NULL, rgba, w * 4)) {
		snprintf(err, errlen, "cannot fill a texture (%s)", SDL_GetError());
		SDL_DestroyTexture(t);
		return NULL;
	}
	SDL_SetTextureScaleMode(t, nearest ? SDL_ScaleModeNearest : SDL_ScaleModeLinear);
	SDL_SetTextureBlendMode(t, SDL_BLENDMODE_BLEND);
	return t;
}

struct SDL_Texture *display_texture_noise(struct display *d, int w, int h, int cell, uint64_t seed,
					  char *err, size_t errlen)
{
	if (cell < 1)
		cell = 1;
	uint8_t *px = xmalloc((size_t)w * (size_t)h * 4);
	gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
	gsl_rng_set(rng, (unsigned long)seed);
	int cw = (w + cell - 1) / cell, ch = (h + cell - 1) / cell;
	uint8_t *cells = xmalloc((size_t)cw * (size_t)ch);
	for (int i = 0; i < cw * ch; i++)
		cells[i] = (uint8_t)gsl_rng_uniform_int(rng, 256);
	for (int y = 0; y < h; y++)
		for (int x = 0; x < w; x++) {
			uint8_t v = cells[(y / cell) * cw + x / cell];
			uint8_t *p = px + ((size_t)y * (size_t)w + (size_t)x) * 4;
			p[0] = p[1] = p[2] = v;
			p[3] = 255;
		}
	SDL_Texture *t = display_texture_rgba(d, w, h, px, true, err, errlen);
	gsl_rng_free(rng);
	free(cells);
	free(px);
	return t;
}

void display_texture_free(struct SDL_Texture *t)
{
	if (t)
		SDL_DestroyTexture(t);
}

void display_texture_size(struct SDL_Texture *t, int *w, int *h)
{
	SDL_QueryTexture(t, NULL, NULL, w, h);
}

void display_stim_rect(const struct display *d, int tw, int th, int long_px, int rect[4])
{
	int w, h;
	if (tw >= th) {
		w = long_px;
		h = (int)((double)long_px * th / tw + 0.5);
	} else {
		h = long_px;
		w = (int)((double)long_px * tw / th + 0.5);
	}
	rect[0] = (d->w - w) / 2;
	rect[1] = (d->h - h) / 2;
	rect[2] = w;
	rect[3] = h;
}

void display_clear(struct display *d)
{
	SDL_SetRenderDrawColor(d->r, (Uint8)d->grey, (Uint8)d->grey, (Uint8)d->grey, 255);
	SDL_RenderClear(d->r);
}

void display_fill_rect(struct display *d, const int rect[4], uint8_t r, uint8_t g, uint8_t b)
{
	SDL_SetRenderDrawColor(d->r, r, g, b, 255);
	if (!rect) {
		SDL_RenderFillRect(d->r, NULL);
		return;
	}
	SDL_Rect box = {rect[0], rect[1], rect[2], rect[3]};
	SDL_RenderFillRect(d->r, &box);
}

void display_draw_texture(struct display *d, struct SDL_Texture *t, int long_px)
{
	int tw, th, rc[4];
	SDL_QueryTexture(t, NULL, NULL, &tw, &th);
	display_stim_rect(d, tw, th, long_px, rc);
	SDL_Rect dst = {rc[0], rc[1], rc[2], rc[3]};
	SDL_RenderCopy(d->r, t, NULL, &dst);
}

/* A line THICK px wide, drawn as parallel one-pixel lines. */
static void thick_line(SDL_Renderer *r, int x0, int y0, int x1, int y1, int thick)
{
	for (int k = -thick / 2; k <= (thick - 1) / 2; k++) {
		if (abs(x1 - x0) >= abs(y1 - y0))
			SDL_RenderDrawLine(r, x0, y0 + k, x1, y1 + k);
		else
			SDL_RenderDrawLine(r, x0 + k, y0, x1 + k, y1);
	}
}

void display_draw_fixation(struct display *d, int size_px)
{
	if (size_px <= 0)
		return;
	int cx = d->w / 2, cy = d->h / 2, half = size_px / 2, th = size_px / 6 > 1 ? size_px / 6 : 1;
	Uint8 v = d->grey < 128 ? 255 : 0;
	SDL_SetRenderDrawColor(d->r, v, v, v, 255);
	SDL_Rect hbar = {cx - half, cy - th / 2, size_px, th}, vbar = {cx - th / 2, cy - half, th, size_px};
	SDL_RenderFillRect(d->r, &hbar);
	SDL_RenderFillRect(d->r, &vbar);
}

void display_draw_feedback(struct display *d, bool correct, int size_px)
{
	if (size_px < 8)
		size_px = 8;
	int cx = d->w / 2, cy = d->h / 2, s = size_px / 2, th = size_px / 8 > 1 ? size_px / 8 : 1;
	if (correct) {
		/* Blue-green tick: a colour pair that colour-blind observers tell apart from the cross. */
		SDL_SetRenderDrawColor(d->r, 0, 158, 115, 255);
		thick_line(d->r, cx - s, cy, cx - s / 3, cy + s * 2 / 3, th);
		thick_line(d->r, cx - s / 3, cy + s * 2 / 3, cx + s, cy - s * 2 / 3, th);
	} else {
		SDL_SetRenderDrawColor(d->r, 213, 94, 0, 255);
		thick_line(d->r, cx - s, cy - s, cx + s, cy + s, th);
		thick_line(d->r, cx - s, cy + s, cx + s, cy - s, th);
	}
}

void display_draw_marker(struct display *d, int corner, int side, bool white)
{
	if (corner <= 0 || side <= 0)
		return;
	SDL_Rect rc = {0, 0, side, side};
	if (corner == 2 || corner == 4)   /* top right, bottom right (rig_corner order) */
		rc.x = d->w - side;
	if (corner == 3 || corner == 4)
		rc.y = d->h - side;
	Uint8 v = white ? 255 : 0;
	SDL_SetRenderDrawColor(d->r, v, v, v, 255);
	SDL_RenderFillRect(d->r, &rc);
}

int display_set_text(struct display *d, const char *font_file, int cap_px, char *err, size_t errlen)
{
	struct text *t = text_open(d->r, font_file, cap_px, err, errlen);
	if (!t)
		return -1;
	text_close(d->text);
	d->text = t;
	return 0;
}

/* The display's text, opened with the defaults on first use; NULL when no font can be opened. */
static struct text *text_of(struct display *d)
{
	if (!d->text) {
		char err[256];
		int cap = d->h / 60;
		d->text = text_open(d->r, NULL, cap < 8 ? 8 : cap, err, sizeof err);
	}
	return d->text;
}

int display_text_line_px(struct display *d)
{
	struct text *t = text_of(d);
	return t ? text_line_px(t) : 0;
}

int display_text_width(struct display *d, const char *line)
{
	struct text *t = text_of(d);
	return t ? text_width(t, line) : 0;
}

/* The grey of text on the background: light on dark, dark on light. */
static uint8_t text_grey(const struct display *d)
{
	return d->grey < 128 ? 230 : 20;
}

int display_draw_lines(struct display *d, const char *const *lines, size_t n, int cx, int y,
		       int rect[4])
{
	struct text *t = text_of(d);
	int x0 = cx, x1 = cx, y1 = y, rc = 0;
	if (!t)
		rc = -1;
	for (size_t i = 0; t && i < n; i++) {
		int box[4];
		if (text_draw(t, lines[i], cx, y + (int)i * text_line_px(t), text_grey(d), box))
			rc = -1;
		if (box[2] > 0) {
			if (box[0] < x0) x0 = box[0];
			if (box[0] + box[2] > x1) x1 = box[0] + box[2];
			if (box[1] + box[3] > y1) y1 = box[1] + box[3];
		}
	}
	if (rect) {
		rect[0] = x0;
		rect[1] = y;
		rect[2] = x1 - x0;
		rect[3] = y1 - y;
	}
	return rc;
}

int display_draw_text(struct display *d, const char *const *lines, size_t n)
{
	struct text *t = text_of(d);
	if (!t)
		return -1;
	int total = (int)n * text_line_px(t);
	return display_draw_lines(d, lines, n, d->w / 2, (d->h - total) / 2, NULL);
}

uint8_t *display_read_pixels(struct display *d, int *w, int *h)
{
	uint8_t *px = xmalloc((size_t)d->w * (size_t)d->h * 4);
	if (SDL_RenderReadPixels(d->r, NULL, SDL_PIXELFORMAT_RGBA32, px, d->w * 4)) {
		free(px);
		return NULL;
	}
	*w = d->w;
	*h = d->h;
	return px;
}

int display_poll_key(struct display *d, char *key, size_t keylen, uint32_t *t_ms)
{
	(void)d;
	SDL_Event ev;
	while (SDL_PollEvent(&ev)) {
		if (ev.type == SDL_QUIT)
			return 2;
		if (ev.type == SDL_KEYDOWN && !ev.key.repeat) {
			/* Ctrl+Alt with a key is the experimenter's chord, named apart from the key. */
			bool chord = (ev.key.keysym.mod & KMOD_CTRL) && (ev.key.keysym.mod & KMOD_ALT);
			snprintf(key, keylen, "%s%s", chord ? "ctrl+alt+" : "",
				 SDL_GetKeyName(ev.key.keysym.sym));
			for (char *p = key; *p; p++)
				*p = (char)tolower((unsigned char)*p);
			if (t_ms)
				*t_ms = ev.key.timestamp;
			return 1;
		}
	}
	return 0;
}
