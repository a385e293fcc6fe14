/* cmd_export — `tachist export`: trial tables (CSV, TSV, JSON) or a BIDS folder from a database.
 * A table goes to a temporary file beside --out and is renamed into place only when complete, so
 * a failed export never leaves half a table under the requested name. `--out -` writes a table
 * to stdout. */
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "cmd.h"
#include "export.h"
#include "store.h"

static int usage(const char *msg)
{
	return opts_usage("export", "%s", msg);
}

static int fail(char *err)
{
	fprintf(stderr, "tachist export: %s\n", err);
	free(err);
	return EXIT_PROBLEMS;
}

enum { O_DB, O_SCHEMA, O_FORMAT, O_SESSION, O_SUBJECT, O_OUT };
const struct opts_row cmd_export_opts[] = {
	[O_DB] = {"db", "FILE", "the database to read (default tachist.db), or a PostgreSQL server"},
	[O_SCHEMA] = {"schema", "NAME", "with --db SERVER: the schema to read (default tachist)"},
	[O_FORMAT] = {"format", "FORMAT", "csv, tsv, json or bids (required)"},
	[O_SESSION] = {"session", "ID", "only this session (its ID or a unique start of it)"},
	[O_SUBJECT] = {"subject", "ID", "only this subject's sessions"},
	[O_OUT] = {"out", "PATH", "the file to write, - for standard output, a folder for bids (required)"},
	OPTS_END,
};

int cmd_export(int argc, char **argv)
{
	const char *db = "tachist.db", *format = NULL, *session = NULL, *subject = NULL;
	const char *out = NULL, *schema = NULL, *v;
	struct opts p;
	opts_begin(&p, "export", cmd_export_opts, argc, argv);
	for (int k; (k = opts_next(&p, &v)) != OPTS_DONE;) {
		switch (k) {
		case O_DB: db = v; break;
		case O_SCHEMA: schema = v; break;
		case O_FORMAT: format = v; break;
		case O_SESSION: session = v; break;
		case O_SUBJECT: subject = v; break;
		case O_OUT: out = v; break;
		case OPTS_ARG: return opts_usage("export", "unexpected argument '%s'", v);
		default: return EXIT_USAGE;
		}
	}
	enum export_format f;
	if (!format || export_format_parse(format, &f))
		return usage("--format must be csv, tsv, json or bids");
	if (!out)
		return usage("--out PATH is required");
	if (session && subject)
		return usage("choose --session or --subject, not both");
	if (f == EXPORT_BIDS && !strcmp(out, "-"))
		return usage("bids writes a folder: give --out DIR");
	if (subject && !store_subject_valid(subject))
		return usage("--subject takes letters and digits only");
	if (cmd_server_schema("export", "--db", db, schema))
		return EXIT_USAGE;
	struct store *s;
	char *err = NULL;
	if (store_open_reader(db, schema, &s, &err))
		return fail(err);
	struct export_stats st;
	int rc;
	if (f == EXPORT_BIDS) {
		rc = export_bids(s, session, subject, out, &st, &err);
		store_close(s);
		if (rc)
			return fail(err);
		fprintf(stderr, "tachist export: %zu trials of %zu session%s as BIDS in %s (%zu files)\n",
			st.rows, st.sessions, st.sessions == 1 ? "" : "s", out, st.files);
		return EXIT_OK;
	}
	FILE *fo = stdout;
	char *tmp = NULL;
	if (strcmp(out, "-")) {
		tmp = xasprintf("%s.partial", out);
		fo = fopen(tmp, "w");
		if (!fo) {
			store_close(s);
			fprintf(stderr, "tachist export: %s: cannot write\n", tmp);
			free(tmp);
			return EXIT_PROBLEMS;
		}
	}
	/* A large buffer set before any output; static, so it outlives the stream. */
	static char big[1 << 16];
	setvbuf(fo, big, _IOFBF, sizeof big);
	rc = export_table(s, f, session, subject, fo, &st, &err);
	store_close(s);
	if (tmp) {
		if (fclose(fo) && !rc) {
			rc = -1;
			err = xasprintf("%s: write failed", tmp);
		}
		if (!rc && rename(tmp, out)) {
			rc = -1;
			err = xasprintf("%s: cannot rename into place", out);
		}
		if (rc)
			unlink(tmp);
		free(tmp);
	} else if (fflush(stdout) && !rc) {
		rc = -1;
		err = xasprintf("writing to stdout failed");
	}
	if (rc)
		return fail(err);
	if (strcmp(out, "-"))
		fprintf(stderr, "tachist export: %zu trials of %zu session%s to %s\n", st.rows,
			st.sessions, st.sessions == 1 ? "" : "s", out);
	return EXIT_OK;
}
