/* cmd_demo — `tachist demo`: runs protocols/demo.ini. With a display (DISPLAY or WAYLAND_DISPLAY
 * set, and no --headless) the observer answers on the keyboard in a window; without one it runs
 * headless with a model observer whose thresholds suit the demo's noise budgets. Then the block
 * summaries and the session line (cmd_run_session). */
#include <stdlib.h>
#include <string.h>

#include "cmd.h"
#include "run.h"

/* Noise budgets 0, 8, 16, 32: a mirrored Weibull (accuracy falls as the budget grows) near
 * ceiling at 8, about 60% at 16, near chance at 32. Invented for the demo. */
#define DEMO_MODEL "model:shape=weibull,threshold=20,slope=-3,lapse=0.02,rt=650,seed=1"

int cmd_demo(int argc, char **argv)
{
	struct run_options o = {.db_path = "tachist-demo.db", .subject = "demo1"};
	char *rig_arg = NULL;
	if (cmd_run_options(argc, argv, 1, &o, &rig_arg)) {
		cmd_print_usage("demo", stderr);
		return EXIT_USAGE;
	}
	const char *dpy = getenv("DISPLAY"), *way = getenv("WAYLAND_DISPLAY");
	bool display = (dpy && *dpy) || (way && *way);
	if (!display)
		o.headless = true;
	if (!o.observer)
		o.observer = o.headless ? DEMO_MODEL : "keyboard";
	if (!o.headless)
		o.window = true;
	char *proto = cmd_asset_path("protocols/demo.ini");
	if (!proto) {
		fprintf(stderr, "tachist: protocols/demo.ini not found (run from the source folder)\n");
		return EXIT_PROBLEMS;
	}
	char *rig = rig_arg ? strdup(rig_arg) : cmd_asset_path("assets-demo/rig.ini");
	o.protocol_path = proto;
	o.rig_path = rig;
	printf("demo: %s, %s, observer %s, database %s\n", proto,
	       o.headless ? "headless (simulated timing)" : "on this display", o.observer, o.db_path);
	if (!o.headless)
		printf("demo: answer with the keys s d f j k l (ring bar cross chevron wedge lattice); "
		       "Escape pauses\n");
	fflush(stdout);
	int code = cmd_run_session(&o);
	free(proto);
	free(rig);
	return code;
}
