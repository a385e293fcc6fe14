/* test_imagehead — image sizes read from headers: files written by SDL's and SDL2_image's own
 * encoders (BMP, PNG, JPEG), and headers built here byte by byte from each format's specification
 * (GIF89a, TIFF 6.0, WebP RFC 9649, netpbm), including sizes no decoder should ever be asked for. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>
#include <cmocka.h>

#include <SDL.h>
#include <SDL_image.h>

#include "image.h"
#include "imagehead.h"

static int head_of_bytes(const void *bytes, size_t n, struct imagehead *h)
{
	FILE *f = fmemopen((void *)bytes, n, "rb");
	assert_non_null(f);
	int rc = imagehead_read(f, h);
	fclose(f);
	return rc;
}

static int head_of_file(const char *path, struct imagehead *h)
{
	FILE *f = fopen(path, "rb");
	assert_non_null(f);
	int rc = imagehead_read(f, h);
	fclose(f);
	return rc;
}

/* BMP, PNG and JPEG of 37×23 as SDL and SDL2_image write them. */
static void imagehead_testEncoders(void **state)
{
	(void)state;
	char dir[] = "/tmp/imagehead.XXXXXX";
	assert_non_null(mkdtemp(dir));
	SDL_Surface *s = SDL_CreateRGBSurfaceWithFormat(0, 37, 23, 32, SDL_PIXELFORMAT_RGBA32);
	assert_non_null(s);
	SDL_FillRect(s, NULL, SDL_MapRGBA(s->format, 90, 120, 200, 255));
	char p[3][64];
	snprintf(p[0], sizeof p[0], "%s/a.bmp", dir);
	snprintf(p[1], sizeof p[1], "%s/a.png", dir);
	snprintf(p[2], sizeof p[2], "%s/a.jpg", dir);
	assert_int_equal(SDL_SaveBMP(s, p[0]), 0);
	assert_int_equal(IMG_SavePNG(s, p[1]), 0);
	assert_int_equal(IMG_SaveJPG(s, p[2], 90), 0);
	SDL_FreeSurface(s);
	const char *fmt[3] = {"bmp", "png", "jpg"};
	for (int i = 0; i < 3; i++) {
		struct imagehead h;
		assert_int_equal(head_of_file(p[i], &h), IMAGEHEAD_OK);
		assert_string_equal(h.format, fmt[i]);
		assert_int_equal(h.width, 37);
		assert_int_equal(h.height, 23);
		/* The loader agrees with the header and refuses the file one pixel under its width. */
		struct image_info info;
		char err[256];
		assert_int_equal(image_probe_max(p[i], 37, &info, err, sizeof err), 0);
		assert_int_equal(info.width, 37);
		assert_int_equal(image_probe_max(p[i], 36, &info, err, sizeof err), -1);
		assert_non_null(strstr(err, "37x23 px by its header, over the limit of 36 px"));
		unlink(p[i]);
	}
	rmdir(dir);
}

/* A PNG signature and IHDR claiming 100000×100000 (PNG specification, 11.2.2): refused from the
 * header, whatever follows. */
static void imagehead_testHugePng(void **state)
{
	(void)state;
	unsigned char b[33] = {0x89, 'P', 'N', 'G', '\r', '\n', 0x1a, '\n', 0, 0, 0, 13, 'I', 'H',
			       'D', 'R', 0, 0x01, 0x86, 0xA0, 0, 0x01, 0x86, 0xA0, 8, 2};
	struct imagehead h;
	assert_int_equal(head_of_bytes(b, sizeof b, &h), IMAGEHEAD_OK);
	assert_int_equal(h.width, 100000);
	assert_int_equal(h.height, 100000);
	char path[] = "/tmp/imagehead-huge.XXXXXX";
	int fd = mkstemp(path);
	assert_true(fd >= 0);
	assert_int_equal(write(fd, b, sizeof b), (ssize_t)sizeof b);
	close(fd);
	struct image_info info;
	char err[256];
	assert_int_equal(image_probe(path, &info, err, sizeof err), -1);
	assert_non_null(strstr(err, "100000x100000 px by its header, over the limit of 8192 px"));
	unlink(path);
}

/* GIF89a: the logical screen (bytes 6–9, little-endian) and, after a global colour table and a
 * graphic control extension, an image descriptor with a larger frame, which wins. */
static void imagehead_testGif(void **state)
{
	(void)state;
	unsigned char b[64] = "GIF89a";
	size_t n = 6;
	unsigned char screen[7] = {40, 0, 30, 0, 0x80, 0, 0};   /* 40×30, 2-entry global table */
	memcpy(b + n, screen, 7);
	n += 7 + 6;                                              /* the colour table */
	unsigned char gce[8] = {0x21, 0xF9, 4, 0, 0, 0, 0, 0};
	memcpy(b + n, gce, 8);
	n += 8;
	unsigned char desc[10] = {0x2C, 0, 0, 0, 0, 0x10, 0x27, 20, 0};   /* 10000×20 frame */
	memcpy(b + n, desc, 10);
	n += 10;
	struct imagehead h;
	assert_int_equal(head_of_bytes(b, n, &h), IMAGEHEAD_OK);
	assert_string_equal(h.format, "gif");
	assert_int_equal(h.width, 10000);
	assert_int_equal(h.height, 30);
}

