/* decode_only — the benchmark baseline for `stimuli audit`: decodes every image of a stimulus list
 * with plain SDL2_image (IMG_Load, then free) and nothing else, and prints the time taken.
 * Usage: decode_only LIST.csv (first column the image path relative to the list; no quoting). */
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include <SDL.h>
#include <SDL_image.h>

static int64_t now_ns(void)
{
	struct timespec t;
	clock_gettime(CLOCK_MONOTONIC, &t);
	return (int64_t)t.tv_sec * 1000000000 + t.tv_nsec;
}

int main(int argc, char **argv)
{
	if (argc != 2) {
		fprintf(stderr, "usage: decode_only LIST.csv\n");
		return 2;
	}
	FILE *f = fopen(argv[1], "r");
	if (!f) {
		perror(argv[1]);
		return 1;
	}
	char dir[4096];
	snprintf(dir, sizeof dir, "%s", argv[1]);
	char *slash = strrchr(dir, '/');
	if (slash)
		*slash = '\0';
	else
		strcpy(dir, ".");
	IMG_Init(IMG_INIT_PNG);
	char line[8192], path[8192 + 4096];
	int n = 0, failed = 0;
	int64_t t0 = now_ns();
	for (int row = 0; fgets(line, sizeof line, f); row++) {
		if (!row)
			continue;   /* header */
		line[strcspn(line, ",\r\n")] = '\0';
		snprintf(path, sizeof path, "%s/%s", dir, line);
		SDL_Surface *s = IMG_Load(path);
		if (!s) {
			failed++;
			continue;
		}
		SDL_FreeSurface(s);
		n++;
	}
	double sec = (double)(now_ns() - t0) / 1e9;
	fclose(f);
	IMG_Quit();
	printf("decoded %d images in %.3f s (%d failed)\n", n, sec, failed);
	return failed ? 1 : 0;
}
