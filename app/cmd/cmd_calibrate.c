/* cmd_calibrate — `tachist calibrate`: measure the observer's display with a photometer and store
 * the result in the rig profile's [luminance] section.
 *
 * Without --from, the display is filled (or, with --patch-deg, a centred square is drawn on a
 * surround) with each code of an evenly spaced series in a shuffled order, per channel asked for,
 * and the experimenter types the photometer's reading for each at the terminal. With --from, the
 * readings come from a CSV file. Either way each channel is fitted (core/lum.c), the fit and its
 * residuals are printed, and the rig profile is rewritten atomically with every other section and
 * comment kept (io/rig_lum.c) unless --dry-run. Nothing is written when any reading is refused. */
#include <errno.h>
#include <math.h>
#include <poll.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include <cJSON.h>

#include "cmd.h"
#include "opts.h"
#include "dclock.h"
#include "display.h"
#include "geom.h"
#include "image.h"
#include "lum.h"
#include "lumcsv.h"
#include "lumshow.h"
#include "rig_file.h"
#include "rig_lum.h"

struct cal_opts {
	const char *rig_arg, *from, *shots;
	int steps;
	bool channel[LUM_NCHANNELS];
	double patch_deg;
	int surround;
	unsigned long long seed;
	bool seed_given, ascending;
	enum lum_model model;
	char measured[11];
	int max_age;
	bool dry, json, headless, window;
};

/* All readings gathered, per channel. */
struct readings {
	int code[LUM_NCHANNELS][LUM_MAX_READINGS];
	double cd[LUM_NCHANNELS][LUM_MAX_READINGS];
	size_t n[LUM_NCHANNELS];
};

static int parse_channels(const char *v, struct cal_opts *o)
{
	memset(o->channel, 0, sizeof o->channel);
	if (!strcmp(v, "grey") || !strcmp(v, "gray")) {
		o->channel[LUM_GREY] = true;
	} else if (!strcmp(v, "rgb")) {
		o->channel[LUM_RED] = o->channel[LUM_GREEN] = o->channel[LUM_BLUE] = true;
	} else if (!strcmp(v, "all")) {
		for (int c = 0; c < LUM_NCHANNELS; c++)
			o->channel[c] = true;
	} else {
		return -1;
	}
	return 0;
}

enum { O_RIG, O_FROM, O_STEPS, O_CHANNELS, O_PATCH, O_SURROUND, O_ORDER, O_SEED, O_MODEL,
       O_MEASURED, O_MAX_AGE, O_DRY, O_JSON, O_HEADLESS, O_WINDOW, O_SHOTS };
const struct opts_row cmd_calibrate_opts[] = {
	[O_RIG] = {"rig", "FILE", "the rig profile to calibrate and write (default $XDG_CONFIG_HOME/tachist/rig.ini)"},
	[O_FROM] = {"from", "CSV", "take the readings from CSV (code,cd_m2[,channel]) instead of the display"},
	[O_STEPS] = {"steps", "N", "codes measured per channel, evenly spaced over 0-255 (3 to 256, default 17)"},
	[O_CHANNELS] = {"channels", "WHICH", "grey (default), rgb (red, green, blue alone) or all"},
	[O_PATCH] = {"patch-deg", "D", "a centred square of D degrees instead of the whole screen"},
	[O_SURROUND] = {"surround", "CODE", "grey code around the patch (default 0)"},
	[O_ORDER] = {"order", "ORDER", "shuffled (default) or ascending"},
	[O_SEED] = {"seed", "N", "seed of the shuffled order (default: fresh, printed)"},
	[O_MODEL] = {"model", "MODEL", "auto (default: the table when the fit is poor), fit or table"},
	[O_MEASURED] = {"measured", "DATE", "date of the readings, YYYY-MM-DD (default today, UTC)"},
	[O_MAX_AGE] = {"max-age-days", "N", "check warns when the calibration is older (default 30)"},
	[O_DRY] = {"dry-run", NULL, "fit and print, but leave the rig profile unchanged"},
	[O_JSON] = {"json", NULL, "the fit and the readings as one JSON document on standard output"},
	[O_HEADLESS] = {"headless", NULL, "no display: draw to memory (for tests)"},
	[O_WINDOW] = {"window", NULL, "a window of the rig's size instead of full screen"},
	[O_SHOTS] = {"screenshots", "DIR", "save each code's frame as a PNG in DIR"},
	OPTS_END,
};

