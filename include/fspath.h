/* fspath — file-system paths for the tools that build stimulus sets: folder and stem of a path,
 * one path relative to a folder, creating folders, sorted folder listings.
 *
 * Every returned string is malloc'd and owned by the caller. Used by io/stimimport.c and
 * io/stimcontrols.c. */
#ifndef TACHIST_FSPATH_H
#define TACHIST_FSPATH_H

#include <stddef.h>

/* The folder part of PATH ("." when none, "/" for a file in the root). */
char *fspath_dir(const char *path);
/* The file name of PATH without its folder and its last extension. */
char *fspath_stem(const char *path);
/* TARGET relative to folder BASE ("../img/a.png"), component by component after resolving both;
 * a copy of TARGET when either cannot be resolved. */
char *fspath_relative(const char *target, const char *base);
/* Creates PATH and its missing parents (mode 0777 before umask). Returns 0 or -1 with errno. */
int fspath_mkdir_p(const char *path);
/* 1 when PATH is a folder (following links). */
int fspath_is_dir(const char *path);
/* The names in folder PATH without "." and "..", sorted by strcmp, in *N; NULL with errno set when
 * the folder cannot be read. Free with fspath_free_names. */
char **fspath_list(const char *path, size_t *n);
void fspath_free_names(char **names, size_t n);
/* TEXT made safe as one folder name: '/' and '\\' become '_', and so does a leading '.'. */
char *fspath_safe_name(const char *text);

#endif
