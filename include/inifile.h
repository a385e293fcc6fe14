/* inifile — INI text read with inih, with the line number of every entry and the syntax problems
 * inih would only count, shared by the protocol and rig parsers.
 *
 * Lines are fed to inih one at a time from memory through its stream interface, so each callback
 * knows its line. Leading spaces are removed before inih sees a line, so an indented key is an
 * ordinary key (never a continuation of the previous value). Lines that are not a section header,
 * a KEY = VALUE pair, a comment (';' or '#' first) or blank, lines longer than inih's limit, and
 * bytes that are not UTF-8 become diagnostics. */
#ifndef TACHIST_INIFILE_H
#define TACHIST_INIFILE_H

#include "diag.h"

/* Called once per section header (KEY and VALUE NULL; SECTION as written between the brackets,
 * trimmed), once per KEY = VALUE (SECTION the current one, trimmed; KEY and VALUE trimmed, inline " ;" comments removed), and with SECTION,
 * KEY and VALUE all NULL for a broken header (its keys should then be skipped, since nobody can
 * tell which section they were meant for). The return value is ignored. */
typedef int (*inifile_fn)(void *user, const char *section, const char *key, const char *value,
			  int line);

/* Longest line inih accepts, in bytes (its compiled INI_MAX_LINE less the newline and NUL). */
#define INIFILE_MAX_LINE 198

/* Parses TEXT (NUL-terminated) naming it PATH in diagnostics. Entries before any section header
 * get SECTION "". Returns 0, or -1 when a syntax problem went to D. */
int inifile_parse(const char *path, const char *text, inifile_fn fn, void *user,
		  struct diag_list *d);
/* Reads PATH into a malloc'd NUL-terminated string (*LEN bytes, may be NULL). Returns NULL and
 * adds "cannot read" to D when it cannot; a file with a NUL byte is refused the same way. */
char *inifile_read(const char *path, size_t *len, struct diag_list *d);
/* True when S (LEN bytes) is valid UTF-8 (RFC 3629: no overlongs, no surrogates, ≤ U+10FFFF). */
int inifile_utf8_valid(const char *s, size_t len);

#endif
