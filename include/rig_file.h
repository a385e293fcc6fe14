/* rig_file — reading a rig profile (an INI file, parsed with inih through inifile.c) into a
 * struct rig (rig.h), and freeing it. Implemented by app/io/rig.c. An io header: core uses rig.h
 * only. */
#ifndef TACHIST_RIG_FILE_H
#define TACHIST_RIG_FILE_H

#include "diag.h"
#include "rig.h"

/* Loads and validates PATH; every problem goes to D as FILE:LINE. Returns 0 when usable, -1 when
 * any error was found (R is then cleared). R must be released with rig_clear. */
int rig_load(const char *path, struct rig *r, struct diag_list *d);
/* Parses rig text already in memory (PATH used only for messages). */
int rig_parse(const char *path, const char *text, struct rig *r, struct diag_list *d);
void rig_clear(struct rig *r);

#endif
