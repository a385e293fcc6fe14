/* cmd_console — `tachist console [--db FILE] [--rig FILE] [--clock-hz HZ]`: opens the
 * experimenter's console (app/console). Resolves the database, the rig profile and the protocols
 * folder, then hands over; the console restores the terminal on every way out. */
#include <stdlib.h>
#include <string.h>

#include "cmd.h"
#include "console.h"

enum { O_DB, O_RIG, O_CLOCK_HZ };
const struct opts_row cmd_console_opts[] = {
	[O_DB] = {"db", "FILE", "the database sessions go to (default tachist.db)"},
	[O_RIG] = {"rig", "FILE", "the rig profile (default $XDG_CONFIG_HOME/tachist/rig.ini)"},
	[O_CLOCK_HZ] = {"clock-hz", "HZ", "headless sessions: the virtual clock's rate (default the rig's)"},
	OPTS_END,
};

int cmd_console(int argc, char **argv)
{
	const char *db = "tachist.db", *rig = NULL, *v;
	double clock_hz = 0;
	struct opts p;
	opts_begin(&p, "console", cmd_console_opts, argc, argv);
	for (int k; (k = opts_next(&p, &v)) != OPTS_DONE;) {
		switch (k) {
		case O_DB: db = v; break;
		case O_RIG: rig = v; break;
		case O_CLOCK_HZ:
			if (cmd_parse_double(v, &clock_hz) || !(clock_hz >= 1 && clock_hz <= 1000))
				return opts_usage("console", "--clock-hz takes a rate from 1 to 1000 Hz (got '%s')", v);
			break;
		case OPTS_ARG: return opts_usage("console", "unexpected argument '%s'", v);
		default: return EXIT_USAGE;
		}
	}
	if (!*db)
		return opts_usage("console", "--db needs a file name");
	/* The demo-rig fallback is shown on the console's first screen, not printed here. */
	bool demo = false;
	char *rig_path = cmd_rig_path_find(rig, &demo);
	char *protocols = cmd_asset_path("protocols");
	struct console_options o = {
		.db_path = db,
		.rig_path = rig_path,
		.rig_is_fallback = demo,
		.protocols_dir = protocols,
		.clock_hz = clock_hz,
	};
	int rc = console_main(&o);
	free(rig_path);
	free(protocols);
	return rc == 0 ? EXIT_OK : EXIT_PROBLEMS;
}
