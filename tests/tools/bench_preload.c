/* bench_preload — image preloading against plain SDL2_image decoding of the same files.
 *   bench_preload make DIR N        writes N 128×128 PNG test images (seeded pattern) into DIR
 *   bench_preload compare DIR N     decodes the N files with IMG_Load alone, then runs them
 *                                   through the look-ahead queue (decode + texture, 8 slots,
 *                                   headless renderer); prints images/s of each and the ratio
 *   bench_preload queue DIR N       only the queue (for peak-memory runs under /usr/bin/time -v) */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <SDL.h>
#include <SDL_image.h>
#include <gsl/gsl_rng.h>

#include "dclock.h"
#include "display.h"
#include "image.h"
#include "preload.h"

static char *path_of(const char *dir, int i)
{
	char *p = malloc(strlen(dir) + 32);
	sprintf(p, "%s/b%05d.png", dir, i);
	return p;
}

static int make(const char *dir, int n)
{
	gsl_rng *rng = gsl_rng_alloc(gsl_rng_mt19937);
	gsl_rng_set(rng, 11);
	struct image img = {128, 128, malloc(128 * 128 * 4)};
	for (int i = 0; i < n; i++) {
		for (int y = 0; y < 128; y++)
			for (int x = 0; x < 128; x++) {
				uint8_t *p = img.rgba + (y * 128 + x) * 4;
				uint8_t v = (uint8_t)((x * 2 + y + i) & 0xff);
				p[0] = v;
				p[1] = (uint8_t)(v ^ (uint8_t)gsl_rng_uniform_int(rng, 16));
				p[2] = (uint8_t)(255 - v);
				p[3] = 255;
			}
		char *path = path_of(dir, i), err[256];
		if (image_save_png(path, &img, err, sizeof err)) {
			fprintf(stderr, "%s\n", err);
			return 1;
		}
		free(path);
	}
	free(img.rgba);
	gsl_rng_free(rng);
	return 0;
}

static int decode(const char *path, int *w, int *h, uint8_t **rgba, char *err, size_t errlen,
		  void *ctx)
{
	(void)ctx;
	struct image img;
	struct image_info info;
	if (image_load(path, &img, &info, err, errlen))
		return -1;
	*w = img.width;
	*h = img.height;
	*rgba = img.rgba;
	return 0;
}

static double plain(char **paths, int n)
{
	int64_t t0 = dclock_monotonic_ns();
	for (int i = 0; i < n; i++) {
		SDL_Surface *s = IMG_Load(paths[i]);
		if (!s) {
			fprintf(stderr, "%s: %s\n", paths[i], IMG_GetError());
			exit(1);
		}
		SDL_FreeSurface(s);
	}
	return n / ((double)(dclock_monotonic_ns() - t0) / 1e9);
}

/* io/image.c's decoder alone, one thread: decode plus conversion to RGBA8. */
static double rgba_only(char **paths, int n)
{
	int64_t t0 = dclock_monotonic_ns();
	for (int i = 0; i < n; i++) {
		struct image img;
		struct image_info info;
		char err[256];
		if (image_load(paths[i], &img, &info, err, sizeof err)) {
			fprintf(stderr, "%s\n", err);
			exit(1);
		}
		image_free(&img);
	}
	return n / ((double)(dclock_monotonic_ns() - t0) / 1e9);
}

static double queue(char **paths, int n)
{
	char err[512];
	struct display_opts o = {.headless = true, .width_px = 320, .height_px = 240};
	struct display *d = display_open(&o, err, sizeof err);
	if (!d) {
		fprintf(stderr, "%s\n", err);
		exit(1);
	}
	struct preload *p = preload_new(d, 8, false, decode, NULL);
	int64_t t0 = dclock_monotonic_ns();
	int req = 0;
	for (int i = 0; i < n; i++) {
		while (req < n && preload_request(p, (uint64_t)req + 1, paths[req]) == 0)
			req++;
		preload_ready(p);
		if (!preload_take(p, (uint64_t)i + 1, err, sizeof err)) {
			fprintf(stderr, "%s\n", err);
			exit(1);
		}
		preload_release(p, (uint64_t)i + 1);
	}
	double rate = n / ((double)(dclock_monotonic_ns() - t0) / 1e9);
	preload_destroy(p);
	display_close(d);
	return rate;
}

int main(int argc, char **argv)
{
	if (argc != 4)
		return 2;
	setenv("SDL_VIDEODRIVER", "dummy", 0);
	int n = atoi(argv[3]);
	if (!strcmp(argv[1], "make"))
		return make(argv[2], n);
	char **paths = malloc((size_t)n * sizeof *paths);
	for (int i = 0; i < n; i++)
		paths[i] = path_of(argv[2], i);
	if (!strcmp(argv[1], "compare")) {
		IMG_Init(IMG_INIT_PNG);
		double a = plain(paths, n);
		double c = rgba_only(paths, n);
		double b = queue(paths, n);
		printf("   plain IMG_Load:        %8.0f images/s\n", a);
		printf("   image_load (to RGBA8): %8.0f images/s (one thread, for reference)\n", c);
		printf("   preload (decode+tex):  %8.0f images/s\n", b);
		printf("   ratio preload/plain:   %8.2f (target >= 0.8)\n", b / a);
	} else if (!strcmp(argv[1], "queue")) {
		queue(paths, n);
	}
	for (int i = 0; i < n; i++)
		free(paths[i]);
	free(paths);
	return 0;
}
