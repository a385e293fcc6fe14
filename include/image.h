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

/* The largest width or height accepted by default, in pixels: a decoded 8192×8192 image takes
 * 256 MiB as RGBA8. A rig's max_image_side or a command's option may set another limit. */
#define IMAGE_MAX_SIDE_DEFAULT 8192L

/* Decodes PATH fully (so a truncated file is caught) and fills INFO. Before decoding, the size is
 * read from the file's header (imagehead.h) and a file wider or taller than MAX_SIDE pixels
 * (<= 0: IMAGE_MAX_SIDE_DEFAULT) is refused, so a small file claiming a huge picture costs no
 * memory. Returns 0, or -1 with a sentence in ERR naming the path (a file that does not exist or
 * cannot be read, is not an image, is over the size limit, is corrupt or truncated). */
int image_probe_max(const char *path, long max_side, struct image_info *info, char *err,
		    size_t errlen);
/* Decodes PATH into IMG (RGBA8), with the same header check as image_probe_max. Returns 0 or -1
 * with ERR. */
int image_load_max(const char *path, long max_side, struct image *img, struct image_info *info,
		   char *err, size_t errlen);
/* image_probe_max and image_load_max with the default limit. */
int image_probe(const char *path, struct image_info *info, char *err, size_t errlen);
int image_load(const char *path, struct image *img, struct image_info *info, char *err,
	       size_t errlen);
/* Writes IMG as a PNG. Returns 0 or -1 with ERR. */
int image_save_png(const char *path, const struct image *img, char *err, size_t errlen);
void image_free(struct image *img);

#endif
