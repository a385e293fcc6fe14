/* infile — opening and reading the user's input files (protocol, rig, stimulus list, images)
 * safely: only a regular file is read, never a named pipe, device or socket (a pipe would wait
 * for a writer forever, /dev/zero never ends), and never more than a size limit per kind of file.
 *
 * Messages are returned in ERR without the path, so callers keep their own wording
 * ("cannot read the file: MESSAGE"). Used by io/inifile.c, io/stimlist.c and io/image.c. */
#ifndef TACHIST_INFILE_H
#define TACHIST_INFILE_H

#include <stddef.h>
#include <stdio.h>

#define INFILE_MAX_INI (1L << 20)      /* protocol and rig files: 1 MiB */
#define INFILE_MAX_LIST (64L << 20)    /* stimulus lists: 64 MiB */
#define INFILE_MAX_IMAGE (256L << 20)  /* one image file: 256 MiB */

/* Opens PATH for reading without ever blocking, after checking that it is a regular file of at
 * most MAX_BYTES bytes. Returns the open stream, or NULL with ERR ("No such file or directory",
 * "Is a directory", "it is a named pipe, not a regular file", "it is 70 MiB, over the limit of
 * 64 MiB for this kind of file"). */
FILE *infile_open(const char *path, long max_bytes, char *err, size_t errlen);

/* Reads PATH whole (checked as infile_open does) into a malloc'd buffer with a NUL after the
 * last byte; *LEN (when not NULL) gets the byte count. NULL with ERR. The caller frees. */
char *infile_read(const char *path, long max_bytes, size_t *len, char *err, size_t errlen);

#endif
