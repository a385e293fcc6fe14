/* make_demo_assets — draws the demo stimulus set: 6 invented glyph categories, 8 exemplars each,
 * at 4 L2 noise budgets (0 = clean), and writes the PNGs and the stimulus list.
 *
 * usage: make_demo_assets OUTDIR      (writes the PNGs in OUTDIR/img and OUTDIR/stimuli.csv)
 *
 * Each glyph is a dark shape on mid grey, drawn by coverage (4x4 supersampling) of a shape defined
 * in its own rotated, shifted and scaled frame; exemplars vary position, size, stroke thickness and
 * rotation from one seeded GSL mt19937 stream, so the set is the same on every machine. A perturbed
 * copy is the clean image plus grey Gaussian noise (the same value in R, G and B) whose L2 norm over
 * all pixels and the three colour channels, in [0, 1] units, equals the budget after clipping to
 * [0, 1] and rounding to 8 bits: the noise is rescaled a few times until the achieved norm matches
 * (within 0.2%). docs/demo.md describes the set. */
#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include <gsl/gsl_randist.h>
#include <gsl/gsl_rng.h>

#include "image.h"

#define SIDE 64
#define EXEMPLARS 8
#define SEED 20261201UL

static const char *const categories[] = {"ring", "bar", "cross", "chevron", "wedge", "lattice"};
#define NCAT (sizeof categories / sizeof categories[0])
static const double budgets[] = {0, 8, 16, 32};
#define NBUDGET (sizeof budgets / sizeof budgets[0])

struct pose {
	double cx, cy;      /* centre in px */
	double r;           /* size in px */
	double t;           /* stroke thickness in px */
	double a;           /* rotation in radians */
};

/* Distance from (x, y) to the segment (ax, ay)-(bx, by). */
static double seg(double x, double y, double ax, double ay, double bx, double by)
{
	double dx = bx - ax, dy = by - ay;
	double h = ((x - ax) * dx + (y - ay) * dy) / (dx * dx + dy * dy);
	h = h < 0 ? 0 : h > 1 ? 1 : h;
	return hypot(x - ax - h * dx, y - ay - h * dy);
}

/* Is the point (u, v), in the glyph's own frame (size r, thickness t), inside glyph K? */
static int inside(size_t k, double u, double v, double r, double t)
{
	double h = t / 2;
	switch (k) {
	case 0: /* ring */
		return fabs(hypot(u, v) - r) < h;
	case 1: /* bar */
		return fabs(u) < r && fabs(v) < h;
	case 2: /* cross */
		return (fabs(u) < r && fabs(v) < h) || (fabs(v) < r && fabs(u) < h);
	case 3: /* chevron: a V of two strokes */
		return seg(u, v, -r, -0.6 * r, 0, 0.6 * r) < h || seg(u, v, 0, 0.6 * r, r, -0.6 * r) < h;
	case 4: { /* wedge: a filled sector of 60 degrees, apex left of centre */
		double uu = u + 0.7 * r;
		return hypot(uu, v) < 1.6 * r && fabs(atan2(v, uu)) < 30.0 * M_PI / 180.0;
	}
	default: /* lattice: two strokes each way, like a small grid */
		return ((fabs(fabs(u) - 0.4 * r) < h) && fabs(v) < r) ||
		       ((fabs(fabs(v) - 0.4 * r) < h) && fabs(u) < r);
	}
}

static void draw(size_t k, const struct pose *p, double *px)
{
	const double bg = 0.5, fg = 0.12;
	double c = cos(p->a), s = sin(p->a);
	for (int y = 0; y < SIDE; y++)
		for (int x = 0; x < SIDE; x++) {
			int hits = 0;
			for (int sy = 0; sy < 4; sy++)
				for (int sx = 0; sx < 4; sx++) {
					double X = x + (sx + 0.5) / 4 - p->cx, Y = y + (sy + 0.5) / 4 - p->cy;
					double u = c * X + s * Y, v = -s * X + c * Y;
					hits += inside(k, u, v, p->r, p->t);
				}
			px[y * SIDE + x] = bg + (fg - bg) * hits / 16.0;
		}
}

static unsigned char q8(double v)
{
	v = v < 0 ? 0 : v > 1 ? 1 : v;
	return (unsigned char)lround(v * 255.0);
}