/* One option with a value; returns 0 or the usage exit code. */
static int take_value(struct cal_opts *o, int k, const char *v)
{
	unsigned long long u;
	double x;
	switch (k) {
	case O_RIG: o->rig_arg = v; break;
	case O_FROM: o->from = v; break;
	case O_SHOTS: o->shots = v; break;
	case O_STEPS:
		if (cmd_parse_u64(v, &u) || u < 3 || u > 256)
			return opts_usage("calibrate", "--steps takes a whole number from 3 to 256, not '%s'", v);
		o->steps = (int)u;
		break;
	case O_CHANNELS:
		if (parse_channels(v, o))
			return opts_usage("calibrate", "--channels takes grey, rgb or all, not '%s'", v);
		break;
	case O_PATCH:
		if (cmd_parse_double(v, &x) || x < 0 || x > 180)
			return opts_usage("calibrate", "--patch-deg takes degrees of visual angle (0 = the "
					  "whole screen), not '%s'", v);
		o->patch_deg = x;
		break;
	case O_SURROUND:
		if (cmd_parse_u64(v, &u) || u > 255)
			return opts_usage("calibrate", "--surround takes a code from 0 to 255, not '%s'", v);
		o->surround = (int)u;
		break;
	case O_SEED:
		if (cmd_parse_u64(v, &o->seed))
			return opts_usage("calibrate", "--seed takes a whole number, not '%s'", v);
		o->seed_given = true;
		break;
	case O_ORDER:
		if (strcmp(v, "shuffled") && strcmp(v, "ascending"))
			return opts_usage("calibrate", "--order takes shuffled or ascending, not '%s'", v);
		o->ascending = !strcmp(v, "ascending");
		break;
	case O_MODEL:
		if (!strcmp(v, "auto"))
			o->model = LUM_MODEL_AUTO;
		else if (!strcmp(v, "fit"))
			o->model = LUM_MODEL_FIT;
		else if (!strcmp(v, "table"))
			o->model = LUM_MODEL_TABLE;
		else
			return opts_usage("calibrate", "--model takes auto, fit or table, not '%s'", v);
		break;
	case O_MEASURED:
		if (!lum_date_valid(v))
			return opts_usage("calibrate", "--measured takes a date written YYYY-MM-DD, not '%s'", v);
		snprintf(o->measured, sizeof o->measured, "%s", v);
		break;
	case O_MAX_AGE:
		if (cmd_parse_u64(v, &u) || u < 1 || u > 3650)
			return opts_usage("calibrate", "--max-age-days takes a whole number from 1 to 3650, "
					  "not '%s'", v);
		o->max_age = (int)u;
		break;
	case O_DRY: o->dry = true; break;
	case O_JSON: o->json = true; break;
	case O_HEADLESS: o->headless = true; break;
	case O_WINDOW: o->window = true; break;
	case OPTS_ARG: return opts_usage("calibrate", "unexpected argument '%s'", v);
	default: return EXIT_USAGE;
	}
	return 0;
}

static int parse_args(int argc, char **argv, struct cal_opts *o)
{
	memset(o, 0, sizeof *o);
	o->steps = 17;
	o->channel[LUM_GREY] = true;
	o->max_age = 30;
	struct opts p;
	opts_begin(&p, "calibrate", cmd_calibrate_opts, argc, argv);
	const char *v;
	for (int k; (k = opts_next(&p, &v)) != OPTS_DONE;) {
		int rc = take_value(o, k, v);
		if (rc)
			return rc;
	}
	if (!o->measured[0]) {
		time_t now = time(NULL);
		struct tm tm;
		gmtime_r(&now, &tm);
		strftime(o->measured, sizeof o->measured, "%Y-%m-%d", &tm);
	}
	if (!o->seed_given)
		o->seed = (unsigned long long)time(NULL) ^ ((unsigned long long)getpid() << 16);
	return 0;
}

