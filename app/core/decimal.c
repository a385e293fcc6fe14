/* decimal — plain decimal notation for numbers in the user's files (see decimal.h). A small
 * hand-written scanner: the C library has no strict decimal parser, and the value itself is still
 * converted by strtod, which is correct for every text this accepts. */
#include "decimal.h"

#include <ctype.h>

static const char *digits(const char *p, int *n)
{
	*n = 0;
	while (isdigit((unsigned char)*p)) {
		p++;
		(*n)++;
	}
	return p;
}

bool decimal_ok(const char *s)
{
	if (!s)
		return false;
	const char *p = s;
	if (*p == '+' || *p == '-')
		p++;
	int whole, frac = 0, ex;
	p = digits(p, &whole);
	if (*p == '.')
		p = digits(p + 1, &frac);
	if (whole + frac == 0)
		return false;
	if (*p == 'e' || *p == 'E') {
		p++;
		if (*p == '+' || *p == '-')
			p++;
		p = digits(p, &ex);
		if (!ex)
			return false;
	}
	return *p == '\0';
}