/* TIFF 6.0: little- and big-endian files, ImageWidth as SHORT and ImageLength as LONG. */
static void imagehead_testTiff(void **state)
{
	(void)state;
	unsigned char le[38] = {'I', 'I', 42, 0, 8, 0, 0, 0, 2, 0,
				0x00, 0x01, 3, 0, 1, 0, 0, 0, 0x34, 0x12, 0, 0,
				0x01, 0x01, 4, 0, 1, 0, 0, 0, 0x40, 0x42, 0x0F, 0};
	struct imagehead h;
	assert_int_equal(head_of_bytes(le, sizeof le, &h), IMAGEHEAD_OK);
	assert_string_equal(h.format, "tif");
	assert_int_equal(h.width, 0x1234);
	assert_int_equal(h.height, 1000000);
	unsigned char be[38] = {'M', 'M', 0, 42, 0, 0, 0, 8, 0, 2,
				0x01, 0x00, 0, 3, 0, 0, 0, 1, 0x00, 0x40, 0, 0,
				0x01, 0x01, 0, 3, 0, 0, 0, 1, 0x00, 0x30, 0, 0};
	assert_int_equal(head_of_bytes(be, sizeof be, &h), IMAGEHEAD_OK);
	assert_int_equal(h.width, 64);
	assert_int_equal(h.height, 48);
	be[9] = 1;   /* only the width: no size */
	assert_int_equal(head_of_bytes(be, sizeof be, &h), IMAGEHEAD_BROKEN);
}

/* WebP, RFC 9649: VP8X canvas (24-bit sizes minus one), VP8L (14-bit sizes minus one after 0x2F)
 * and VP8 key frames (14-bit sizes after the start code 9D 01 2A). */
static void imagehead_testWebp(void **state)
{
	(void)state;
	unsigned char x[30] = {'R', 'I', 'F', 'F', 0, 0, 0, 0, 'W', 'E', 'B', 'P', 'V', 'P', '8',
			       'X', 10, 0, 0, 0, 0, 0, 0, 0, 0x1F, 0x4E, 0, 0x63, 0, 0};
	struct imagehead h;
	assert_int_equal(head_of_bytes(x, sizeof x, &h), IMAGEHEAD_OK);
	assert_string_equal(h.format, "webp");
	assert_int_equal(h.width, 20000);
	assert_int_equal(h.height, 100);
	/* VP8L: width − 1 = 299 in bits 0–13, height − 1 = 199 in bits 14–27. */
	unsigned v = 299u | 199u << 14;
	unsigned char l[30] = {'R', 'I', 'F', 'F', 0, 0, 0, 0, 'W', 'E', 'B', 'P', 'V', 'P', '8', 'L',
			       5, 0, 0, 0, 0x2F, (unsigned char)v, (unsigned char)(v >> 8),
			       (unsigned char)(v >> 16), (unsigned char)(v >> 24)};
	assert_int_equal(head_of_bytes(l, sizeof l, &h), IMAGEHEAD_OK);
	assert_int_equal(h.width, 300);
	assert_int_equal(h.height, 200);
	unsigned char k[30] = {'R', 'I', 'F', 'F', 0, 0, 0, 0, 'W', 'E', 'B', 'P', 'V', 'P', '8', ' ',
			       10, 0, 0, 0, 0x10, 0, 0, 0x9D, 0x01, 0x2A, 0x80, 0x02, 0xE0, 0x01};
	assert_int_equal(head_of_bytes(k, sizeof k, &h), IMAGEHEAD_OK);
	assert_int_equal(h.width, 640);
	assert_int_equal(h.height, 480);
}

/* netpbm: magic, then width and height as decimal text, with comments between. */
static void imagehead_testPnm(void **state)
{
	(void)state;
	const char *p = "P6\n# made by hand\n 320 # width\n240\n255\n";
	struct imagehead h;
	assert_int_equal(head_of_bytes(p, strlen(p), &h), IMAGEHEAD_OK);
	assert_string_equal(h.format, "pnm");
	assert_int_equal(h.width, 320);
	assert_int_equal(h.height, 240);
	const char *bad = "P5\n12345678901 2\n";
	assert_int_equal(head_of_bytes(bad, strlen(bad), &h), IMAGEHEAD_BROKEN);
}

/* JPEG: an APP0 segment and fill bytes before a progressive SOF2; a file ending before any frame. */
static void imagehead_testJpegSegments(void **state)
{
	(void)state;
	unsigned char b[] = {0xFF, 0xD8, 0xFF, 0xE0, 0, 6, 'J', 'F', 'I', 'F', 0xFF, 0xFF, 0xFF, 0xC2,
			     0, 11, 8, 0x4E, 0x20, 0x00, 0x10, 3, 0, 0, 0};
	struct imagehead h;
	assert_int_equal(head_of_bytes(b, sizeof b, &h), IMAGEHEAD_OK);
	assert_string_equal(h.format, "jpg");
	assert_int_equal(h.width, 16);
	assert_int_equal(h.height, 20000);
	assert_int_equal(head_of_bytes(b, 12, &h), IMAGEHEAD_BROKEN);
}

static void imagehead_testUnknown(void **state)
{
	(void)state;
	struct imagehead h;
	const char *t = "not an image at all\n";
	assert_int_equal(head_of_bytes(t, strlen(t), &h), IMAGEHEAD_UNKNOWN);
	assert_int_equal(head_of_bytes("BM", 2, &h), IMAGEHEAD_UNKNOWN);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(imagehead_testEncoders),
		cmocka_unit_test(imagehead_testHugePng),
		cmocka_unit_test(imagehead_testGif),
		cmocka_unit_test(imagehead_testTiff),
		cmocka_unit_test(imagehead_testWebp),
		cmocka_unit_test(imagehead_testPnm),
		cmocka_unit_test(imagehead_testJpegSegments),
		cmocka_unit_test(imagehead_testUnknown),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