/* Reads one line from standard input, keeping the observer's window alive while it waits.
 * Returns 1 with LINE, 0 at the end of input, -1 when the window was closed. */
static int read_line(struct display *disp, char *line, size_t len)
{
	if (isatty(STDIN_FILENO)) {
		for (;;) {
			struct pollfd p = {STDIN_FILENO, POLLIN, 0};
			int r = poll(&p, 1, 100);
			if (r > 0)
				break;
			if (r < 0 && errno != EINTR)
				return 0;
			char key[24];
			uint32_t ms;
			if (display_poll_key(disp, key, sizeof key, &ms) == 2)
				return -1;
		}
	}
	if (!fgets(line, (int)len, stdin))
		return 0;
	line[strcspn(line, "\r\n")] = '\0';
	return 1;
}

/* Warns when READING at CODE breaks the rise of the channel's earlier readings. */
static void warn_order(const struct readings *r, int ch, int code, double cd)
{
	int c2;
	double l2;
	if (lum_reading_out_of_order(r->code[ch], r->cd[ch], r->n[ch], code, cd, &c2, &l2))
		fprintf(stderr, "  warning: %g cd/m2 at code %d against %g cd/m2 at code %d: the "
			"light should rise with the code (is the photometer still on the "
			"patch?)\n", cd, code, l2, c2);
}

/* Asks for the reading of CODE on channel CH until a valid one is typed. Returns 1 with *CD, 0
 * when the experimenter stops (q or end of input), -1 when the window was closed. */
static int ask_reading(struct display *disp, int k, int total, int code, int ch, double *cd)
{
	for (;;) {
		fprintf(stderr, "[%d/%d] code %d (%s): photometer reading in cd/m2 (q to stop): ", k,
			total, code, lum_channel_name(ch));
		fflush(stderr);
		char line[128];
		int r = read_line(disp, line, sizeof line);
		if (r <= 0)
			return r;
		const char *s = line + strspn(line, " \t");
		if (!strcmp(s, "q") || !strcmp(s, "quit"))
			return 0;
		if (!*s)
			continue;
		char msg[160];
		double x;
		if (lum_reading_parse(s, &x, msg, sizeof msg)) {
			fprintf(stderr, "  %s\n", msg);
			continue;
		}
		*cd = x;
		return 1;
	}
}

/* Draws CODE on channel CH (full screen or the patch) and presents it; saves a screenshot. */
static void show_code(struct display *disp, struct dclock *clk, const struct cal_opts *o,
		      int patch_px, int code, int ch, int k)
{
	lumshow_draw(disp, patch_px, o->surround, code, ch);
	if (o->shots) {
		struct image img = {0};
		img.rgba = display_read_pixels(disp, &img.width, &img.height);
		char *name = xasprintf("%s/calibrate-%02d-%s-%03d.png", o->shots, k,
				       lum_channel_name(ch), code);
		char err[256];
		if (img.rgba && image_save_png(name, &img, err, sizeof err))
			fprintf(stderr, "tachist: %s\n", err);
		free(name);
		free(img.rgba);
	}
	dclock_flip(clk);
}

/* Shows every code and takes the typed readings. Returns 0, or an exit code. */
static int measure(const struct cal_opts *o, const struct rig *rig, struct readings *r)
{
	char err[512];
	struct display_opts dopt = {.headless = o->headless, .window = o->window, .vsync = true,
				    .display_index = rig->display, .width_px = rig->width_px,
				    .height_px = rig->height_px, .background = o->surround,
				    .title = "tachist calibrate"};
	struct display *disp = display_open(&dopt, err, sizeof err);
	if (!disp) {
		fprintf(stderr, "tachist: %s\n", err);
		return EXIT_PROBLEMS;
	}
	struct dclock *clk;
	if (o->headless) {
		struct dclock_virtual_opts vo = {.hz = rig->refresh_hz, .seed = 1};
		clk = dclock_virtual_new(display_renderer(disp), &vo);
	} else {
		clk = dclock_vsync_new(display_renderer(disp), rig->refresh_hz);
	}
	int patch_px = o->patch_deg > 0 ? geom_deg_to_px(rig, o->patch_deg, NULL) : 0;
	static int plan[LUM_NCHANNELS * 256][2];
	size_t n = lum_plan(o->steps, o->channel, o->ascending, (unsigned long)o->seed, plan);
	fprintf(stderr, "Point the photometer at the %s and type each reading (%zu in all, order "
		"seed %llu).\n", patch_px ? "centre patch" : "screen", n, o->seed);
	int rc = 0;
	for (size_t k = 0; k < n && !rc; k++) {
		int ch = plan[k][0], code = plan[k][1];
		show_code(disp, clk, o, patch_px, code, ch, (int)k + 1);
		double cd;
		int got = ask_reading(disp, (int)k + 1, (int)n, code, ch, &cd);
		if (got <= 0) {
			fprintf(stderr, "\ntachist: calibration stopped after %zu of %zu readings; the rig "
				"profile is not changed\n", k, n);
			rc = EXIT_PROBLEMS;
			break;
		}
		warn_order(r, ch, code, cd);
		r->code[ch][r->n[ch]] = code;
		r->cd[ch][r->n[ch]++] = cd;
	}
	dclock_destroy(clk);
	display_close(disp);
	return rc;
}

