/* cmd_merge — `tachist merge --into FILE DB...`: pools databases from several rigs into one.
 * Sessions are keyed by UUID and trials by (session, index), so merging a file twice adds
 * nothing; each source goes in its own transaction, older schemas are migrated in a temporary
 * copy, newer ones refused. */
#include <stdlib.h>
#include <string.h>

#include "cmd.h"
#include "store.h"

int cmd_merge(int argc, char **argv)
{
	const char *into = NULL;
	const char **srcs = xcalloc((size_t)argc, sizeof *srcs);
	int nsrc = 0;
	for (int i = 1; i < argc; i++) {
		if (!strcmp(argv[i], "--into") && i + 1 < argc)
			into = argv[++i];
		else if (argv[i][0] == '-' && argv[i][1]) {
			fprintf(stderr, "tachist merge: unexpected option '%s'\n", argv[i]);
			cmd_print_usage("merge", stderr);
			free(srcs);
			return EXIT_USAGE;
		} else
			srcs[nsrc++] = argv[i];
	}
	if (!into || nsrc == 0) {
		fprintf(stderr, "tachist merge: give --into FILE and at least one database\n");
		cmd_print_usage("merge", stderr);
		free(srcs);
		return EXIT_USAGE;
	}
	struct store *s;
	char *err = NULL;
	if (store_open(into, &s, &err)) {
		fprintf(stderr, "tachist merge: %s\n", err);
		free(err);
		free(srcs);
		return EXIT_PROBLEMS;
	}
	int failed = 0;
	for (int i = 0; i < nsrc; i++) {
		struct store_merge_stats st;
		if (store_merge_from(s, srcs[i], &st, &err)) {
			fprintf(stderr, "tachist merge: %s (nothing from it was added)\n", err);
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
			fprintf(stderr, "tachist merge: warning: %s: %zu trials differ from the ones "
				"already in %s; kept those in %s\n", srcs[i], st.trials_conflicting,
				into, into);
	}
	store_close(s);
	free(srcs);
	return failed ? EXIT_PROBLEMS : EXIT_OK;
}