/* Adds grey noise of L2 norm BUDGET (over 3 channels, [0, 1] units) to CLEAN into OUT (8-bit).
 * Returns the achieved norm. */
static double perturb(const double *clean, double budget, gsl_rng *rng, unsigned char *out)
{
	double *n = malloc(sizeof(double) * SIDE * SIDE);
	double ss = 0;
	for (int i = 0; i < SIDE * SIDE; i++) {
		n[i] = gsl_ran_gaussian(rng, 1.0);
		ss += 3 * n[i] * n[i];
	}
	double scale = budget / sqrt(ss), achieved = 0;
	for (int iter = 0; iter < 30; iter++) {
		double e = 0;
		for (int i = 0; i < SIDE * SIDE; i++) {
			out[i] = q8(clean[i] + scale * n[i]);
			double d = out[i] / 255.0 - q8(clean[i]) / 255.0;
			e += 3 * d * d;
		}
		achieved = sqrt(e);
		if (fabs(achieved - budget) < 0.002 * budget)
			break;
		scale *= budget / achieved;
	}
	free(n);
	return achieved;
}

static int save(const char *path, const unsigned char *grey)
{
	struct image img = {SIDE, SIDE, malloc(SIDE * SIDE * 4)};
	for (int i = 0; i < SIDE * SIDE; i++) {
		img.rgba[4 * i] = img.rgba[4 * i + 1] = img.rgba[4 * i + 2] = grey[i];
		img.rgba[4 * i + 3] = 255;
	}
	char err[512];
	int rc = image_save_png(path, &img, err, sizeof err);
	if (rc)
		fprintf(stderr, "make_demo_assets: %s\n", err);
	free(img.rgba);
	return rc;
}

int main(int argc, char **argv)
{
	if (argc != 2) {
		fprintf(stderr, "usage: make_demo_assets OUTDIR\n");
		return 2;
	}
	char dir[4096];
	snprintf(dir, sizeof dir, "%s/img", argv[1]);
	mkdir(argv[1], 0777);
	mkdir(dir, 0777);
	gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
	gsl_rng_set(rng, SEED);
	char listpath[4096];
	snprintf(listpath, sizeof listpath, "%s/stimuli.csv.tmp", argv[1]);
	FILE *list = fopen(listpath, "w");
	if (!list) {
		perror(listpath);
		return 1;
	}
	fprintf(list, "image,category,level,source,exemplar,noise\r\n");
	double clean[SIDE * SIDE];
	unsigned char out[SIDE * SIDE];
	int rc = 0;
	for (size_t k = 0; k < NCAT; k++)
		for (int e = 1; e <= EXEMPLARS; e++) {
			struct pose p;
			p.cx = SIDE / 2.0 + gsl_ran_flat(rng, -5, 5);
			p.cy = SIDE / 2.0 + gsl_ran_flat(rng, -5, 5);
			p.r = gsl_ran_flat(rng, 15, 21);
			p.t = gsl_ran_flat(rng, 3, 6);
			p.a = gsl_ran_flat(rng, -M_PI, M_PI);
			draw(k, &p, clean);
			char src[64];
			snprintf(src, sizeof src, "img/%s_%d_n0.png", categories[k], e);
			for (size_t b = 0; b < NBUDGET; b++) {
				char rel[64], path[4200];
				snprintf(rel, sizeof rel, "img/%s_%d_n%g.png", categories[k], e, budgets[b]);
				snprintf(path, sizeof path, "%s/%s", argv[1], rel);
				if (budgets[b] == 0)
					for (int i = 0; i < SIDE * SIDE; i++)
						out[i] = q8(clean[i]);
				else
					perturb(clean, budgets[b], rng, out);
				rc |= save(path, out);
				fprintf(list, "%s,%s,%g,%s,%d,%s\r\n", rel, categories[k], budgets[b],
					budgets[b] == 0 ? "" : src, e, budgets[b] == 0 ? "none" : "gaussian");
			}
		}
	fclose(list);
	gsl_rng_free(rng);
	char final[4096];
	snprintf(final, sizeof final, "%s/stimuli.csv", argv[1]);
	if (rc || rename(listpath, final)) {
		fprintf(stderr, "make_demo_assets: could not write the set\n");
		return 1;
	}
	return 0;
}
