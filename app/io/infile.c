/* infile — the user's input files read only when they are regular files under a size limit (see
 * infile.h). The file is opened with O_NONBLOCK so that opening a named pipe returns at once,
 * then fstat says what it is; the flag is cleared before reading. The size is checked again while
 * reading, since a file may grow between fstat and the last read. */
#include "infile.h"
#include "diag.h"

#include <errno.h>
#include <fcntl.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>

/* What a file that is not regular is, in words. */
static const char *kind_of(mode_t m)
{
	if (S_ISFIFO(m))
		return "a named pipe";
	if (S_ISCHR(m))
		return "a character device";
	if (S_ISBLK(m))
		return "a block device";
	if (S_ISSOCK(m))
		return "a socket";
	return "not a plain file";
}

static void too_big(long size, long max_bytes, char *err, size_t errlen)
{
	if (max_bytes >= (1L << 20))
		snprintf(err, errlen, "it is over %ld MiB, the limit for this kind of file",
			 max_bytes >> 20);
	else
		snprintf(err, errlen, "it is %ld bytes, over the limit of %ld bytes for this kind of "
			 "file", size, max_bytes);
}

FILE *infile_open(const char *path, long max_bytes, char *err, size_t errlen)
{
	int fd = open(path, O_RDONLY | O_NONBLOCK | O_CLOEXEC);
	if (fd < 0) {
		snprintf(err, errlen, "%s", strerror(errno));
		return NULL;
	}
	struct stat st;
	if (fstat(fd, &st)) {
		snprintf(err, errlen, "%s", strerror(errno));
		close(fd);
		return NULL;
	}
	if (S_ISDIR(st.st_mode)) {
		snprintf(err, errlen, "%s", strerror(EISDIR));
		close(fd);
		return NULL;
	}
	if (!S_ISREG(st.st_mode)) {
		snprintf(err, errlen, "it is %s, not a regular file", kind_of(st.st_mode));
		close(fd);
		return NULL;
	}
	if (max_bytes > 0 && st.st_size > max_bytes) {
		too_big((long)st.st_size, max_bytes, err, errlen);
		close(fd);
		return NULL;
	}
	int fl = fcntl(fd, F_GETFL);
	if (fl < 0 || fcntl(fd, F_SETFL, fl & ~O_NONBLOCK) < 0) {
		snprintf(err, errlen, "%s", strerror(errno));
		close(fd);
		return NULL;
	}
	FILE *f = fdopen(fd, "rb");
	if (!f) {
		snprintf(err, errlen, "%s", strerror(errno));
		close(fd);
	}
	return f;
}

char *infile_read(const char *path, long max_bytes, size_t *len, char *err, size_t errlen)
{
	FILE *f = infile_open(path, max_bytes, err, errlen);
	if (!f)
		return NULL;
	size_t cap = 4096, n = 0, got;
	char *buf = xmalloc(cap);
	while ((got = fread(buf + n, 1, cap - n - 1, f)) > 0) {
		n += got;
		if (max_bytes > 0 && n > (size_t)max_bytes) {
			too_big((long)n, max_bytes, err, errlen);
			fclose(f);
			free(buf);
			return NULL;
		}
		if (n + 1 == cap) {
			cap *= 2;
			buf = xrealloc(buf, cap);
		}
	}
	int e = ferror(f) ? errno : 0;
	fclose(f);
	if (e) {
		snprintf(err, errlen, "%s", strerror(e));
		free(buf);
		return NULL;
	}
	buf[n] = '\0';
	if (len)
		*len = n;
	return buf;
}
