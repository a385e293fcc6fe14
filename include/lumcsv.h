/* lumcsv — photometer readings from a CSV file (RFC 4180, read with libcsv): columns
 * `code,cd_m2[,channel]`, with or without that header line (a header may put the columns in any
 * order). Channel is grey (also all, gray, white), red|r, green|g or blue|b; empty means grey.
 * Used by `tachist calibrate --from`. */
#ifndef TACHIST_LUMCSV_H
#define TACHIST_LUMCSV_H

#include <stddef.h>

#include "diag.h"
#include "lum.h"

struct lumcsv_reading {
	int code;
	double cd;
	enum lum_channel channel;
	int line;
};

/* Reads PATH into *OUT (malloc'd, *N entries). Every problem goes to D as FILE:LINE (a code that is
 * not a whole number 0-255, a reading that is not a decimal number of 0 cd/m2 or more, an unknown
 * channel, a missing cell, a code read twice for one channel). Returns 0, or -1 when any error was
 * found (*OUT is then NULL). */
int lumcsv_read(const char *path, struct lumcsv_reading **out, size_t *n, struct diag_list *d);

#endif
