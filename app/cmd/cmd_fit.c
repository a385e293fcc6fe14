/* cmd_fit — `tachist fit`: placeholder until its issue lands (see DEVELOPERS.md). */
#include "cmd.h"

int cmd_fit(int argc, char **argv)
{
	(void)argc;
	fprintf(stderr, "tachist: '%s' is not built yet\n", argv[0]);
	return EXIT_PROBLEMS;
}
