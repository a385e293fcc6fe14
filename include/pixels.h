/* pixels — image arithmetic on plain 8-bit RGBA buffers: sRGB decoding, luminance and contrast,
 * distances between an image and its source, perceptual hashes, and random-direction controls.
 *
 * Buffers are row-major RGBA8 without padding (as image.h delivers them); NPIX is width·height.
 * Alpha is never part of the arithmetic. "Colour channels" is 3 (R, G, B) for colour images and
 * 1 for grey ones (then only R is read, since a grey file decodes to R = G = B). Pixel values
 * scaled to [0, 1] are v/255. Pure computation: no files, no printing. */
#ifndef TACHIST_PIXELS_H
#define TACHIST_PIXELS_H

#include <stddef.h>
#include <stdint.h>

#include <gsl/gsl_rng.h>

/* The sRGB electro-optical transfer function (IEC 61966-2-1): encoded V in [0, 1] to linear
 * light. V <= 0.04045: V/12.92; else ((V + 0.055)/1.055)^2.4. */
double pixels_srgb_to_linear(double v);
/* Relative luminance of one sRGB pixel (8-bit codes): Rec. 709 / sRGB weights on linear light,
 * Y = 0.2126 R + 0.7152 G + 0.0722 B, in [0, 1]. */
double pixels_luminance(uint8_t r, uint8_t g, uint8_t b);

struct pixels_stats {
	double mean_lum;     /* mean relative luminance over all pixels */
	double rms_contrast; /* population standard deviation of the pixels' relative luminance */
	int translucent;     /* 1 when any alpha value is below 255 */
	int grey;            /* 1 when every pixel has R = G = B */
};
/* Luminance statistics of NPIX pixels (NPIX > 0). */
void pixels_stats(const uint8_t *rgba, size_t npix, struct pixels_stats *out);

struct pixels_dist {
	double l2;    /* Euclidean norm of the difference, values in [0, 1] */
	double linf;  /* largest absolute difference, values in [0, 1] */
	size_t nchanged; /* values that differ */
};
/* Distance between A and B (both NPIX pixels) over all pixels and CHANNELS colour channels
 * (1 or 3), with values scaled to [0, 1]. Multiply by 255 for 8-bit units. */
void pixels_distance(const uint8_t *a, const uint8_t *b, size_t npix, int channels,
		     struct pixels_dist *out);

/* A 64-bit perceptual hash (DCT hash): luminance reduced to 32×32 by box averages, its 2-D DCT-II,
 * the 8×8 lowest frequencies without the DC term compared with their median, one bit each
 * (63 bits used). Images that look alike have hashes a few bits apart. */
uint64_t pixels_phash(const uint8_t *rgba, int width, int height);
/* Number of differing bits. */
int pixels_hamming(uint64_t a, uint64_t b);
/* SHA-256 (hex) of the decoded content: width, height and the RGBA bytes, so two files holding
 * the same pixels in different formats or encodings have the same digest. */
void pixels_content_hash(const uint8_t *rgba, int width, int height, char hex[65]);

struct pixels_control {
	double budget;     /* asked L2, values in [0, 1] */
	double achieved;   /* L2 of (control − source) after clipping and 8-bit quantisation */
	double scale;      /* final length of the direction before clipping */
	int iterations;    /* norm-restoring steps taken */
	size_t nclipped;   /* values clipped at 0 or 1 */
	int reached;       /* 1 when |achieved − budget| <= tol·budget */
};
/* Writes to OUT (NPIX RGBA pixels) a random-direction control for SRC with L2 budget BUDGET
 * (values in [0, 1]) over CHANNELS colour channels (1 or 3; grey controls stay grey): a standard
 * Gaussian direction drawn from RNG is scaled to the budget, added to the source, clipped to
 * [0, 1] and quantised to 8 bits; since clipping and rounding change the norm, the direction's
 * length is then adjusted by bracketing and bisection until the quantised result's norm is within
 * TOL·BUDGET of the budget or no length can do better. Alpha is copied from SRC. Returns 0 when
 * the budget was reached, 1 when it could not be (RES says how close it came), -1 on bad
 * arguments (a negative budget). */
int pixels_make_control(const uint8_t *src, size_t npix, int channels, double budget, double tol,
			gsl_rng *rng, uint8_t *out, struct pixels_control *res);

#endif
