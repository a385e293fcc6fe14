/* ini_edit — changing an INI file the experimenter may have written by hand, keeping every line
 * that is not changed: comments, blank lines, other sections and keys this program does not know.
 *
 * Used by the rig editor of the console (the [screen] and [marker] keys it edits) and by
 * `tachist calibrate` (the whole [luminance] section). Section and key names compare as written,
 * after trimming spaces, as the INI reader (inifile.c) reads them; a key line is KEY = VALUE or
 * KEY : VALUE. Pure text in and out, except ini_edit_replace_file. */
#ifndef TACHIST_INI_EDIT_H
#define TACHIST_INI_EDIT_H

#include <stddef.h>

/* OLD with key KEYS[i] of section SECTION set to VALUES[i] for each i < N: the first line of that
 * key in the section is rewritten as "KEY = VALUE", later lines of the same key are dropped, and
 * a key the section lacks is added after the section's last non-blank line. A NULL value removes
 * the key. A missing section is added at the end (preceded by a blank line). Returns malloc'd
 * text ending in a newline. */
char *ini_edit_set_keys(const char *old, const char *section, const char *const *keys,
			const char *const *values, size_t n);

/* OLD with every section named SECTION dropped (header to the next header) and NEW_SECTION (text
 * holding its own header) put where the first one stood, or at the end after a blank line.
 * Returns malloc'd text. */
char *ini_edit_replace_section(const char *old, const char *section, const char *new_section);

/* Writes TEXT to a temporary file beside PATH, flushes it to disk and renames it over PATH
 * (keeping PATH's permission bits, 0644 for a new file), then flushes the folder: a crash leaves
 * the old file or the new one, never a mixture. Returns 0, or -1 with a sentence in ERR. */
int ini_edit_replace_file(const char *path, const char *text, char *err, size_t errlen);

#endif
