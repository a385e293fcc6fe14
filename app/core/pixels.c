/* pixels — image arithmetic on RGBA8 buffers (see pixels.h). Called by the stimulus-set tools
 * (cmd_stimuli) on images decoded by io/image.c.
 *
 * Everything works on the 8-bit codes of the buffer. Luminance goes through a 256-entry table of
 * the sRGB transfer function, filled per call. The control generator keeps one array of doubles (the
 * unit direction, NPIX·CHANNELS values) while it searches for the length that gives the budget. */
#include "pixels.h"

#include <assert.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>

#include <gsl/gsl_randist.h>
#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>

#include "diag.h"
#include "sha256.h"

/* Rec. 709 / sRGB luminance weights (IEC 61966-2-1; ITU-R BT.709). */
#define W_R 0.2126
#define W_G 0.7152
#define W_B 0.0722

double pixels_srgb_to_linear(double v)
{
	if (v <= 0.04045)
		return v / 12.92;
	return pow((v + 0.055) / 1.055, 2.4);
}

/* Fills T with linear light for every 8-bit code (256 calls of the transfer function: cheap next
 * to any image, and no shared state). */
static void lin_lut(double t[256])
{
	for (int i = 0; i < 256; i++)
		t[i] = pixels_srgb_to_linear(i / 255.0);
}

double pixels_luminance(uint8_t r, uint8_t g, uint8_t b)
{
	return W_R * pixels_srgb_to_linear(r / 255.0) + W_G * pixels_srgb_to_linear(g / 255.0) +
	       W_B * pixels_srgb_to_linear(b / 255.0);
}

void pixels_stats(const uint8_t *rgba, size_t npix, struct pixels_stats *out)
{
	assert(npix > 0);
	double t[256];
	lin_lut(t);
	/* Sums of deviations from the first pixel's luminance: a shift keeps E[d²] − E[d]² accurate
	 * for low-contrast images without a division per pixel. */
	double shift = W_R * t[rgba[0]] + W_G * t[rgba[1]] + W_B * t[rgba[2]];
	double s1 = 0, s2 = 0;
	int translucent = 0, grey = 1;
	for (size_t i = 0; i < npix; i++) {
		const uint8_t *p = rgba + 4 * i;
		double d = W_R * t[p[0]] + W_G * t[p[1]] + W_B * t[p[2]] - shift;
		s1 += d;
		s2 += d * d;
		translucent |= p[3] != 255;
		grey &= p[0] == p[1] && p[1] == p[2];
	}
	double m = s1 / (double)npix, var = s2 / (double)npix - m * m;
	out->mean_lum = shift + m;
	out->rms_contrast = var > 0 ? sqrt(var) : 0;
	out->translucent = translucent;
	out->grey = grey;
}

void pixels_distance(const uint8_t *a, const uint8_t *b, size_t npix, int channels,
		     struct pixels_dist *out)
{
	assert(channels == 1 || channels == 3);
	uint64_t ss = 0;   /* exact sum of squared code differences */
	int mx = 0;
	size_t changed = 0;
	for (size_t i = 0; i < npix; i++) {
		for (int c = 0; c < channels; c++) {
			int d = (int)a[4 * i + (size_t)c] - (int)b[4 * i + (size_t)c];
			if (d < 0)
				d = -d;
			ss += (uint64_t)(d * d);
			if (d > mx)
				mx = d;
			changed += d != 0;
		}
	}
	out->l2 = sqrt((double)ss) / 255.0;
	out->linf = mx / 255.0;
	out->nchanged = changed;
}

int pixels_hamming(uint64_t a, uint64_t b)
{
	uint64_t x = a ^ b;
	int n = 0;
	while (x) {
		x &= x - 1;
		n++;
	}
	return n;
}

uint64_t pixels_phash(const uint8_t *rgba, int width, int height)
{
	enum { N = 32, K = 8 };
	assert(width > 0 && height > 0);
	double t[256];
	lin_lut(t);
	double g[N][N];
	/* Box averages of luminance over a 32×32 grid of cells (at least one pixel per cell). */
	for (int oy = 0; oy < N; oy++) {
		int y0 = (int)((long)oy * height / N), y1 = (int)((long)(oy + 1) * height / N);
		if (y1 <= y0)
			y1 = y0 + 1;
		for (int ox = 0; ox < N; ox++) {
			int x0 = (int)((long)ox * width / N), x1 = (int)((long)(ox + 1) * width / N);
			if (x1 <= x0)
				x1 = x0 + 1;
			double s = 0;
			for (int y = y0; y < y1; y++)
				for (int x = x0; x < x1; x++) {
					const uint8_t *p = rgba + 4 * ((size_t)y * (size_t)width + (size_t)x);
					s += W_R * t[p[0]] + W_G * t[p[1]] + W_B * t[p[2]];
				}
			g[oy][ox] = s / ((double)(y1 - y0) * (x1 - x0));
		}
	}
	/* Separable DCT-II, keeping the K lowest frequencies in each direction. */
	double cosv[K][N];
	for (int u = 0; u < K; u++)
		for (int x = 0; x < N; x++)
			cosv[u][x] = cos(M_PI * (2 * x + 1) * u / (2.0 * N));
	double rows[N][K];
	for (int y = 0; y < N; y++)
		for (int u = 0; u < K; u++) {
			double s = 0;
			for (int x = 0; x < N; x++)
				s += g[y][x] * cosv[u][x];
			rows[y][u] = s;
		}
	double coef[K * K - 1];
	int n = 0;
	for (int v = 0; v < K; v++)
		for (int u = 0; u < K; u++) {
			if (!u && !v)
				continue;   /* the DC term only carries mean luminance */
			double s = 0;
			for (int y = 0; y < N; y++)
				s += rows[y][u] * cosv[v][y];
			coef[n++] = s;
		}
	double sorted[K * K - 1];
	memcpy(sorted, coef, sizeof coef);
	gsl_sort(sorted, 1, (size_t)n);
	double med = gsl_stats_median_from_sorted_data(sorted, 1, (size_t)n);
	uint64_t h = 0;
	for (int i = 0; i < n; i++)
		if (coef[i] > med)
			h |= (uint64_t)1 << i;
	return h;
}

