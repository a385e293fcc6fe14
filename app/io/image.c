/* image — image files to and from RGBA8 buffers through SDL2_image (see image.h).
 *
 * SDL2_image decodes every format it supports to an SDL surface, which we convert to RGBA32 (bytes
 * R, G, B, A in memory). For PNG the stored bit depth and colour type come from the IHDR chunk,
 * since the decoder reduces 16-bit channels to 8 bits. Surfaces never leave this file. Every file's
 * size is read from its header (imagehead.c) before the decoder sees it, and refused over the
 * caller's limit: decoders allocate whatever a header claims. */
#include "image.h"
#include "imagehead.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <SDL.h>
#include <SDL_image.h>

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
	FILE *f = fopen(path, "rb");
	if (!f) {
		snprintf(err, errlen, "cannot open %s", path);
		return -1;
	}
	if (header_check(f, path, max_side, err, errlen)) {
		fclose(f);
		return -1;
	}
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
	if (!is_png) {
		SDL_PixelFormat *pf = s->format;
		info->bits = 8;
		info->channels = pf->Amask ? 4 : (pf->BitsPerPixel == 8 && !pf->palette) ? 1 : 3;
		info->alpha = pf->Amask != 0;
	}
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

void image_free(struct image *img)
{
	if (!img)
		return;
	free(img->rgba);
	img->rgba = NULL;
}
