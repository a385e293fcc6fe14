/* imgcache — the last decoded source image of a list (see imgcache.h). One entry: lists group
 * the versions of a source, so a larger cache would hold pixels without saving decodes. */
#include "imgcache.h"

#include <stdlib.h>
#include <string.h>

#include "diag.h"

const struct imgcache *imgcache_get(struct imgcache *c, const char *path)
{
	if (c->path && !strcmp(c->path, path))
		return c;
	free(c->path);
	image_free(&c->img);
	c->path = xstrdup(path);
	c->ok = image_load_max(path, c->max_side, &c->img, &c->info, c->err, sizeof c->err) == 0;
	return c;
}

void imgcache_put(struct imgcache *c, const char *path, struct image *img,
		  const struct image_info *info)
{
	free(c->path);
	image_free(&c->img);
	c->path = xstrdup(path);
	c->ok = 1;
	c->img = *img;
	c->info = *info;
	memset(img, 0, sizeof *img);
}

void imgcache_clear(struct imgcache *c)
{
	long keep = c->max_side;
	free(c->path);
	image_free(&c->img);
	memset(c, 0, sizeof *c);
	c->max_side = keep;
}
