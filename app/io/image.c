/* image — image files to and from RGBA8 buffers through SDL2_image (see image.h).
 *
 * SDL2_image decodes every format it supports to an SDL surface, which we convert to RGBA32 (bytes
 * R, G, B, A in memory). For PNG the stored bit depth and colour type come from the IHDR chunk,
 * since the decoder reduces 16-bit channels to 8 bits. Surfaces never leave this file. Every file's
 * size is read from its header (imagehead.c) before the decoder sees it, and refused over the
 * caller's limit: decoders allocate whatever a header claims. PNG files are decoded here with
 * libpng itself (png_decode), with our own error and warning handlers: SDL2_image leaves libpng's
 * defaults on, which print "libpng error:" lines on the terminal. */
#include "image.h"
#include "imagehead.h"
#include "infile.h"

#include <setjmp.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <SDL.h>
#include <SDL_image.h>
#include <png.h>

static int initialised;

static void image_init(void)
{
	if (!initialised) {
		IMG_Init(IMG_INIT_PNG | IMG_INIT_JPG);
		initialised = 1;
	}
}

/* Looks through the chunks after IHDR, up to the first IDAT, for a tRNS chunk (transparency
 * for grey, RGB and palette images). F is positioned just after IHDR's CRC. */
static int png_has_trns(FILE *f)
{
	unsigned char c[8];
	for (int guard = 0; guard < 1000 && fread(c, 1, 8, f) == 8; guard++) {
		unsigned long len = (unsigned long)c[0] << 24 | (unsigned long)c[1] << 16 |
				    (unsigned long)c[2] << 8 | c[3];
		if (!memcmp(c + 4, "tRNS", 4))
			return 1;
		if (!memcmp(c + 4, "IDAT", 4) || !memcmp(c + 4, "IEND", 4))
			return 0;
		if (len > 0x7fffffffUL || fseek(f, (long)len + 4, SEEK_CUR))
			return 0;
	}
	return 0;
}

/* Reads the PNG signature and IHDR: returns 0 and fills channels, bits and alpha, -1 when not a
 * PNG. */
static int png_header(FILE *f, struct image_info *info)
{
	unsigned char h[29];
	if (fread(h, 1, sizeof h, f) != sizeof h)
		return -1;
	static const unsigned char sig[8] = {0x89, 'P', 'N', 'G', '\r', '\n', 0x1a, '\n'};
	if (memcmp(h, sig, 8) || memcmp(h + 12, "IHDR", 4))
		return -1;
	info->bits = h[24];
	switch (h[25]) {
	case 0: info->channels = 1; break;
	case 2: info->channels = 3; break;
	case 3: info->channels = 3; info->bits = 8; break;  /* palette entries are RGB8 */
	case 4: info->channels = 2; break;
	case 6: info->channels = 4; break;
	default: return -1;
	}
	info->alpha = info->channels == 2 || info->channels == 4;
	if (!info->alpha && fseek(f, 33, SEEK_SET) == 0)   /* 8 signature + 25 IHDR */
		info->alpha = png_has_trns(f);
	return 0;
}

/* ---- PNG through libpng, so every message is ours ---- */

/* What a PNG decode owns; reached through one pointer that never changes after setjmp. */
struct png_job {
	jmp_buf jump;
	char msg[160];           /* libpng's error text, for our own message */
	FILE *f;
	png_structp png;
	png_infop info;
	unsigned char *rgba;
	png_bytep *rows;
	int width, height;
};

/* libpng calls this on an error and must not return: back to png_decode's setjmp. */
static void png_on_error(png_structp png, png_const_charp msg)
{
	struct png_job *j = png_get_error_ptr(png);
	snprintf(j->msg, sizeof j->msg, "%s", msg ? msg : "unknown error");
	longjmp(j->jump, 1);
}

/* Warnings (a damaged ancillary chunk, an odd colour profile) do not stop a decode and are not
 * for the user's terminal. */
static void png_on_warning(png_structp png, png_const_charp msg)
{
	(void)png;
	(void)msg;
}

/* The part of the decode that may longjmp back: reads J->f into J->rgba as RGBA8 with the same
 * conversions SDL2_image makes (16-bit channels stripped to their high byte, palette, grey and
 * low bit depths expanded, tRNS as alpha, opaque alpha added). Returns 0, or -1 with J->msg. */
