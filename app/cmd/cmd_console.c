/* cmd_console — `tachist console [--db FILE] [--rig FILE]`: opens the experimenter's console
 * (app/console). Resolves the database, the rig profile and the protocols folder, then hands
 * over; the console restores the terminal on every way out. */
#include <stdlib.h>
#include <string.h>

#include "cmd.h"
#include "console.h"

int cmd_console(int argc, char **argv)
{
	const char *db = "tachist.db", *rig = NULL;
	for (int i = 1; i < argc; i++) {
		if (!strcmp(argv[i], "--db") && i + 1 < argc) {
			db = argv[++i];
		} else if (!strcmp(argv[i], "--rig") && i + 1 < argc) {
			rig = argv[++i];
		} else {
			fprintf(stderr, "tachist console: unexpected argument '%s'\n", argv[i]);
			cmd_print_usage("console", stderr);
			return EXIT_USAGE;
		}
	}
	if (!*db) {
		fprintf(stderr, "tachist console: --db needs a file name\n");
		return EXIT_USAGE;
	}
	/* The demo-rig fallback is shown on the console's first screen, not printed here. */
	bool demo = false;
	char *rig_path = cmd_rig_path_find(rig, &demo);
	char *protocols = cmd_asset_path("protocols");
	struct console_options o = {
		.db_path = db,
		.rig_path = rig_path,
		.rig_is_fallback = demo,
		.protocols_dir = protocols,
	};
	int rc = console_main(&o);
	free(rig_path);
	free(protocols);
	return rc == 0 ? EXIT_OK : EXIT_PROBLEMS;
}
