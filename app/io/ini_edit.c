/* ini_edit — see include/ini_edit.h. The text is handled line by line; a line is kept byte for
 * byte unless it is a key line this call changes or drops. */
#include "ini_edit.h"

#include <errno.h>
#include <fcntl.h>
#include <stdbool.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

#include "diag.h"

struct buf {
	char *p;
	size_t len, cap;
};

static void put(struct buf *b, const char *s, size_t n)
{
	if (b->len + n + 1 > b->cap) {
		b->cap = (b->len + n + 1) * 2;
		b->p = xrealloc(b->p, b->cap);
	}
	memcpy(b->p + b->len, s, n);
	b->len += n;
	b->p[b->len] = '\0';
}

static void puts_(struct buf *b, const char *s)
{
	put(b, s, strlen(s));
}

/* S[0..N) without spaces, tabs and a carriage return at either end. */
static void trim(const char **s, size_t *n)
{
	while (*n && (**s == ' ' || **s == '\t')) {
		(*s)++;
		(*n)--;
	}
	while (*n && ((*s)[*n - 1] == ' ' || (*s)[*n - 1] == '\t' || (*s)[*n - 1] == '\r'))
		(*n)--;
}

static bool same(const char *s, size_t n, const char *name)
{
	return n == strlen(name) && !memcmp(s, name, n);
}

/* True when LINE (N bytes) is a section header; *NAME and *NAMELEN get its trimmed name. */
static bool header(const char *line, size_t n, const char **name, size_t *namelen)
{
	trim(&line, &n);
	if (n < 2 || line[0] != '[' || line[n - 1] != ']')
		return false;
	*name = line + 1;
	*namelen = n - 2;
	trim(name, namelen);
	return true;
}

/* The key of a KEY = VALUE (or KEY : VALUE) line, trimmed; false for comments and blanks. */
static bool key_of(const char *line, size_t n, const char **key, size_t *keylen)
{
	trim(&line, &n);
	if (!n || line[0] == ';' || line[0] == '#')
		return false;
	size_t k = 0;
	while (k < n && line[k] != '=' && line[k] != ':')
		k++;
	if (k == n)
		return false;
	*key = line;
	*keylen = k;
	trim(key, keylen);
	return *keylen > 0;
}

static bool blank(const char *line, size_t n)
{
	trim(&line, &n);
	return n == 0;
}

/* One line of TEXT: *N bytes from P without the newline; returns the start of the next line. */
static const char *next_line(const char *p, size_t *n)
{
	const char *nl = strchr(p, '\n');
	*n = nl ? (size_t)(nl - p) : strlen(p);
	return p + *n + (nl ? 1 : 0);
}

static void put_key(struct buf *b, const char *key, const char *value)
{
	puts_(b, key);
	puts_(b, " = ");
	puts_(b, value);
	puts_(b, "\n");
}

/* Adds the keys not yet DONE to B at position AT (after the section's last non-blank line). */
static void insert_missing(struct buf *b, size_t at, const char *const *keys,
			   const char *const *values, size_t n, const bool *done)
{
	struct buf add = {0};
	for (size_t i = 0; i < n; i++)
		if (!done[i] && values[i])
			put_key(&add, keys[i], values[i]);
	if (!add.len)
		return;
	struct buf tail = {0};
	put(&tail, b->p + at, b->len - at);
	b->len = at;
	put(b, add.p, add.len);
	put(b, tail.p ? tail.p : "", tail.len);
	free(add.p);
	free(tail.p);
}

