/* cmd_pool — `tachist pool --into FILE DB...`: pools databases from several rigs into one.
 * Sessions are keyed by UUID and trials by (session, index), so pooling a file twice adds
 * nothing; each source goes in its own transaction, older schemas are migrated in a temporary
 * copy, newer, foreign and damaged ones refused by name. The work is store_pool_from. */
#include <stdlib.h>
#include <string.h>

#include "cmd.h"
#include "store.h"

enum { O_INTO };
const struct opts_row cmd_pool_opts[] = {
	[O_INTO] = {"into", "FILE", "the database to pool into (created when missing)"},
	OPTS_END,
};

int cmd_pool(int argc, char **argv)
{
	const char *into = NULL, *v;
	const char **srcs = xcalloc((size_t)argc, sizeof *srcs);
	int nsrc = 0;
	struct opts p;
	opts_begin(&p, "pool", cmd_pool_opts, argc, argv);
	for (int k; (k = opts_next(&p, &v)) != OPTS_DONE;) {
		switch (k) {
		case O_INTO: into = v; break;
		case OPTS_ARG: srcs[nsrc++] = v; break;
		default: free(srcs); return EXIT_USAGE;
		}
	}
	if (!into || nsrc == 0) {
		free(srcs);
		return opts_usage("pool", "give --into FILE and at least one database");
	}
	struct store *s;
	char *err = NULL;
	if (store_open(into, &s, &err)) {
		fprintf(stderr, "tachist pool: %s\n", err);
		free(err);
		free(srcs);
		return EXIT_PROBLEMS;
	}
	int failed = 0;
	for (int i = 0; i < nsrc; i++) {
		struct store_pool_stats st;
		if (store_pool_from(s, srcs[i], &st, &err)) {
			fprintf(stderr, "tachist pool: %s (nothing from it was added)\n", err);
			free(err);
			err = NULL;
			failed++;
			continue;
		}
		printf("%s: %zu sessions added, %zu updated, %zu trials added, %zu events added",
		       srcs[i], st.sessions_added, st.sessions_updated, st.trials_added,
		       st.events_added);
		if (st.source_version != STORE_SCHEMA_VERSION)
			printf(" (schema version %d read through a migrated copy)", st.source_version);
		printf("\n");
		if (st.trials_conflicting)
			fprintf(stderr, "tachist pool: warning: %s: %zu trials differ from the ones "
				"already in %s; kept those in %s\n", srcs[i], st.trials_conflicting,
				into, into);
	}
	store_close(s);
	free(srcs);
	return failed ? EXIT_PROBLEMS : EXIT_OK;
}
