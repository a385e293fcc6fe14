/* image — image files to and from plain 8-bit RGBA pixel buffers (SDL2_image), the only image file
 * code outside the presenter. Pixel arithmetic on the buffers lives in core (pixels.h). */
#ifndef TACHIST_IMAGE_H
#define TACHIST_IMAGE_H

#include <stddef.h>
#include <stdint.h>

struct image_info {
	int width, height;
	int channels;        /* 1 grey, 2 grey+alpha, 3 RGB, 4 RGBA, as stored in the file */
	int bits;            /* bits per channel as stored (1, 2, 4, 8 or 16 for PNG; 8 otherwise).
	                      * Decoding always gives 8 bits: 16-bit values keep their high byte. */
	int alpha;           /* 1 when the file can hold transparency: an alpha channel, or a PNG
	                      * tRNS chunk (then channels stays 1 or 3) */
	char format[8];      /* "png", "jpg", "bmp", ... */
};

/* 8-bit RGBA, row-major, no padding; owned by the caller (image_free). */
struct image {
	int width, height;
	uint8_t *rgba;
};

/* Decodes PATH fully (so a truncated file is caught) and fills INFO. Returns 0, or -1 with a
 * sentence in ERR naming the path (a file that does not exist or cannot be read, is not an image,
 * is corrupt or truncated). */
int image_probe(const char *path, struct image_info *info, char *err, size_t errlen);
/* Decodes PATH into IMG (RGBA8). Returns 0 or -1 with ERR. */
int image_load(const char *path, struct image *img, struct image_info *info, char *err,
	       size_t errlen);
/* Writes IMG as a PNG. Returns 0 or -1 with ERR. */
int image_save_png(const char *path, const struct image *img, char *err, size_t errlen);
void image_free(struct image *img);

#endif