static int load_csv(const char *path, struct readings *r)
{
	struct lumcsv_reading *v;
	size_t n;
	struct diag_list d;
	diag_init(&d);
	int rc = lumcsv_read(path, &v, &n, &d);
	cmd_print_diags(&d, stderr);
	diag_clear(&d);
	if (rc)
		return EXIT_PROBLEMS;
	for (size_t i = 0; i < n; i++) {
		int ch = v[i].channel;
		if (r->n[ch] >= LUM_MAX_READINGS)
			continue;   /* duplicates were refused, so at most 256 per channel */
		r->code[ch][r->n[ch]] = v[i].code;
		r->cd[ch][r->n[ch]++] = v[i].cd;
	}
	free(v);
	return 0;
}

/* Fits every channel with readings into CAL. Returns 0, or EXIT_PROBLEMS after messages. */
static int fit_all(const struct readings *r, struct lum_cal *cal, const char *src)
{
	int rc = 0;
	for (int ch = 0; ch < LUM_NCHANNELS; ch++) {
		if (!r->n[ch])
			continue;
		char err[256];
		bool warn = false;
		if (lum_fit(r->code[ch], r->cd[ch], r->n[ch], &cal->ch[ch], &warn, err, sizeof err)) {
			fprintf(stderr, "%s: error: %s readings: %s\n", src, lum_channel_name(ch), err);
			rc = EXIT_PROBLEMS;
		} else if (warn) {
			fprintf(stderr, "%s: warning: %s readings do not rise steadily with the code\n",
				src, lum_channel_name(ch));
		}
	}
	return rc;
}

static void print_text(const struct lum_cal *cal, const char *rigpath, bool written)
{
	for (int ch = 0; ch < LUM_NCHANNELS; ch++) {
		const struct lum_curve *c = &cal->ch[ch];
		if (!c->present)
			continue;
		double range = c->l_max - c->l_min;
		bool table = lum_uses_table(c, cal->model);
		printf("%s: gamma %.4f, L_min %.4g cd/m2, L_max %.4g cd/m2, residual RMS %.3g cd/m2 "
		       "(%.2f%% of the range): %s\n", lum_channel_name(ch), c->gamma, c->l_min,
		       c->l_max, c->rms, 100 * c->rms / range,
		       table ? (lum_fit_is_poor(c) ? "the fit is poor (over 2% of the range), so the "
				"measured table is interpolated" : "the measured table is interpolated")
			     : "the fit is used");
		printf("   code     cd/m2       fit  residual\n");
		for (size_t i = 0; i < c->n; i++) {
			double f = lum_model_eval(c, c->code[i]);
			printf("  %5d %9.4g %9.4g %+9.3g\n", c->code[i], c->cd[i], f, c->cd[i] - f);
		}
	}
	if (written)
		printf("written to %s ([luminance], measured %s)\n", rigpath, cal->measured);
	else
		printf("not written (--dry-run); %s is unchanged\n", rigpath);
}

