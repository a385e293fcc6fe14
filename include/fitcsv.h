/* fitcsv — reads the CSV that `tachist fit` takes: trial rows (level, correct) or grouped rows
 * (level, n, k), with or without a header line naming those columns (RFC 4180, libcsv).
 * Every problem is appended to a diag_list as FILE:LINE: message; nothing prints. */
#ifndef TACHIST_FITCSV_H
#define TACHIST_FITCSV_H

#include <stddef.h>

#include "diag.h"
#include "fit.h"

enum fitcsv_kind { FITCSV_TRIALS, FITCSV_GROUPED };

/* Reads PATH into points (grouped by level, sorted; caller frees *PTS) and says which layout it
 * found in *KIND. Returns 0, or -1 when any error was added to D (then *PTS is NULL). */
int fitcsv_read(const char *path, struct fit_point **pts, size_t *npts, enum fitcsv_kind *kind,
		struct diag_list *d);

#endif
