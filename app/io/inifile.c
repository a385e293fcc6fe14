/* inifile — line-numbered INI reading on top of inih (see inifile.h).
 *
 * inih's handler carries no line number in Debian's build, so we drive ini_parse_stream with a
 * reader over the text in memory: the reader hands out one line per call and counts them, and inih
 * calls the handler for that line before it asks for the next one, so the reader's count is the
 * handler's line. The reader also does the per-line checks (syntax, length, UTF-8) and announces
 * section headers, which inih itself does not report. Used by io/protocol.c and io/rig.c. */
#include "inifile.h"
#include "infile.h"

#include <ctype.h>
#include <errno.h>
#include <ini.h>
#include <stdlib.h>
#include <string.h>

struct reader {
	const char *path;
	const char *p;          /* next unread byte */
	int line;               /* line last handed to inih */
	int bad;                /* a syntax problem was reported */
	char section[INIFILE_MAX_LINE + 1];   /* current section name, trimmed */
	inifile_fn fn;
	void *user;
	struct diag_list *d;
};

int inifile_utf8_valid(const char *s, size_t len)
{
	const unsigned char *u = (const unsigned char *)s;
	size_t i = 0;
	while (i < len) {
		unsigned c = u[i];
		size_t n;
		unsigned min;
		if (c < 0x80) { i++; continue; }
		else if ((c & 0xe0) == 0xc0) { n = 1; c &= 0x1f; min = 0x80; }
		else if ((c & 0xf0) == 0xe0) { n = 2; c &= 0x0f; min = 0x800; }
		else if ((c & 0xf8) == 0xf0) { n = 3; c &= 0x07; min = 0x10000; }
		else return 0;
		if (i + n >= len)
			return 0;
		for (size_t k = 1; k <= n; k++) {
			if ((u[i + k] & 0xc0) != 0x80)
				return 0;
			c = (c << 6) | (u[i + k] & 0x3f);
		}
		if (c < min || c > 0x10ffff || (c >= 0xd800 && c <= 0xdfff))
			return 0;
		i += n + 1;
	}
	return 1;
}

/* Checks one line (without its newline, leading spaces removed) the way inih will read it. */
static void check_line(struct reader *r, const char *s, size_t len)
{
	if (!inifile_utf8_valid(s, len)) {
		diag_add(r->d, DIAG_ERROR, r->path, r->line, "line is not valid UTF-8 text");
		r->bad = 1;
	}
	if (len == 0 || s[0] == ';' || s[0] == '#')
		return;
	if (r->line == 1 && len >= 3 && !memcmp(s, "\xef\xbb\xbf", 3)) {
		s += 3;
		len -= 3;
		if (len == 0)
			return;
	}
	if (s[0] == '[') {
		const char *end = memchr(s, ']', len);
		if (!end) {
			diag_add(r->d, DIAG_ERROR, r->path, r->line, "section header is missing its ']'");
			r->bad = 1;
			r->fn(r->user, NULL, NULL, NULL, r->line);
			return;
		}
		char name[INIFILE_MAX_LINE + 1];
		size_t a = 1, b = (size_t)(end - s);
		while (a < b && isspace((unsigned char)s[a])) a++;
		while (b > a && isspace((unsigned char)s[b - 1])) b--;
		memcpy(name, s + a, b - a);
		name[b - a] = '\0';
		memcpy(r->section, name, b - a + 1);
		r->fn(r->user, name, NULL, NULL, r->line);
		return;
	}
	/* A key line needs '=' or ':' before any inline comment (" ;"). */
	for (size_t i = 0; i < len; i++) {
		if (s[i] == '=' || s[i] == ':')
			return;
		if (s[i] == ';' && i > 0 && isspace((unsigned char)s[i - 1]))
			break;
	}
	diag_add(r->d, DIAG_ERROR, r->path, r->line,
		 "expected KEY = VALUE, a [section] header or a comment");
	r->bad = 1;
}

/* inih's reader: copies the next line (with its newline) into STR, at most NUM - 1 bytes. */
static char *next_line(char *str, int num, void *stream)
{
	struct reader *r = stream;
	if (!*r->p)
		return NULL;
	const char *nl = strchr(r->p, '\n');
	size_t len = nl ? (size_t)(nl - r->p) : strlen(r->p);
	const char *next = nl ? nl + 1 : r->p + len;
	r->line++;
	const char *s = r->p;
	size_t n = len;
	if (n > 0 && s[n - 1] == '\r')
		n--;
	while (n > 0 && (*s == ' ' || *s == '\t')) {
		s++;
		n--;
	}
	size_t max = (size_t)num - 2;
	if (max > INIFILE_MAX_LINE)
		max = INIFILE_MAX_LINE;
	if (n > max) {
		diag_add(r->d, DIAG_ERROR, r->path, r->line,
			 "line is longer than %d characters", INIFILE_MAX_LINE);
		r->bad = 1;
		n = 0;   /* hand inih an empty line instead */
	} else {
		check_line(r, s, n);
	}
	memcpy(str, s, n);
	str[n] = '\n';
	str[n + 1] = '\0';
	r->p = next;
	return str;
}

static int on_entry(void *user, const char *section, const char *name, const char *value)
{
	struct reader *r = user;
	if (!*name) {
		diag_add(r->d, DIAG_ERROR, r->path, r->line, "missing key name before '='");
		r->bad = 1;
		return 1;
	}
	(void)section;   /* inih's copy is untrimmed; the reader keeps the trimmed one */
	r->fn(r->user, r->section, name, value, r->line);
	return 1;
}

int inifile_parse(const char *path, const char *text, inifile_fn fn, void *user,
		  struct diag_list *d)
{
	struct reader r = {.path = path, .p = text, .fn = fn, .user = user, .d = d};
	int rc = ini_parse_stream(next_line, &r, on_entry, &r);
	if (rc > 0 && !r.bad) {
		diag_add(d, DIAG_ERROR, path, rc, "this line cannot be read as INI");
		r.bad = 1;
	}
	return r.bad ? -1 : 0;
}

char *inifile_read(const char *path, size_t *len, struct diag_list *d)
{
	char why[160];
	size_t n = 0;
	char *buf = infile_read(path, INFILE_MAX_INI, &n, why, sizeof why);
	if (!buf) {
		diag_add(d, DIAG_ERROR, path, 0, "cannot read the file: %s", why);
		return NULL;
	}
	if (memchr(buf, '\0', n)) {
		diag_add(d, DIAG_ERROR, path, 0, "is not a text file (it contains NUL bytes)");
		free(buf);
		return NULL;
	}
	if (len)
		*len = n;
	return buf;
}
