/* imagehead — an image file's format and pixel size read from its header alone, before anything is
 * decoded, so that a small file claiming an enormous picture can be refused without allocating it.
 *
 * Knows the formats io/image.c accepts: PNG (IHDR), JPEG (the first SOF marker), BMP (the DIB
 * header), GIF (the logical screen and the first image descriptor, whichever is larger), TIFF
 * (the first IFD), WebP (VP8, VP8L and VP8X) and PNM (P1–P6). Reads at most a few kilobytes
 * (JPEG and GIF walk their segments up to the first frame). Called by io/image.c. */
#ifndef TACHIST_IMAGEHEAD_H
#define TACHIST_IMAGEHEAD_H

#include <stdio.h>

enum imagehead_status {
	IMAGEHEAD_OK = 0,
	IMAGEHEAD_UNKNOWN = -1,   /* no signature of a known format */
	IMAGEHEAD_BROKEN = -2,    /* a known signature, but the size cannot be read from the header */
};

struct imagehead {
	const char *format;       /* "png", "jpg", "bmp", "gif", "tif", "webp", "pnm" (static text) */
	long width, height;       /* as the header claims (GIF: the larger of screen and first frame) */
};

/* Reads F from its current position (normally the start of the file). Returns IMAGEHEAD_OK and
 * fills H, or a negative status; H->format is set whenever the signature was recognised. */
int imagehead_read(FILE *f, struct imagehead *h);

#endif
