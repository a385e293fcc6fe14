/* fspath — path helpers for the stimulus-set tools (see fspath.h). Paths are plain C strings;
 * relative paths are computed on realpath()-resolved text, so links and ".." never confuse the
 * counting of components. */
#include "fspath.h"

#include <dirent.h>
#include <errno.h>
#include <limits.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>

#include "diag.h"

char *fspath_dir(const char *path)
{
	const char *slash = strrchr(path, '/');
	if (!slash)
		return xstrdup(".");
	if (slash == path)
		return xstrdup("/");
	char *d = xstrdup(path);
	d[slash - path] = '\0';
	return d;
}

char *fspath_stem(const char *path)
{
	const char *base = strrchr(path, '/');
	base = base ? base + 1 : path;
	char *s = xstrdup(base);
	char *dot = strrchr(s, '.');
	if (dot && dot != s)
		*dot = '\0';
	return s;
}

char *fspath_relative(const char *target, const char *base)
{
	char t[PATH_MAX], b[PATH_MAX];
	if (!realpath(target, t) || !realpath(base, b))
		return xstrdup(target);
	const char *tp = t, *bp = b;   /* each "" or "/component..." after the common part */
	if (!strcmp(b, "/"))
		bp = "";
	while (*bp) {
		const char *bs = bp + 1, *ts = tp + 1;
		size_t bl = strcspn(bs, "/"), tl = strcspn(ts, "/");
		if (!*tp || bl != tl || strncmp(bs, ts, bl))
			break;
		bp = bs + bl;
		tp = ts + tl;
	}
	size_t up = 0;
	for (const char *p = bp; *p; p++)
		up += *p == '/';
	const char *rest = *tp == '/' ? tp + 1 : tp;
	char *out = xmalloc(up * 3 + strlen(rest) + 2);
	out[0] = '\0';
	for (size_t k = 0; k < up; k++)
		strcat(out, "../");
	strcat(out, rest);
	if (!*out)
		strcpy(out, ".");
	else if (out[strlen(out) - 1] == '/')
		out[strlen(out) - 1] = '\0';
	return out;
}

int fspath_mkdir_p(const char *path)
{
	char *p = xstrdup(path);
	for (char *s = p + 1; *s; s++) {
		if (*s != '/')
			continue;
		*s = '\0';
		if (mkdir(p, 0777) && errno != EEXIST) {
			free(p);
			return -1;
		}
		*s = '/';
	}
	int rc = mkdir(p, 0777) && errno != EEXIST ? -1 : 0;
	free(p);
	return rc;
}

int fspath_is_dir(const char *path)
{
	struct stat st;
	return stat(path, &st) == 0 && S_ISDIR(st.st_mode);
}

static int cmp_str(const void *a, const void *b)
{
	return strcmp(*(char *const *)a, *(char *const *)b);
}

char **fspath_list(const char *path, size_t *n)
{
	DIR *d = opendir(path);
	if (!d)
		return NULL;
	char **v = NULL;
	size_t k = 0;
	struct dirent *e;
	while ((e = readdir(d))) {
		if (!strcmp(e->d_name, ".") || !strcmp(e->d_name, ".."))
			continue;
		v = xrealloc(v, (k + 1) * sizeof *v);
		v[k++] = xstrdup(e->d_name);
	}
	closedir(d);
	if (k)
		qsort(v, k, sizeof *v, cmp_str);
	*n = k;
	return v ? v : xcalloc(1, sizeof *v);
}

void fspath_free_names(char **names, size_t n)
{
	for (size_t i = 0; names && i < n; i++)
		free(names[i]);
	free(names);
}

char *fspath_safe_name(const char *text)
{
	char *safe = xstrdup(text);
	for (char *q = safe; *q; q++)
		if (*q == '/' || *q == '\\' || (q == safe && *q == '.'))
			*q = '_';
	return safe;
}
