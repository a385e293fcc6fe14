/* cmd_demo — `tachist demo`: placeholder until its issue lands (see DEVELOPERS.md). */
#include "cmd.h"

int cmd_demo(int argc, char **argv)
{
	(void)argc;
	fprintf(stderr, "tachist: '%s' is not built yet\n", argv[0]);
	return EXIT_PROBLEMS;
}