char *ini_edit_set_keys(const char *old, const char *section, const char *const *keys,
			const char *const *values, size_t n)
{
	struct buf b = {0};
	puts_(&b, "");
	bool *done = xcalloc(n ? n : 1, sizeof *done);
	bool inside = false, seen = false;
	size_t at = 0;   /* where missing keys go: after the section's last non-blank line */
	for (const char *p = old ? old : ""; *p;) {
		size_t len;
		const char *line = p;
		p = next_line(p, &len);
		const char *name, *key;
		size_t nlen, klen;
		if (header(line, len, &name, &nlen)) {
			if (inside) {
				insert_missing(&b, at, keys, values, n, done);
				inside = false;
			}
			if (same(name, nlen, section) && !seen)
				inside = seen = true;
			put(&b, line, len);
			puts_(&b, "\n");
			at = b.len;
			continue;
		}
		if (inside && key_of(line, len, &key, &klen)) {
			size_t i = 0;
			while (i < n && !same(key, klen, keys[i]))
				i++;
			if (i < n) {
				if (!done[i] && values[i])
					put_key(&b, keys[i], values[i]);
				done[i] = true;
				at = b.len;
				continue;
			}
		}
		put(&b, line, len);
		puts_(&b, "\n");
		if (inside && !blank(line, len))
			at = b.len;
	}
	if (inside)
		insert_missing(&b, at, keys, values, n, done);
	else if (!seen) {
		if (b.len && !(b.len >= 2 && b.p[b.len - 2] == '\n'))
			puts_(&b, "\n");
		puts_(&b, "[");
		puts_(&b, section);
		puts_(&b, "]\n");
		insert_missing(&b, b.len, keys, values, n, done);
	}
	free(done);
	return b.p;
}

char *ini_edit_replace_section(const char *old, const char *section, const char *new_section)
{
	struct buf b = {0};
	bool inside = false, placed = false;
	puts_(&b, "");
	for (const char *p = old ? old : ""; *p;) {
		size_t len;
		const char *line = p, *name;
		size_t nlen;
		p = next_line(p, &len);
		if (header(line, len, &name, &nlen)) {
			inside = same(name, nlen, section);
			if (inside && !placed) {
				puts_(&b, new_section);
				placed = true;
			}
		}
		if (!inside) {
			put(&b, line, len);
			puts_(&b, "\n");
		}
	}
	if (!placed) {
		if (b.len && !(b.len >= 2 && b.p[b.len - 2] == '\n'))
			puts_(&b, "\n");
		puts_(&b, new_section);
	}
	return b.p;
}

int ini_edit_replace_file(const char *path, const char *text, char *err, size_t errlen)
{
	struct stat st;
	mode_t mode = stat(path, &st) == 0 ? st.st_mode & 07777 : 0644;
	char *tmp = xasprintf("%s.XXXXXX", path);
	int fd = mkstemp(tmp), rc = -1;
	if (fd < 0) {
		snprintf(err, errlen, "cannot write beside %s: %s", path, strerror(errno));
		free(tmp);
		return -1;
	}
	size_t left = strlen(text);
	const char *p = text;
	errno = 0;
	while (left) {
		ssize_t w = write(fd, p, left);
		if (w < 0 && errno == EINTR)
			continue;
		if (w <= 0)
			break;
		p += w;
		left -= (size_t)w;
	}
	if (left || fchmod(fd, mode) || fsync(fd)) {
		snprintf(err, errlen, "cannot write %s: %s", tmp, strerror(errno ? errno : EIO));
		close(fd);
		goto out;
	}
	if (close(fd)) {
		snprintf(err, errlen, "cannot write %s: %s", tmp, strerror(errno));
		goto out;
	}
	if (rename(tmp, path)) {
		snprintf(err, errlen, "cannot replace %s: %s", path, strerror(errno));
		goto out;
	}
	/* Make the rename itself durable. */
	char *dir = xstrdup(path), *slash = strrchr(dir, '/');
	if (slash)
		slash[slash == dir ? 1 : 0] = '\0';
	int dfd = open(slash ? dir : ".", O_RDONLY | O_DIRECTORY);
	if (dfd >= 0) {
		fsync(dfd);
		close(dfd);
	}
	free(dir);
	rc = 0;
out:
	if (rc)
		unlink(tmp);
	free(tmp);
	return rc;
}
