/* imagehead — image sizes from file headers (see imagehead.h).
 *
 * Each format is one small reader over a FILE: the signature is matched on the first 16 bytes,
 * then the reader seeks to the fields that hold the size. Nothing is allocated; loops over a
 * file's segments are bounded, so a hostile file cannot keep a reader busy. */
#include "imagehead.h"

#include <stdint.h>
#include <string.h>

static uint32_t be16(const unsigned char *p) { return (uint32_t)p[0] << 8 | p[1]; }
static uint32_t le16(const unsigned char *p) { return (uint32_t)p[1] << 8 | p[0]; }
static uint32_t be32(const unsigned char *p) { return be16(p) << 16 | be16(p + 2); }
static uint32_t le32(const unsigned char *p) { return le16(p + 2) << 16 | le16(p); }

static int get(FILE *f, long at, void *buf, size_t n)
{
	return fseek(f, at, SEEK_SET) == 0 && fread(buf, 1, n, f) == n ? 0 : -1;
}

static int png_size(FILE *f, long base, struct imagehead *h)
{
	unsigned char b[16];
	if (get(f, base + 8, b, 16) || memcmp(b + 4, "IHDR", 4))
		return IMAGEHEAD_BROKEN;
	h->width = be32(b + 8);
	h->height = be32(b + 12);
	return IMAGEHEAD_OK;
}

/* JPEG: segments FF xx [length] up to the first start-of-frame marker (C0–CF except C4 DHT, C8
 * JPG and CC DAC), whose data holds precision, height and width (ITU-T T.81, B.2.2). */
static int jpeg_size(FILE *f, long base, struct imagehead *h)
{
	long at = base + 2;
	for (int guard = 0; guard < 4096; guard++) {
		unsigned char m[2];
		if (get(f, at, m, 2) || m[0] != 0xFF)
			return IMAGEHEAD_BROKEN;
		if (m[1] == 0xFF) {   /* fill byte */
			at++;
			continue;
		}
		at += 2;
		if (m[1] == 0x01 || (m[1] >= 0xD0 && m[1] <= 0xD8))
			continue;     /* markers without a length */
		if (m[1] == 0xD9 || m[1] == 0xDA)
			return IMAGEHEAD_BROKEN;   /* end of image or scan data before any frame */
		unsigned char l[2];
		if (get(f, at, l, 2) || be16(l) < 2)
			return IMAGEHEAD_BROKEN;
		if (m[1] >= 0xC0 && m[1] <= 0xCF && m[1] != 0xC4 && m[1] != 0xC8 && m[1] != 0xCC) {
			unsigned char s[5];
			if (get(f, at + 2, s, 5))
				return IMAGEHEAD_BROKEN;
			h->height = be16(s + 1);
			h->width = be16(s + 3);
			return IMAGEHEAD_OK;
		}
		at += be16(l);
	}
	return IMAGEHEAD_BROKEN;
}

/* BMP: a 12-byte core header has 16-bit sizes, every later header 32-bit signed ones (a negative
 * height means rows stored top-down). */
static int bmp_size(FILE *f, long base, struct imagehead *h)
{
	unsigned char b[12];
	if (get(f, base + 14, b, 12))
		return IMAGEHEAD_BROKEN;
	if (le32(b) == 12) {
		h->width = le16(b + 4);
		h->height = le16(b + 6);
	} else {
		int32_t w = (int32_t)le32(b + 4), hh = (int32_t)le32(b + 8);
		h->width = w < 0 ? -(long)w : w;
		h->height = hh < 0 ? -(long)hh : hh;
	}
	return IMAGEHEAD_OK;
}

/* Skips GIF data sub-blocks (a length byte, then that many bytes, until a zero length). */
static int gif_skip_blocks(FILE *f, long *at)
{
	for (int guard = 0; guard < 65536; guard++) {
		unsigned char n;
		if (get(f, *at, &n, 1))
			return -1;
		*at += 1 + n;
		if (!n)
			return 0;
	}
	return -1;
}

/* GIF (GIF89a specification): the logical screen, then extensions up to the first image
 * descriptor; decoders allocate by the frame's own size, so both count. */
static int gif_size(FILE *f, long base, struct imagehead *h)
{
	unsigned char s[7];
	if (get(f, base + 6, s, 7))
		return IMAGEHEAD_BROKEN;
	h->width = le16(s);
	h->height = le16(s + 2);
	long at = base + 13;
	if (s[4] & 0x80)
		at += 3L << ((s[4] & 7) + 1);   /* global colour table */
	for (int guard = 0; guard < 4096; guard++) {
		unsigned char t[2];
		if (get(f, at, t, 1))
			return IMAGEHEAD_BROKEN;
		if (t[0] == 0x2C) {
			unsigned char d[8];
			if (get(f, at + 1, d, 8))
				return IMAGEHEAD_BROKEN;
			if ((long)le16(d + 4) > h->width)
				h->width = le16(d + 4);
			if ((long)le16(d + 6) > h->height)
				h->height = le16(d + 6);
			return IMAGEHEAD_OK;
		}
		if (t[0] != 0x21)
			return IMAGEHEAD_BROKEN;   /* trailer or garbage before any frame */
		at += 2;                           /* introducer and label */
		if (gif_skip_blocks(f, &at))
			return IMAGEHEAD_BROKEN;
	}
	return IMAGEHEAD_BROKEN;
}

