/* csvout — CSV rows through libcsv's csv_fwrite, which quotes each field (see csvout.h). */
#include "csvout.h"

#include <string.h>

#include <csv.h>

int csvout_row(FILE *f, const char *const *cells, size_t n)
{
	for (size_t i = 0; i < n; i++) {
		if (i && fputc(',', f) == EOF)
			return -1;
		const char *c = cells[i] ? cells[i] : "";
		if (csv_fwrite(f, c, strlen(c)))
			return -1;
	}
	return fputs("\r\n", f) == EOF ? -1 : 0;
}
