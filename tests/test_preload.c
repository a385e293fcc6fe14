/* test_preload — the look-ahead texture queue: order, bounded textures, and a file that vanishes
 * after it was queued. Headless (SDL dummy driver). */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>
#include <cmocka.h>

#include "display.h"
#include "image.h"
#include "preload.h"

static char dir[] = "/tmp/tachist-preload-XXXXXX";

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

/* Image I is (10 + I) px wide, so each texture tells which file it came from. */
static char *make_image(int i)
{
	struct image img = {10 + i, 8, calloc((size_t)(10 + i) * 8 * 4, 1)};
	char *path = malloc(256);
	snprintf(path, 256, "%s/img%03d.png", dir, i);
	char err[200];
	assert_int_equal(image_save_png(path, &img, err, sizeof err), 0);
	free(img.rgba);
	return path;
}

static void preload_testBoundedInOrder(void **state)
{
	(void)state;
	assert_non_null(mkdtemp(dir));
	char err[300];
	struct display_opts o = {.headless = true, .width_px = 320, .height_px = 240};
	struct display *d = display_open(&o, err, sizeof err);
	assert_non_null(d);
	struct preload *p = preload_new(d, 4, false, decode, NULL);
	assert_non_null(p);
	enum { N = 40 };
	char *paths[N];
	for (int i = 0; i < N; i++)
		paths[i] = make_image(i);
	int requested = 0;
	for (int i = 0; i < N; i++) {
		while (requested < N) {
			int rc = preload_request(p, (uint64_t)requested + 1, paths[requested]);
			if (rc < 0)
				break;
			assert_int_equal(rc, 0);
			requested++;
		}
		assert_int_equal(preload_request(p, (uint64_t)i + 1, paths[i]), 1);   /* already queued */
		preload_ready(p);
		struct SDL_Texture *t = preload_take(p, (uint64_t)i + 1, err, sizeof err);
		assert_non_null(t);
		int w, h;
		display_texture_size(t, &w, &h);
		assert_int_equal(w, 10 + i);
		assert_int_equal(h, 8);
		preload_release(p, (uint64_t)i + 1);
	}
	assert_true(preload_peak_textures(p) <= 4);
	assert_int_equal(preload_free_slots(p), 4);
	assert_null(preload_take(p, 999, err, sizeof err));
	/* A file that disappears after it was queued comes back as an error naming it. */
	assert_int_equal(unlink(paths[0]), 0);
	assert_int_equal(preload_request(p, 500, paths[0]), 0);
	assert_null(preload_take(p, 500, err, sizeof err));
	assert_non_null(strstr(err, "img000.png"));
	preload_release(p, 500);
	preload_destroy(p);
	preload_destroy(NULL);
	display_close(d);
	for (int i = 0; i < N; i++) {
		unlink(paths[i]);
		free(paths[i]);
	}
	rmdir(dir);
}

int main(void)
{
	setenv("SDL_VIDEODRIVER", "dummy", 1);
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(preload_testBoundedInOrder),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
