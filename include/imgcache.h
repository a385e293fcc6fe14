/* imgcache — one decoded image kept between the rows of a stimulus list: the perturbed versions
 * of a source usually follow each other (and the clean image itself), so keeping the last source
 * decodes each one once while memory stays at one image.
 *
 * The cache owns its path copy and pixels. Used by io/stimaudit.c and io/stimcontrols.c. */
#ifndef TACHIST_IMGCACHE_H
#define TACHIST_IMGCACHE_H

#include "image.h"

struct imgcache {
	char *path;
	int ok;                 /* 1 when img and info hold PATH's pixels */
	struct image img;
	struct image_info info;
	char err[1024];         /* why PATH cannot be read, when !ok */
	long max_side;          /* size limit for image_load_max (0: the default) */
};

/* The entry for PATH, decoding it unless it is the one held; check ->ok. */
const struct imgcache *imgcache_get(struct imgcache *c, const char *path);
/* Hands IMG (decoded from PATH) to the cache, which then owns it; IMG is left empty. */
void imgcache_put(struct imgcache *c, const char *path, struct image *img,
		  const struct image_info *info);
/* Frees what the cache holds (max_side is kept). */
void imgcache_clear(struct imgcache *c);

#endif
