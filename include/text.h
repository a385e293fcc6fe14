/* text — UTF-8 text on the observer's display, drawn with SDL2_ttf in a real font that fontconfig
 * finds (the system's sans-serif unless the protocol names a font file).
 *
 * A font is opened at a cap height in pixels: the height of a capital letter ("H", from the font's
 * glyph metrics), which is what the protocol's text size in degrees of visual angle means, so text
 * has the same size on every rig. Rendered lines are kept as textures in a small cache keyed by
 * their text and grey, so a screen drawn on every frame (a key legend, a text screen) renders each
 * line once. Only app/present uses this module. */
#ifndef TACHIST_TEXT_H
#define TACHIST_TEXT_H

#include <stddef.h>
#include <stdint.h>

struct SDL_Renderer;
struct text;

/* The file of the font fontconfig matches for FAMILY ("sans-serif" when NULL), malloc'd, or NULL
 * with a sentence in ERR. */
char *text_find_font(const char *family, char *err, size_t errlen);

/* Opens FONT_FILE (NULL: the system's sans-serif) at the size whose capital H is CAP_PX pixels
 * high (as near as the font's hinting allows), for drawing on R. Returns NULL with ERR. */
struct text *text_open(struct SDL_Renderer *r, const char *font_file, int cap_px, char *err,
		       size_t errlen);
void text_close(struct text *t);

/* The capital letter's height and the distance between baselines, in pixels. */
int text_cap_px(const struct text *t);
int text_line_px(const struct text *t);
/* The width of LINE in pixels (0 when it cannot be measured). */
int text_width(struct text *t, const char *line);

/* Draws LINE centred on CX with the top of its line box at Y, in GREY (0..255). RECT (may be NULL)
 * gets the box drawn (x, y, w, h). Returns 0, or -1 when the line cannot be rendered (nothing is
 * drawn). An empty line draws nothing and returns 0. */
int text_draw(struct text *t, const char *line, int cx, int y, uint8_t grey, int rect[4]);

#endif
