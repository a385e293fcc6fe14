/* export — trial tables out of the store: CSV (RFC 4180), TSV, JSON (cJSON) and a BIDS
 * behavioural dataset.
 *
 * Tables have one row per trial with the exported trial columns (docs/storage.md) and the
 * stimulus list's label columns after `source`. Rows stream from the store's iterator, so memory
 * does not grow with the row count. Text cells of CSV and TSV that start with = + - @ tab or
 * carriage return get a leading apostrophe (OWASP "CSV Injection" guidance); numeric columns and
 * JSON/BIDS values are written as stored. Nothing here prints; errors come back in *ERR. */
#ifndef TACHIST_EXPORT_H
#define TACHIST_EXPORT_H

#include <stdbool.h>
#include <stddef.h>
#include <stdio.h>

struct store;

enum export_format { EXPORT_CSV, EXPORT_TSV, EXPORT_JSON, EXPORT_BIDS };

/* "csv", "tsv", "json", "bids"; returns 0 or -1. */
int export_format_parse(const char *name, enum export_format *out);

struct export_stats {
	size_t rows;       /* trials written */
	size_t sessions;   /* sessions that had at least one selected row (BIDS: every session) */
	size_t files;      /* files written (BIDS) */
};

/* Writes the trials of SESSION (an id or 8+ character prefix), or of SUBJECT, or all (both
 * NULL) as a CSV, TSV or JSON table to OUT. Returns 0 or -1 with *ERR. */
int export_table(struct store *s, enum export_format f, const char *session, const char *subject,
		 FILE *out, struct export_stats *st, char **err);

/* Writes a BIDS dataset under DIR (created when missing; existing files of the same names are
 * replaced): dataset_description.json, participants.tsv and .json, and per session
 * sub-<subject>/ses-<label>/beh/sub-<subject>_ses-<label>_task-<task>_beh.tsv with its .json
 * sidecar. The session label is the first 8 hex digits of the session UUID (all 32 when two
 * sessions of a subject share them); the task label is the protocol name reduced to letters and
 * digits. Returns 0 or -1 with *ERR. */
int export_bids(struct store *s, const char *session, const char *subject, const char *dir,
		struct export_stats *st, char **err);

/* Writes CELL to OUT as one field: quoted when it holds the delimiter, a quote, CR or LF (RFC
 * 4180 section 2 rules 5-7), and with a leading apostrophe when NEUTRALISE and the cell begins
 * with = + - @ tab or CR. DELIM is ',' or '\t'. */
void export_cell(FILE *out, const char *cell, char delim, bool neutralise);

/* Shortest decimal text of V that reads back as exactly V (at most 17 significant digits). */
void export_number(char *buf, size_t len, double v);

#endif