static int png_decode_body(struct png_job *j, long max_side)
{
	png_init_io(j->png, j->f);
	png_set_user_limits(j->png, (png_uint_32)max_side, (png_uint_32)max_side);
	png_read_info(j->png, j->info);
	png_uint_32 w = png_get_image_width(j->png, j->info);
	png_uint_32 h = png_get_image_height(j->png, j->info);
	int type = png_get_color_type(j->png, j->info);
	int depth = png_get_bit_depth(j->png, j->info);
	if (depth == 16)
		png_set_strip_16(j->png);
	if (depth < 8)
		png_set_packing(j->png);
	if (type == PNG_COLOR_TYPE_PALETTE)
		png_set_palette_to_rgb(j->png);
	if (type == PNG_COLOR_TYPE_GRAY && depth < 8)
		png_set_expand_gray_1_2_4_to_8(j->png);
	if (png_get_valid(j->png, j->info, PNG_INFO_tRNS))
		png_set_tRNS_to_alpha(j->png);
	if (type == PNG_COLOR_TYPE_GRAY || type == PNG_COLOR_TYPE_GRAY_ALPHA)
		png_set_gray_to_rgb(j->png);
	if (!(type & PNG_COLOR_MASK_ALPHA) && !png_get_valid(j->png, j->info, PNG_INFO_tRNS))
		png_set_add_alpha(j->png, 0xff, PNG_FILLER_AFTER);
	png_set_interlace_handling(j->png);
	png_read_update_info(j->png, j->info);
	size_t row = (size_t)w * 4;
	if (png_get_rowbytes(j->png, j->info) != row) {
		snprintf(j->msg, sizeof j->msg, "unexpected row layout");
		return -1;
	}
	j->rgba = malloc(row * (size_t)h);
	j->rows = malloc(sizeof *j->rows * (size_t)h);
	if (!j->rgba || !j->rows) {
		snprintf(j->msg, sizeof j->msg, "out of memory");
		return -1;
	}
	for (png_uint_32 y = 0; y < h; y++)
		j->rows[y] = j->rgba + row * y;
	png_read_image(j->png, j->rows);
	png_read_end(j->png, NULL);
	j->width = (int)w;
	j->height = (int)h;
	return 0;
}

/* Decodes the PNG file PATH into IMG (RGBA8). Returns 0, or -1 with ERR naming PATH and what
 * libpng found wrong; nothing is printed. */
static int png_decode(const char *path, long max_side, struct image *img, char *err, size_t errlen)
{
	struct png_job job;
	struct png_job *j = &job;
	memset(j, 0, sizeof *j);
	volatile int rc = -1;   /* set after setjmp */
	j->f = fopen(path, "rb");
	if (!j->f) {
		snprintf(err, errlen, "cannot open %s", path);
		return -1;
	}
	j->png = png_create_read_struct(PNG_LIBPNG_VER_STRING, j, png_on_error, png_on_warning);
	if (j->png)
		j->info = png_create_info_struct(j->png);
	if (!j->png || !j->info) {
		snprintf(j->msg, sizeof j->msg, "out of memory");
	} else if (setjmp(j->jump) == 0) {
		rc = png_decode_body(j, max_side);
	}
	if (j->png)
		png_destroy_read_struct(&j->png, j->info ? &j->info : NULL, NULL);
	fclose(j->f);
	free(j->rows);
	if (rc) {
		free(j->rgba);
		snprintf(err, errlen, "%s cannot be decoded (%s)", path, j->msg);
		return -1;
	}
	img->rgba = j->rgba;
	img->width = j->width;
	img->height = j->height;
	return 0;
}

static const char *format_of(SDL_RWops *rw)
{
	if (IMG_isPNG(rw)) return "png";
	if (IMG_isJPG(rw)) return "jpg";
	if (IMG_isBMP(rw)) return "bmp";
	if (IMG_isGIF(rw)) return "gif";
	if (IMG_isTIF(rw)) return "tif";
	if (IMG_isWEBP(rw)) return "webp";
	if (IMG_isPNM(rw)) return "pnm";
	return NULL;
}

/* A colour key (how the decoder hands over a PNG tRNS chunk) survives conversion only as a key,
 * not as alpha; this sets alpha to 0 in C (RGBA32) wherever S's raw pixel equals the key, so the
 * buffer shows the transparency the presenter will show. */