/* TIFF (TIFF 6.0, section 2): the first IFD's ImageWidth (256) and ImageLength (257), SHORT or
 * LONG, in the file's byte order. */
static int tif_size(FILE *f, long base, struct imagehead *h)
{
	unsigned char b[8];
	if (get(f, base, b, 8))
		return IMAGEHEAD_BROKEN;
	int le = b[0] == 'I';
	uint32_t (*u16)(const unsigned char *) = le ? le16 : be16;
	uint32_t (*u32)(const unsigned char *) = le ? le32 : be32;
	long at = base + (long)u32(b + 4);
	unsigned char c[2];
	if (get(f, at, c, 2))
		return IMAGEHEAD_BROKEN;
	uint32_t n = u16(c);
	h->width = h->height = -1;
	for (uint32_t i = 0; i < n && i < 4096; i++) {
		unsigned char e[12];
		if (get(f, at + 2 + 12 * (long)i, e, 12))
			return IMAGEHEAD_BROKEN;
		uint32_t tag = u16(e), type = u16(e + 2);
		long v = type == 3 ? (long)u16(e + 8) : type == 4 ? (long)u32(e + 8) : -1;
		if (tag == 256)
			h->width = v;
		else if (tag == 257)
			h->height = v;
	}
	return h->width >= 0 && h->height >= 0 ? IMAGEHEAD_OK : IMAGEHEAD_BROKEN;
}

/* WebP (RFC 9649): the first chunk after "WEBP" is VP8X (canvas size), VP8L (14-bit sizes after
 * the 0x2F signature) or VP8 (a key frame: start code 9D 01 2A, then 14-bit sizes). */
static int webp_size(FILE *f, long base, struct imagehead *h)
{
	unsigned char b[30];
	if (get(f, base, b, 30))
		return IMAGEHEAD_BROKEN;
	if (!memcmp(b + 12, "VP8X", 4)) {
		h->width = 1 + (long)(b[24] | b[25] << 8 | (uint32_t)b[26] << 16);
		h->height = 1 + (long)(b[27] | b[28] << 8 | (uint32_t)b[29] << 16);
	} else if (!memcmp(b + 12, "VP8L", 4) && b[20] == 0x2F) {
		uint32_t v = le32(b + 21);
		h->width = 1 + (long)(v & 0x3FFF);
		h->height = 1 + (long)(v >> 14 & 0x3FFF);
	} else if (!memcmp(b + 12, "VP8 ", 4) && b[23] == 0x9D && b[24] == 0x01 && b[25] == 0x2A) {
		h->width = le16(b + 26) & 0x3FFF;
		h->height = le16(b + 28) & 0x3FFF;
	} else {
		return IMAGEHEAD_BROKEN;
	}
	return IMAGEHEAD_OK;
}

/* One decimal number of a PNM header, after white space and '#' comments. */
static int pnm_number(FILE *f, long *v)
{
	int c = fgetc(f);
	for (int guard = 0; guard < 65536; guard++) {
		if (c == '#')
			while (c != '\n' && c != EOF)
				c = fgetc(f);
		else if (c == ' ' || c == '\t' || c == '\r' || c == '\n')
			c = fgetc(f);
		else
			break;
	}
	if (c < '0' || c > '9')
		return -1;
	*v = 0;
	for (int k = 0; c >= '0' && c <= '9'; k++, c = fgetc(f)) {
		if (k >= 10)
			return -1;
		*v = *v * 10 + (c - '0');
	}
	return 0;
}

static int pnm_size(FILE *f, long base, struct imagehead *h)
{
	if (fseek(f, base + 2, SEEK_SET) || pnm_number(f, &h->width) || pnm_number(f, &h->height))
		return IMAGEHEAD_BROKEN;
	return IMAGEHEAD_OK;
}

int imagehead_read(FILE *f, struct imagehead *h)
{
	static const unsigned char png_sig[8] = {0x89, 'P', 'N', 'G', '\r', '\n', 0x1a, '\n'};
	memset(h, 0, sizeof *h);
	long base = ftell(f);
	unsigned char s[16] = {0};
	if (base < 0 || fread(s, 1, sizeof s, f) < 4)
		return IMAGEHEAD_UNKNOWN;
	int (*reader)(FILE *, long, struct imagehead *) = NULL;
	if (!memcmp(s, png_sig, 8)) {
		h->format = "png";
		reader = png_size;
	} else if (s[0] == 0xFF && s[1] == 0xD8 && s[2] == 0xFF) {
		h->format = "jpg";
		reader = jpeg_size;
	} else if (s[0] == 'B' && s[1] == 'M') {
		h->format = "bmp";
		reader = bmp_size;
	} else if (!memcmp(s, "GIF87a", 6) || !memcmp(s, "GIF89a", 6)) {
		h->format = "gif";
		reader = gif_size;
	} else if (!memcmp(s, "II*\0", 4) || !memcmp(s, "MM\0*", 4)) {
		h->format = "tif";
		reader = tif_size;
	} else if (!memcmp(s, "RIFF", 4) && !memcmp(s + 8, "WEBP", 4)) {
		h->format = "webp";
		reader = webp_size;
	} else if (s[0] == 'P' && s[1] >= '1' && s[1] <= '6') {
		h->format = "pnm";
		reader = pnm_size;
	} else {
		return IMAGEHEAD_UNKNOWN;
	}
	return reader(f, base, h);
}
