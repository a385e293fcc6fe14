/* cmd_demo — `tachist demo`: runs protocols/demo.ini. With a display (DISPLAY or WAYLAND_DISPLAY
 * set, and no --headless) the observer answers on the keyboard in a window; without one it runs
 * headless with a model observer whose thresholds suit the demo's noise budgets. Then the block
 * summaries and the session line (cmd_run_session). */
#include <stdlib.h>
#include <string.h>

#include <math.h>

#include "cmd.h"
#include "run.h"
#include "store.h"

/* Noise budgets 0, 8, 16, 32: a mirrored Weibull (accuracy falls as the budget grows) near
 * ceiling at 8, about 60% at 16, near chance at 32. Invented for the demo. */
#define DEMO_MODEL "model:shape=weibull,threshold=18,slope=-2,lapse=0.02,rt=650,seed=1"

/* Accuracy per level of the session's main-block trials, read back from the database. */
/* Prints PATH so that a shell reads it back as one word: as it is when it holds only characters no
 * shell treats specially, else in single quotes (a quote inside written '\''), so the commands the
 * demo suggests can be pasted even when the database lies in a folder with spaces. */
static void put_shell_word(const char *path)
{
	static const char plain[] = "ABCDEFGHIJKLMNOPQRSTUVWXYZabcdefghijklmnopqrstuvwxyz"
				    "0123456789_./-+=:,@%";
	if (*path && strspn(path, plain) == strlen(path)) {
		fputs(path, stdout);
		return;
	}
	putchar('\'');
	for (const char *c = path; *c; c++) {
		if (*c == '\'')
			fputs("'\\''", stdout);
		else
			putchar(*c);
	}
	putchar('\'');
}

static void print_levels(const char *db, const char *id)
{
	struct store *st;
	char *err = NULL;
	if (store_open(db, &st, &err)) {
		free(err);
		return;
	}
	struct store_trial *t = NULL;
	size_t n = 0;
	if (store_trials_load(st, id, &t, &n, &err) == 0) {
		double levels[16];
		size_t nl = 0, tot[16] = {0}, ok[16] = {0};
		for (size_t i = 0; i < n; i++) {
			if (t[i].practice || !t[i].has_level)
				continue;
			size_t k = 0;
			while (k < nl && levels[k] != t[i].level)
				k++;
			if (k == nl) {
				if (nl == 16)
					continue;
				levels[nl++] = t[i].level;
			}
			tot[k]++;
			ok[k] += t[i].correct == 1;
		}
		if (nl)
			printf("\nnoise budget   trials   correct   proportion\n");
		for (size_t a = 0; a < nl; a++) {   /* ascending level */
			size_t m = a;
			for (size_t b = a + 1; b < nl; b++)
				if (levels[b] < levels[m])
					m = b;
			double lv = levels[m]; levels[m] = levels[a]; levels[a] = lv;
			size_t x = tot[m]; tot[m] = tot[a]; tot[a] = x;
			x = ok[m]; ok[m] = ok[a]; ok[a] = x;
			printf("%12g %8zu %9zu %12.3f\n", levels[a], tot[a], ok[a],
			       (double)ok[a] / (double)tot[a]);
		}
		store_trials_free(t, n);
	}
	free(err);
	store_close(st);
	printf("\nmore:\n  tachist report --db ");
	put_shell_word(db);
	printf(" --session %.8s\n  tachist export --db ", id);
	put_shell_word(db);
	printf(" --format csv --session %.8s --out demo.csv\n", id);
}

int cmd_demo(int argc, char **argv)
{
	struct run_options o = {.db_path = "tachist-demo.db", .subject = "demo1"};
	const char *rig_arg = NULL;
	if (cmd_run_options("demo", argc, argv, &o, &rig_arg, NULL))
		return EXIT_USAGE;
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
	char id[37];
	int code = cmd_run_session(&o, id);
	if (id[0])
		print_levels(o.db_path, id);
	free(proto);
	free(rig);
	return code;
}