static void print_json(const struct lum_cal *cal, const char *rigpath, bool written)
{
	cJSON *root = cJSON_CreateObject();
	cJSON_AddStringToObject(root, "rig", rigpath);
	cJSON_AddBoolToObject(root, "written", written);
	cJSON_AddStringToObject(root, "measured", cal->measured);
	static const char *const models[] = {"auto", "fit", "table"};
	cJSON_AddStringToObject(root, "model", models[cal->model]);
	cJSON *chs = cJSON_AddArrayToObject(root, "channels");
	for (int ch = 0; ch < LUM_NCHANNELS; ch++) {
		const struct lum_curve *c = &cal->ch[ch];
		if (!c->present)
			continue;
		cJSON *o = cJSON_CreateObject();
		cJSON_AddStringToObject(o, "channel", lum_channel_name(ch));
		cJSON_AddNumberToObject(o, "gamma", c->gamma);
		cJSON_AddNumberToObject(o, "l_min", c->l_min);
		cJSON_AddNumberToObject(o, "l_max", c->l_max);
		cJSON_AddNumberToObject(o, "rms", c->rms);
		cJSON_AddNumberToObject(o, "rms_share", c->rms / (c->l_max - c->l_min));
		cJSON_AddBoolToObject(o, "poor_fit", lum_fit_is_poor(c));
		cJSON_AddBoolToObject(o, "uses_table", lum_uses_table(c, cal->model));
		cJSON *rs = cJSON_AddArrayToObject(o, "readings");
		for (size_t i = 0; i < c->n; i++) {
			cJSON *x = cJSON_CreateObject();
			double f = lum_model_eval(c, c->code[i]);
			cJSON_AddNumberToObject(x, "code", c->code[i]);
			cJSON_AddNumberToObject(x, "cd_m2", c->cd[i]);
			cJSON_AddNumberToObject(x, "fitted", f);
			cJSON_AddNumberToObject(x, "residual", c->cd[i] - f);
			cJSON_AddItemToArray(rs, x);
		}
		cJSON_AddItemToArray(chs, o);
	}
	char *s = cJSON_Print(root);
	if (s)
		puts(s);
	free(s);
	cJSON_Delete(root);
}

int cmd_calibrate(int argc, char **argv)
{
	struct cal_opts o;
	int rc = parse_args(argc, argv, &o);
	if (rc)
		return rc;
	bool is_demo = false;
	char *rigpath = cmd_rig_path_find(o.rig_arg, &is_demo);
	if (!rigpath) {
		fprintf(stderr, "tachist: no rig profile found; pass --rig FILE\n");
		return EXIT_PROBLEMS;
	}
	if (is_demo && !o.dry) {
		fprintf(stderr, "tachist: calibrate writes the rig profile, and the only one found is "
			"the demo rig (%s); pass --rig FILE for your rig, or --dry-run\n", rigpath);
		free(rigpath);
		return EXIT_PROBLEMS;
	}
	struct rig rig;
	struct diag_list d;
	diag_init(&d);
	rc = rig_load(rigpath, &rig, &d);
	cmd_print_diags(&d, stderr);
	diag_clear(&d);
	if (rc) {
		free(rigpath);
		return EXIT_PROBLEMS;
	}
	struct readings *r = xcalloc(1, sizeof *r);
	struct lum_cal *cal = xcalloc(1, sizeof *cal);
	rc = o.from ? load_csv(o.from, r) : measure(&o, &rig, r);
	if (!rc)
		rc = fit_all(r, cal, o.from ? o.from : "readings");
	if (!rc) {
		snprintf(cal->measured, sizeof cal->measured, "%s", o.measured);
		cal->max_age_days = o.max_age;
		cal->model = o.model;
		char err[600];
		if (!o.dry && rig_lum_write(rigpath, cal, err, sizeof err)) {
			fprintf(stderr, "tachist: %s\n", err);
			rc = EXIT_PROBLEMS;
		} else if (o.json) {
			print_json(cal, rigpath, !o.dry);
		} else {
			print_text(cal, rigpath, !o.dry);
		}
	} else if (rc == EXIT_PROBLEMS && o.from) {
		fprintf(stderr, "tachist: nothing written; %s is unchanged\n", rigpath);
	}
	free(r);
	free(cal);
	rig_clear(&rig);
	free(rigpath);
	return rc;
}
