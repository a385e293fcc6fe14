/* display — the observer's window and renderer, and everything drawn on it: background, stimulus
 * textures at a calibrated size, fixation mark, masks, feedback marks, the photodiode marker, text
 * screens (breaks, pause menu) and screenshots. SDL2 lives only in app/present.
 *
 * A real display gets a full-screen (or, with `window`, a rig-sized) window on the chosen display
 * and a renderer created with vsync; headless uses SDL's dummy video driver (unless SDL_VIDEODRIVER
 * names another) and a software renderer, with an output of the rig's size. Drawing is in output
 * pixels with the origin at the top left; stimuli are centred. Textures are created only by the
 * caller's explicit calls (display_texture_*), never implicitly while drawing, except that text
 * screens cache their glyphs. */
#ifndef TACHIST_DISPLAY_H
#define TACHIST_DISPLAY_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

struct SDL_Renderer;
struct SDL_Texture;
struct display;

struct display_opts {
	bool headless;
	bool window;            /* windowed instead of full screen (real displays) */
	bool vsync;             /* real displays: renderer with vsync (default true) */
	int display_index;
	int width_px, height_px;/* window size in headless/windowed mode (the rig's) */
	int background;         /* grey 0..255 */
	const char *title;
};

/* Opens the window and renderer. Returns NULL with a sentence in ERR on failure. */
struct display *display_open(const struct display_opts *o, char *err, size_t errlen);
void display_close(struct display *d);

struct SDL_Renderer *display_renderer(struct display *d);
/* Size of the drawable output in pixels. */
void display_size(const struct display *d, int *w, int *h);
/* Size of the physical display (desktop mode) the window is on; headless: the output size. */
void display_screen_size(const struct display *d, int *w, int *h);
/* True when the renderer really has vsync (SDL_RENDERER_PRESENTVSYNC granted). */
bool display_has_vsync(const struct display *d);
const char *display_driver(const struct display *d);
void display_set_background(struct display *d, int grey);

/* A static texture from 8-bit RGBA (row-major, no padding) with the scaling filter NEAREST or
 * linear. Returns NULL with ERR. */
struct SDL_Texture *display_texture_rgba(struct display *d, int w, int h, const uint8_t *rgba,
					 bool nearest, char *err, size_t errlen);
/* A grey noise texture W×H (each pixel uniform 0..255 from SEED, blocks of CELL px). */
struct SDL_Texture *display_texture_noise(struct display *d, int w, int h, int cell, uint64_t seed,
					  char *err, size_t errlen);
void display_texture_free(struct SDL_Texture *t);
void display_texture_size(struct SDL_Texture *t, int *w, int *h);

/* The rectangle, centred, where a texture of TW×TH is drawn so that its longer side is LONG_PX. */
void display_stim_rect(const struct display *d, int tw, int th, int long_px, int rect[4]);

void display_clear(struct display *d);
/* Fills RECT (x, y, w, h in output pixels; NULL = the whole output) with the colour R, G, B. */
void display_fill_rect(struct display *d, const int rect[4], uint8_t r, uint8_t g, uint8_t b);
void display_draw_texture(struct display *d, struct SDL_Texture *t, int long_px);
void display_draw_fixation(struct display *d, int size_px);
/* Feedback at fixation: a tick when CORRECT, else a cross; SIZE_PX across. */
void display_draw_feedback(struct display *d, bool correct, int size_px);
/* Photodiode patch: CORNER as enum rig_corner (0 none), SIDE px, white or black. */
void display_draw_marker(struct display *d, int corner, int side, bool white);
/* The font of text on this display (text.h): FONT_FILE (NULL: the system's sans-serif) with
 * capitals CAP_PX high. Until it is called, text uses the system's sans-serif with capitals 1/60 of
 * the output's height. Returns 0, or -1 with ERR (the text in use is kept). */
int display_set_text(struct display *d, const char *font_file, int cap_px, char *err, size_t errlen);
/* Distance between baselines, and the width of LINE, in pixels (0 without a font). */
int display_text_line_px(struct display *d);
int display_text_width(struct display *d, const char *line);
/* UTF-8 lines, each centred on CX, the first line box's top at Y; RECT (may be NULL) gets the box
 * of the ink drawn. Returns 0, or -1 when a line could not be drawn. */
int display_draw_lines(struct display *d, const char *const *lines, size_t n, int cx, int y,
		       int rect[4]);
/* UTF-8 lines centred on the screen. Returns 0 or -1 as display_draw_lines. */
int display_draw_text(struct display *d, const char *const *lines, size_t n);

/* Reads the current (not yet presented) back buffer as RGBA8 into a malloc'd buffer of w·h·4
 * bytes. Returns NULL on failure. */
uint8_t *display_read_pixels(struct display *d, int *w, int *h);

/* Events outside the responder: returns 1 and fills KEY (lower-case SDL key name, prefixed with
 * "ctrl+alt+" when both are held: the experimenter's chords) and T_MS when a
 * key went down, 2 when the window was asked to close, 0 when the queue is empty. */
int display_poll_key(struct display *d, char *key, size_t keylen, uint32_t *t_ms);

#endif