static void key_to_alpha(SDL_Surface *s, SDL_Surface *c)
{
	Uint32 key;
	if (SDL_GetColorKey(s, &key) || SDL_LockSurface(s))
		return;
	if (SDL_LockSurface(c)) {
		SDL_UnlockSurface(s);
		return;
	}
	int bpp = s->format->BytesPerPixel;
	for (int y = 0; y < s->h; y++) {
		const Uint8 *sp = (const Uint8 *)s->pixels + (size_t)s->pitch * (size_t)y;
		Uint8 *cp = (Uint8 *)c->pixels + (size_t)c->pitch * (size_t)y;
		for (int x = 0; x < s->w; x++, sp += bpp) {
			Uint32 v = 0;
			memcpy(&v, sp, (size_t)bpp);   /* little-endian hosts: the low bytes hold the value */
			if (v == key)
				cp[4 * x + 3] = 0;
		}
	}
	SDL_UnlockSurface(c);
	SDL_UnlockSurface(s);
}

/* Reads the size from the header of the open file F and refuses PATH when it is not an image we
 * know, or is over MAX_SIDE. Returns 0 or -1 with ERR. */
static int header_check(FILE *f, const char *path, long max_side, char *err, size_t errlen)
{
	struct imagehead h;
	int rc = imagehead_read(f, &h);
	if (rc == IMAGEHEAD_UNKNOWN) {
		snprintf(err, errlen, "%s is not an image in a supported format", path);
		return -1;
	}
	if (rc) {
		snprintf(err, errlen, "%s cannot be decoded (its %s header gives no size)", path,
			 h.format);
		return -1;
	}
	if (max_side <= 0)
		max_side = IMAGE_MAX_SIDE_DEFAULT;
	if (h.width > max_side || h.height > max_side) {
		snprintf(err, errlen, "%s is %ldx%ld px by its header, over the limit of %ld px a "
			 "side; not decoded", path, h.width, h.height, max_side);
		return -1;
	}
	return 0;
}

int image_load_max(const char *path, long max_side, struct image *img, struct image_info *info,
		   char *err, size_t errlen)
{
	image_init();
	memset(img, 0, sizeof *img);
	memset(info, 0, sizeof *info);
	char why[160];
	FILE *f = infile_open(path, INFILE_MAX_IMAGE, why, sizeof why);
	if (!f) {
		snprintf(err, errlen, "cannot open %s: %s", path, why);
		return -1;
	}
	if (header_check(f, path, max_side, err, errlen)) {
		fclose(f);
		return -1;
	}
	rewind(f);
	unsigned char sig[8];
	static const unsigned char png_sig[8] = {0x89, 'P', 'N', 'G', '\r', '\n', 0x1a, '\n'};
	int png_file = fread(sig, 1, 8, f) == 8 && !memcmp(sig, png_sig, 8);
	rewind(f);
	int is_png = png_header(f, info) == 0;
	fclose(f);
	if (is_png && info->channels == 1 && info->alpha) {
		/* SDL2_image 2.6 turns grey + tRNS into a 16-bit surface of wrong colours: refuse
		 * rather than measure (or show) pixels that are not the file's. */
		snprintf(err, errlen, "%s is a grey PNG with a transparent grey level (tRNS chunk), "
			 "which SDL2_image decodes wrongly; save it without transparency or as grey "
			 "with an alpha channel", path);
		return -1;
	}
	if (png_file) {   /* every PNG through libpng here, a damaged one too: its messages are ours */
		if (max_side <= 0)
			max_side = IMAGE_MAX_SIDE_DEFAULT;
		snprintf(info->format, sizeof info->format, "png");
		if (png_decode(path, max_side, img, err, errlen))
			return -1;
		info->width = img->width;
		info->height = img->height;
		return 0;
	}
	SDL_RWops *rw = SDL_RWFromFile(path, "rb");
	if (!rw) {
		snprintf(err, errlen, "cannot open %s", path);
		return -1;
	}
	const char *fmt = format_of(rw);
	if (!fmt) {
		SDL_RWclose(rw);
		snprintf(err, errlen, "%s is not an image in a supported format", path);
		return -1;
	}
	snprintf(info->format, sizeof info->format, "%s", fmt);
	SDL_Surface *s = IMG_Load_RW(rw, 1);
	if (!s) {
		snprintf(err, errlen, "%s cannot be decoded (%s)", path, IMG_GetError());
		return -1;
	}
	SDL_PixelFormat *pf = s->format;
	info->bits = 8;
	info->channels = pf->Amask ? 4 : (pf->BitsPerPixel == 8 && !pf->palette) ? 1 : 3;
	info->alpha = pf->Amask != 0;
	SDL_Surface *c = SDL_ConvertSurfaceFormat(s, SDL_PIXELFORMAT_RGBA32, 0);
	if (c && SDL_HasColorKey(s))
		key_to_alpha(s, c);
	SDL_FreeSurface(s);
	if (!c) {
		snprintf(err, errlen, "%s cannot be converted (%s)", path, SDL_GetError());
		return -1;
	}
	info->width = img->width = c->w;
	info->height = img->height = c->h;
	size_t row = (size_t)c->w * 4;
	img->rgba = malloc(row * (size_t)c->h);
	if (!img->rgba) {
		SDL_FreeSurface(c);
		snprintf(err, errlen, "out of memory for %s", path);
		return -1;
	}
	SDL_LockSurface(c);
	for (int y = 0; y < c->h; y++)
		memcpy(img->rgba + row * (size_t)y, (const unsigned char *)c->pixels + (size_t)c->pitch * (size_t)y, row);
	SDL_UnlockSurface(c);
	SDL_FreeSurface(c);
	return 0;
}