void pixels_content_hash(const uint8_t *rgba, int width, int height, char hex[65])
{
	size_t n = 8 + (size_t)width * (size_t)height * 4;
	uint8_t *buf = xmalloc(n);
	uint32_t w = (uint32_t)width, h = (uint32_t)height;
	for (int i = 0; i < 4; i++) {   /* big-endian width and height first */
		buf[i] = (uint8_t)(w >> (24 - 8 * i));
		buf[4 + i] = (uint8_t)(h >> (24 - 8 * i));
	}
	memcpy(buf + 8, rgba, n - 8);
	sha256_hex(buf, n, hex);
	free(buf);
}

/* Applies SRC + S·DIR, clipped to [0, 1] and rounded to 8-bit codes, into OUT (when not NULL);
 * S = INFINITY drives every value with a non-zero direction to its limit. Returns the L2 norm of
 * the result minus the source (values in [0, 1]) and counts clipped values in *NCLIP. */
static double control_apply(const uint8_t *src, size_t npix, int channels, const double *dir,
			    double s, uint8_t *out, size_t *nclip)
{
	uint64_t ss = 0;
	size_t clipped = 0;
	for (size_t i = 0; i < npix; i++) {
		for (int c = 0; c < channels; c++) {
			size_t k = i * (size_t)channels + (size_t)c;
			int v0 = src[4 * i + (size_t)c];
			double x;
			if (isinf(s))
				x = dir[k] > 0 ? 1.0 : dir[k] < 0 ? 0.0 : v0 / 255.0;
			else
				x = v0 / 255.0 + s * dir[k];
			if (x < 0) {
				x = 0;
				clipped++;
			} else if (x > 1) {
				x = 1;
				clipped++;
			}
			int q = (int)lround(x * 255.0);
			int d = q - v0;
			ss += (uint64_t)(d * d);
			if (out) {
				out[4 * i + (size_t)c] = (uint8_t)q;
				if (channels == 1)
					out[4 * i + 1] = out[4 * i + 2] = (uint8_t)q;
			}
		}
		if (out)
			out[4 * i + 3] = src[4 * i + 3];
	}
	if (nclip)
		*nclip = clipped;
	return sqrt((double)ss) / 255.0;
}

int pixels_make_control(const uint8_t *src, size_t npix, int channels, double budget, double tol,
			gsl_rng *rng, uint8_t *out, struct pixels_control *res)
{
	assert(channels == 1 || channels == 3);
	memset(res, 0, sizeof *res);
	res->budget = budget;
	if (!(budget >= 0) || !(tol >= 0))
		return -1;
	size_t n = npix * (size_t)channels;
	double *dir = xmalloc(n * sizeof *dir);
	double norm2 = 0;
	for (size_t k = 0; k < n; k++) {
		dir[k] = gsl_ran_gaussian_ziggurat(rng, 1.0);
		norm2 += dir[k] * dir[k];
	}
	double norm = sqrt(norm2);
	for (size_t k = 0; k < n; k++)
		dir[k] /= norm;

	double want_lo = budget * (1 - tol), want_hi = budget * (1 + tol);
	double best_s = 0, best_err = budget;   /* s = 0 gives the source itself, norm 0 */
	double lo = 0, hi = INFINITY;
	int it = 0;
	if (budget > 0) {
		/* The farthest this direction can go: every value at its limit. */
		double fmax = control_apply(src, npix, channels, dir, INFINITY, NULL, NULL);
		if (fmax < want_lo) {
			best_s = INFINITY;
			best_err = budget - fmax;
		} else {
			double s = budget;   /* without clipping and rounding, length = norm */
			for (it = 1; it <= 200; it++) {
				double f = control_apply(src, npix, channels, dir, s, NULL, NULL);
				double e = fabs(f - budget);
				if (e < best_err) {
					best_err = e;
					best_s = s;
				}
				if (f >= want_lo && f <= want_hi)
					break;
				if (f < budget)
					lo = s;
				else
					hi = s;
				/* Rescale by the ratio of norms; fall back to bisection when the step
				 * leaves the bracket (clipping makes the norm grow more slowly). */
				double next = f > 0 ? s * budget / f : 2 * s;
				if (!(next > lo && next < hi))
					next = isinf(hi) ? 2 * (lo > 0 ? lo : s) : 0.5 * (lo + hi);
				if (!isinf(hi) && hi - lo <= 1e-12 * hi)
					break;
				s = next;
			}
		}
	}
	res->scale = best_s;
	res->iterations = it;
	res->achieved = control_apply(src, npix, channels, dir, best_s, out, &res->nclipped);
	res->reached = fabs(res->achieved - budget) <= tol * budget;
	free(dir);
	return res->reached ? 0 : 1;
}