int image_load(const char *path, struct image *img, struct image_info *info, char *err,
	       size_t errlen)
{
	return image_load_max(path, 0, img, info, err, errlen);
}

int image_probe_max(const char *path, long max_side, struct image_info *info, char *err,
		    size_t errlen)
{
	struct image img;
	if (image_load_max(path, max_side, &img, info, err, errlen))
		return -1;
	image_free(&img);
	return 0;
}

int image_probe(const char *path, struct image_info *info, char *err, size_t errlen)
{
	return image_probe_max(path, 0, info, err, errlen);
}

int image_save_png(const char *path, const struct image *img, char *err, size_t errlen)
{
	image_init();
	SDL_Surface *s = SDL_CreateRGBSurfaceWithFormatFrom(img->rgba, img->width, img->height, 32,
							    img->width * 4, SDL_PIXELFORMAT_RGBA32);
	if (!s) {
		snprintf(err, errlen, "cannot wrap pixels for %s (%s)", path, SDL_GetError());
		return -1;
	}
	int rc = IMG_SavePNG(s, path);
	SDL_FreeSurface(s);
	if (rc) {
		snprintf(err, errlen, "cannot write %s (%s)", path, IMG_GetError());
		return -1;
	}
	return 0;
}

int image_save_png_channels(const char *path, const struct image *img, int channels, char *err,
			    size_t errlen)
{
	static const png_uint_32 formats[5] = {0, PNG_FORMAT_GRAY, PNG_FORMAT_GA, PNG_FORMAT_RGB,
					      PNG_FORMAT_RGBA};
	static const int take[5][4] = {{0}, {0}, {0, 3}, {0, 1, 2}, {0, 1, 2, 3}};
	if (channels < 1 || channels > 4) {
		snprintf(err, errlen, "cannot write %s with %d channels", path, channels);
		return -1;
	}
	size_t npix = (size_t)img->width * (size_t)img->height;
	unsigned char *buf = malloc(npix * (size_t)channels);
	if (!buf) {
		snprintf(err, errlen, "out of memory for %s", path);
		return -1;
	}
	for (size_t i = 0; i < npix; i++)
		for (int c = 0; c < channels; c++)
			buf[i * (size_t)channels + (size_t)c] = img->rgba[4 * i + (size_t)take[channels][c]];
	png_image pi;
	memset(&pi, 0, sizeof pi);
	pi.version = PNG_IMAGE_VERSION;
	pi.width = (png_uint_32)img->width;
	pi.height = (png_uint_32)img->height;
	pi.format = formats[channels];
	int ok = png_image_write_to_file(&pi, path, 0, buf, 0, NULL);
	free(buf);
	if (!ok) {
		snprintf(err, errlen, "cannot write %s (%s)", path, pi.message);
		png_image_free(&pi);
		return -1;
	}
	return 0;
}

int image_colour_channels(const struct image_info *a, const struct image_info *b)
{
	return a->channels <= 2 && b->channels <= 2 ? 1 : 3;
}

void image_free(struct image *img)
{
	if (!img)
		return;
	free(img->rgba);
	img->rgba = NULL;
}
