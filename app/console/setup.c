/* setup — the set-up form: protocol, subject ID, rig, seed, display and observer, with the check
 * of protocol, rig and stimulus list shown beside them, then "open the session".
 *
 * Rows are fields (edited in place with their validation message under them) or choices (Left
 * and Right step through the values). The check runs in the console process whenever the
 * protocol, rig or seed changes, through the loader `check` and `run` use (inputs.h: protocol,
 * rig, list, every image, the plan), every problem as FILE:LINE. Opening the session hands a run_options to the presentation child
 * (presenter.c) and moves on to the blocks screen. With a resume ID the protocol, subject and seed
 * come from the stored session and are shown, not edited. */
#include "console.h"

#include <curses.h>
#include <dirent.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "diag.h"
#include "estimate.h"
#include "geom.h"
#include "observer.h"
#include "inputs.h"
#include "run.h"
#include "store.h"

enum row { ROW_PROTOCOL, ROW_SUBJECT, ROW_RIG, ROW_SEED, ROW_DISPLAY, ROW_OBSERVER, ROW_MODEL,
	   ROW_COUNT };

struct setup {
	struct console_field f[ROW_COUNT];   /* DISPLAY and OBSERVER are choices, not fields */
	int row;
	enum console_display display;
	bool model;
	char resume_id[37];
	/* protocols found in the protocols folder */
	char **found;
	size_t nfound;
	/* the check */
	bool checked, usable;
	struct diag_list diags;
	char plan_line[200], rig_line[200], epoch_line[200], geom_line[200];
	int nerrors, nwarnings;
	int scroll;
	double size_deg;                     /* the protocol's stimulus size, for the rig editor */
	char *stored_rig;                    /* resume: the rig text stored with the session */
	struct console_draft *draft;         /* new session: where the form is kept when left */
	bool opened;                         /* a session was opened from this form */
};

static const struct console_key setup_keys[] = {
	{"g", "go"},
	{"p", "problems"},
	{"e", "edit rig"},
	{"l", "luminance"},
	{"Enter", "edit"},
	{"Up/Down", "move"},
	{"Left/Right", "choose"},
};

static const char *const display_names[CONSOLE_DISPLAY_COUNT] = {
	[CONSOLE_FULLSCREEN] = "full screen on the observer's display",
	[CONSOLE_WINDOW] = "a window on the observer's display",
	[CONSOLE_HEADLESS_PACED] = "headless, in real time (no display; simulated timing)",
	[CONSOLE_HEADLESS_FAST] = "headless, as fast as possible (simulated timing)",
};

static bool row_is_field(int row)
{
	return row != ROW_DISPLAY && row != ROW_OBSERVER;
}

static bool row_shown(const struct setup *s, int row)
{
	return row != ROW_MODEL || s->model;
}

static bool row_locked(const struct setup *s, int row)
{
	return s->resume_id[0] && (row == ROW_PROTOCOL || row == ROW_SUBJECT || row == ROW_SEED ||
				   row == ROW_RIG);
}

static bool have_display(void)
{
	const char *disp = getenv("DISPLAY"), *way = getenv("WAYLAND_DISPLAY");
	return (disp && *disp) || (way && *way);
}

/* A seed nobody has to think of: 9 digits from /dev/urandom (never the clock). */
static unsigned long long fresh_seed(void)
{
	unsigned long long v = 0;
	FILE *f = fopen("/dev/urandom", "rb");
	if (f) {
		if (fread(&v, sizeof v, 1, f) != 1)
			v = 0;
		fclose(f);
	}
	return v % 900000000ULL + 100000000ULL;
}

static int cmp_str(const void *a, const void *b)
{
	return strcmp(*(char *const *)a, *(char *const *)b);
}

static void find_protocols(struct setup *s, const char *dir)
{
	if (!dir)
		return;
	DIR *d = opendir(dir);
	if (!d)
		return;
	struct dirent *e;
	while ((e = readdir(d))) {
		size_t n = strlen(e->d_name);
		if (n > 4 && !strcmp(e->d_name + n - 4, ".ini") && e->d_name[0] != '.') {
			s->found = xrealloc(s->found, (s->nfound + 1) * sizeof *s->found);
			s->found[s->nfound++] = xasprintf("%s/%s", dir, e->d_name);
		}
	}
	closedir(d);
	if (s->nfound)
		qsort(s->found, s->nfound, sizeof *s->found, cmp_str);
}

/* Validates protocol, rig, list and images and builds the plan through the loader `tachist check`
 * and the session use, so the form shows the problems that would stop the session. */
static void run_check(struct setup *s)
{
	diag_clear(&s->diags);
	diag_init(&s->diags);
	s->checked = true;
	s->usable = false;
	s->plan_line[0] = s->rig_line[0] = s->epoch_line[0] = s->geom_line[0] = '\0';
	struct inputs_options io = {
		.protocol_path = s->f[ROW_PROTOCOL].len ? s->f[ROW_PROTOCOL].text : NULL,
		.rig_path = s->f[ROW_RIG].len ? s->f[ROW_RIG].text : NULL,
		.rig_text = s->stored_rig,
		.seed = strtoull(s->f[ROW_SEED].text, NULL, 10),
	};
	struct inputs in;
	memset(&in, 0, sizeof in);
	int rc = io.protocol_path ? inputs_load(&io, &in, &s->diags) : -1;
	const struct protocol *p = &in.proto;
	const struct rig *r = &in.rig;
	const struct plan *pl = &in.plan;
	if (in.have_rig)
		snprintf(s->rig_line, sizeof s->rig_line, "%dx%d px, %gx%g cm, %g cm away, %g Hz",
			 r->width_px, r->height_px, r->width_cm, r->height_cm, r->distance_cm,
			 r->refresh_hz);
	if (in.have_proto && in.have_rig) {
		double deg_actual = 0;
		int px = geom_deg_to_px(r, p->size_deg, &deg_actual);
		s->size_deg = p->size_deg;
		snprintf(s->geom_line, sizeof s->geom_line,
			 "%.2f px/deg; stimulus %.2f deg = %d px (%.3f deg)", geom_px_per_deg(r),
			 p->size_deg, px, deg_actual);
	}
	if (in.have_plan) {
		char dur[32];
		snprintf(s->plan_line, sizeof s->plan_line,
			 "%zu block%s, %zu trials, about %s; %zu categories; %zu images",
			 pl->nblocks, pl->nblocks == 1 ? "" : "s", pl->ntrials,
			 estimate_format(pl->est_seconds, dur, sizeof dur), p->nchoices, in.list.n);
		snprintf(s->epoch_line, sizeof s->epoch_line,
			 "frames: stimulus %d = %.1f ms, fixation %d = %.0f ms, mask %d = %.0f ms",
			 pl->epoch_frames[EPOCH_STIMULUS], pl->epoch_actual_ms[EPOCH_STIMULUS],
			 pl->epoch_frames[EPOCH_FIXATION], pl->epoch_actual_ms[EPOCH_FIXATION],
			 pl->epoch_frames[EPOCH_MASK], pl->epoch_actual_ms[EPOCH_MASK]);
	}
	s->usable = rc == 0;
	diag_sort(&s->diags);
	s->nerrors = (int)diag_count(&s->diags, DIAG_ERROR);
	s->nwarnings = (int)diag_count(&s->diags, DIAG_WARNING);
	s->scroll = 0;
	inputs_clear(&in);
}

static void draw_choice(struct console *c, int y, int x, bool focused, const char *text)
{
	int w = COLS - x - 2;
	char buf[200];
	snprintf(buf, sizeof buf, "%s %s %s", console_utf8(c) ? "\u25c2" : "<", text,
		 console_utf8(c) ? "\u25b8" : ">");
	console_put(c, y, x, w, focused ? CONSOLE_PICK : CONSOLE_PLAIN, buf);
}

static void setup_draw(struct console *c, void *st)
{
	struct setup *s = st;
	int y = console_body_top(), lx = 2, vx = 16, w = COLS - vx - 2;
	if (s->resume_id[0])
		console_putf(c, y, lx, COLS - 4, CONSOLE_HEAD, "Resume session %.8s", s->resume_id);
	else
		console_put(c, y, lx, COLS - 4, CONSOLE_HEAD, "New session");
	y += 2;
	for (int row = 0; row < ROW_COUNT; row++) {
		if (!row_shown(s, row))
			continue;
		bool focused = s->row == row;
		static const char *const labels[ROW_COUNT] = {"Protocol", "Subject ID", "Rig", "Seed",
							      "Display", "Observer", "Model"};
		console_put(c, y, 0, 2, CONSOLE_HEAD, focused ? (console_utf8(c) ? "\u25b8" : ">") : "");
		console_put(c, y, lx, vx - lx, focused ? CONSOLE_HEAD : CONSOLE_DIM, labels[row]);
		if (row == ROW_DISPLAY) {
			draw_choice(c, y, vx, focused, display_names[s->display]);
			y++;
			continue;
		}
		if (row == ROW_OBSERVER) {
			draw_choice(c, y, vx, focused,
				    s->model ? "model observer (simulated answers)"
					     : "keyboard (a person answers)");
			y++;
			continue;
		}
		struct console_field *f = &s->f[row];
		console_field_draw(c, f, y, vx, w, focused);
		if (row_locked(s, row))
			console_put(c, y, COLS - 10, 9, CONSOLE_DIM, "(stored)");
		if (!f->msg[0]) {
			const char *hint = NULL;
			char buf[260];
			if (row == ROW_PROTOCOL && !row_locked(s, row) && s->nfound) {
				snprintf(buf, sizeof buf, "Left/Right: %zu protocol%s in %s", s->nfound,
					 s->nfound == 1 ? "" : "s",
					 console_options(c)->protocols_dir);
				hint = buf;
			} else if (row == ROW_RIG && s->rig_line[0]) {
				snprintf(buf, sizeof buf, "%s%s", s->rig_line,
					 s->stored_rig ? "" : "  (e edits)");
				hint = buf;
			} else if (row == ROW_SUBJECT) {
				hint = "letters and digits only; never a name or initials";
			} else if (row == ROW_MODEL) {
				hint = "shape, threshold, slope, lapse, rt (ms), seed";
			}
			if (hint)
				console_put(c, y + 1, vx, w, CONSOLE_DIM, hint);
		}
		y += 2;
	}
	y++;
	int bottom = LINES - 3;
	if (y > bottom)
		return;
	console_put(c, y, lx, vx - lx, CONSOLE_HEAD, "Check");
	if (!s->checked || !s->f[ROW_PROTOCOL].len) {
		console_put(c, y, vx, w, CONSOLE_DIM, "choose a protocol to check it");
		return;
	}
	if (s->usable) {
		char ready[260];
		snprintf(ready, sizeof ready, "ready: %s", s->plan_line);
		y += console_wrap(c, y, vx, w, 2, CONSOLE_OK, ready);
	} else {
		console_putf(c, y++, vx, w, CONSOLE_BAD, "%d problem%s to fix before a session can "
			     "start", s->nerrors, s->nerrors == 1 ? "" : "s");
	}
	if (s->nwarnings && y <= bottom)
		console_putf(c, y++, vx, w, CONSOLE_WARN, "%d warning%s: p lists %s", s->nwarnings,
			     s->nwarnings == 1 ? "" : "s", s->nwarnings == 1 ? "it" : "them");
	if (s->geom_line[0] && y <= bottom)
		console_put(c, y++, vx, w, CONSOLE_PLAIN, s->geom_line);
	if (s->usable && y <= bottom)
		y += console_wrap(c, y, vx, w, bottom - y + 1, CONSOLE_DIM, s->epoch_line);
	char line[1024];
	int shown = 0;
	/* Each problem wraps (never cut); one that no longer fits, with a row kept for the notice
	 * when more follow, is left to p. */
	for (size_t i = (size_t)s->scroll; i < s->diags.n && y <= bottom; i++, shown++) {
		diag_format(&s->diags.v[i], line, sizeof line);
		int need = console_wrap_count(w, 4, line);
		int room = bottom - y + 1 - (i + 1 < s->diags.n ? 1 : 0);
		if (need > room) {
			console_putf(c, y, vx, w, CONSOLE_DIM, "... %zu more: press p to see all",
				     s->diags.n - i);
			break;
		}
		y += console_wrap_from(c, y, vx, w, 4, 0, need,
				       s->diags.v[i].level == DIAG_ERROR ? CONSOLE_BAD : CONSOLE_WARN,
				       line);
	}
}

static void move_row(struct setup *s, int dir)
{
	int r = s->row;
	do {
		r = (r + dir + ROW_COUNT) % ROW_COUNT;
	} while (!row_shown(s, r));
	s->row = r;
}

static void pick_protocol(struct setup *s, int dir)
{
	if (!s->nfound)
		return;
	size_t at = 0;
	bool have = false;
	for (size_t i = 0; i < s->nfound; i++)
		if (!strcmp(s->found[i], s->f[ROW_PROTOCOL].text)) {
			at = i;
			have = true;
		}
	if (!have)
		at = dir > 0 ? 0 : s->nfound - 1;
	else
		at = (at + s->nfound + (size_t)(dir > 0 ? 1 : -1)) % s->nfound;
	console_field_set(&s->f[ROW_PROTOCOL], s->found[at]);
	run_check(s);
}

/* Fills O from the form; strings point into S. */
static void make_options(struct console *c, struct setup *s, struct run_options *o)
{
	memset(o, 0, sizeof *o);
	o->protocol_path = s->f[ROW_PROTOCOL].text;
	o->subject = s->f[ROW_SUBJECT].text;
	o->db_path = console_options(c)->db_path;
	o->rig_path = s->stored_rig ? NULL : s->f[ROW_RIG].text;
	o->observer = s->model ? s->f[ROW_MODEL].text : "keyboard";
	o->headless = s->display == CONSOLE_HEADLESS_PACED || s->display == CONSOLE_HEADLESS_FAST;
	o->pace = s->display == CONSOLE_HEADLESS_PACED;
	o->clock_hz = o->headless ? console_options(c)->clock_hz : 0;
	o->window = s->display == CONSOLE_WINDOW;
	o->has_seed = true;
	o->seed = strtoull(s->f[ROW_SEED].text, NULL, 10);
	o->resume_id = s->resume_id[0] ? s->resume_id : NULL;
}

/* Checks every field; focuses the first bad one. Returns true when the form can go. */
static bool form_ready(struct console *c, struct setup *s)
{
	for (int row = 0; row < ROW_COUNT; row++) {
		if (!row_is_field(row) || !row_shown(s, row) || (row == ROW_RIG && s->stored_rig))
			continue;
		struct console_field *f = &s->f[row];
		if (console_field_check(f, f->text, f->msg, sizeof f->msg) != 0) {
			s->row = row;
			console_say(c, CONSOLE_BAD, "%s: %s", f->label, f->msg);
			return false;
		}
	}
	if (s->model) {
		struct observer_spec spec;
		struct console_field *f = &s->f[ROW_MODEL];
		if (observer_parse(f->text, &spec, f->msg, sizeof f->msg) != 0) {
			s->row = ROW_MODEL;
			console_say(c, CONSOLE_BAD, "model observer: %s", f->msg);
			return false;
		}
	}
	run_check(s);
	if (!s->usable) {
		console_say(c, CONSOLE_BAD, "the check found problems; fix them first (p lists all)");
		return false;
	}
	return true;
}

static void open_session(struct console *c, struct setup *s)
{
	if (!form_ready(c, s))
		return;
	if ((s->display == CONSOLE_FULLSCREEN || s->display == CONSOLE_WINDOW) && !have_display()) {
		s->row = ROW_DISPLAY;
		console_say(c, CONSOLE_BAD, "no display here to show stimuli on: choose a headless "
			    "display (Left/Right) for simulated timing");
		return;
	}
	struct console_pres *old = console_presenter(c);
	if (old && console_pres_alive(old)) {
		console_say(c, CONSOLE_WARN, "a session is still open; close it from its blocks screen");
		return;
	}
	struct run_options o;
	make_options(c, s, &o);
	char err[300];
	struct console_pres *p = console_pres_start(&o, err, sizeof err);
	if (!p) {
		console_say(c, CONSOLE_BAD, "%s", err);
		return;
	}
	console_set_presenter(c, p);
	s->opened = true;
	console_blocks_push(c);
}

static void show_problems(struct console *c, struct setup *s)
{
	if (!s->diags.n) {
		console_say(c, CONSOLE_OK, "no problems to show");
		return;
	}
	char **lines = xcalloc(s->diags.n, sizeof *lines);
	char buf[1024];
	for (size_t i = 0; i < s->diags.n; i++) {
		diag_format(&s->diags.v[i], buf, sizeof buf);
		lines[i] = xstrdup(buf);
	}
	console_text_push(c, "check problems", lines, s->diags.n);
}

static void rig_saved(struct console *c, void *ud, const char *path)
{
	(void)c;
	struct setup *s = ud;
	console_field_set(&s->f[ROW_RIG], path);
	run_check(s);
}

static bool setup_key(struct console *c, void *st, int ch)
{
	struct setup *s = st;
	struct console_screen *me = console_top(c);
	struct console_field *f = row_is_field(s->row) ? &s->f[s->row] : NULL;
	if (f && f->editing) {
		enum console_field_result r = console_field_key(f, ch);
		if (r != CONSOLE_FIELD_GOING) {
			me->editing = false;
			if (r == CONSOLE_FIELD_DONE && (s->row == ROW_PROTOCOL || s->row == ROW_RIG ||
							s->row == ROW_SEED))
				run_check(s);
			if (r == CONSOLE_FIELD_DONE && s->row == ROW_MODEL) {
				struct observer_spec spec;
				if (observer_parse(f->text, &spec, f->msg, sizeof f->msg) != 0) {
					console_field_begin(f);
					observer_parse(f->text, &spec, f->msg, sizeof f->msg);
					me->editing = true;
				}
			}
		}
		return true;
	}
	switch (ch) {
	case KEY_UP:
	case KEY_BTAB:
		move_row(s, -1);
		return true;
	case KEY_DOWN:
	case '\t':
		move_row(s, 1);
		return true;
	case KEY_LEFT:
	case KEY_RIGHT: {
		int dir = ch == KEY_RIGHT ? 1 : -1;
		if (s->row == ROW_DISPLAY)
			s->display = (enum console_display)((s->display + CONSOLE_DISPLAY_COUNT + dir) %
							    CONSOLE_DISPLAY_COUNT);
		else if (s->row == ROW_OBSERVER)
			s->model = !s->model;
		else if (s->row == ROW_PROTOCOL && !row_locked(s, s->row))
			pick_protocol(s, dir);
		return true;
	}
	case '\n':
	case '\r':
	case KEY_ENTER:
		if (s->row == ROW_DISPLAY || s->row == ROW_OBSERVER)
			return setup_key(c, st, KEY_RIGHT);
		if (row_locked(s, s->row)) {
			console_say(c, CONSOLE_WARN, "a resumed session keeps its stored %s",
				    s->f[s->row].label);
			return true;
		}
		console_field_begin(f);
		me->editing = true;
		return true;
	case 'g':
	case 'G':
		open_session(c, s);
		return true;
	case 'p':
	case 'P':
		show_problems(c, s);
		return true;
	case 'c':
		run_check(s);
		return true;
	case 'e':
	case 'E':
		if (s->stored_rig) {
			console_say(c, CONSOLE_WARN, "a resumed session keeps the rig stored with it");
			return true;
		}
		console_rig_push(c, s->f[ROW_RIG].text, s->size_deg, rig_saved, s);
		return true;
	case 'l':
	case 'L':
		if (s->stored_rig) {
			console_say(c, CONSOLE_WARN, "a resumed session keeps the rig stored with it");
			return true;
		}
		console_calibrate_push(c, s->f[ROW_RIG].text, s->display >= CONSOLE_HEADLESS_PACED,
				       rig_saved, s);
		return true;
	default:
		return false;
	}
}

/* Keeps the form of a new session for the next visit (console_draft). */
static void keep_draft(struct setup *s)
{
	struct console_draft *d = s->draft;
	if (!d)
		return;
	d->set = true;
	snprintf(d->protocol, sizeof d->protocol, "%s", s->f[ROW_PROTOCOL].text);
	snprintf(d->subject, sizeof d->subject, "%s", s->opened ? "" : s->f[ROW_SUBJECT].text);
	snprintf(d->rig, sizeof d->rig, "%s", s->f[ROW_RIG].text);
	snprintf(d->seed, sizeof d->seed, "%s", s->opened ? "" : s->f[ROW_SEED].text);
	snprintf(d->model, sizeof d->model, "%s", s->f[ROW_MODEL].text);
	d->display = (int)s->display;
	d->model_on = s->model;
}

static void setup_destroy(void *st)
{
	struct setup *s = st;
	keep_draft(s);
	free(s->stored_rig);
	for (size_t i = 0; i < s->nfound; i++)
		free(s->found[i]);
	free(s->found);
	diag_clear(&s->diags);
	free(s);
}

void console_setup_push(struct console *c, const char *resume_id)
{
	const struct console_options *o = console_options(c);
	struct setup *s = xcalloc(1, sizeof *s);
	diag_init(&s->diags);
	find_protocols(s, o->protocols_dir);
	char seed[32];
	snprintf(seed, sizeof seed, "%llu", fresh_seed());
	console_field_init(&s->f[ROW_PROTOCOL], "protocol", CONSOLE_FILE, 400,
			   s->nfound ? s->found[0] : "");
	console_field_init(&s->f[ROW_SUBJECT], "subject ID", CONSOLE_ID, 64, "");
	console_field_init(&s->f[ROW_RIG], "rig", CONSOLE_FILE, 400, o->rig_path ? o->rig_path : "");
	console_field_init(&s->f[ROW_SEED], "seed", CONSOLE_INTEGER, 19, seed);
	s->f[ROW_SEED].min = 0;
	s->f[ROW_SEED].max = 1e19;
	console_field_init(&s->f[ROW_MODEL], "model observer", CONSOLE_TEXT, 200,
			   "model:shape=weibull,threshold=18,slope=-3,lapse=0.02,rt=550,seed=7");
	s->display = have_display() ? CONSOLE_FULLSCREEN : CONSOLE_HEADLESS_PACED;
	s->model = !have_display();
	s->row = ROW_SUBJECT;
	const struct console_draft *dr = console_draft(c);
	if (!resume_id) {
		s->draft = console_draft(c);
		if (dr->set) {
			console_field_set(&s->f[ROW_PROTOCOL], dr->protocol);
			console_field_set(&s->f[ROW_SUBJECT], dr->subject);
			console_field_set(&s->f[ROW_RIG], dr->rig);
			if (dr->seed[0])
				console_field_set(&s->f[ROW_SEED], dr->seed);
			console_field_set(&s->f[ROW_MODEL], dr->model);
			if (dr->display >= 0 && dr->display < CONSOLE_DISPLAY_COUNT)
				s->display = (enum console_display)dr->display;
			s->model = dr->model_on;
		}
	}
	if (resume_id) {
		struct store *db = NULL;
		char *err = NULL;
		struct store_session ss;
		memset(&ss, 0, sizeof ss);
		if (store_open(o->db_path, &db, &err) == 0 &&
		    store_session_get(db, resume_id, &ss, &err) == 0) {
			snprintf(s->resume_id, sizeof s->resume_id, "%s", ss.id);
			console_field_set(&s->f[ROW_PROTOCOL], ss.protocol_path ? ss.protocol_path : "");
			console_field_set(&s->f[ROW_SUBJECT], ss.subject ? ss.subject : "");
			snprintf(seed, sizeof seed, "%llu", (unsigned long long)ss.seed);
			console_field_set(&s->f[ROW_SEED], seed);
			if (ss.observer && !strncmp(ss.observer, "model", 5)) {
				s->model = true;
				console_field_set(&s->f[ROW_MODEL], ss.observer);
			} else {
				s->model = false;
			}
			if (ss.rig_text) {
				s->stored_rig = xstrdup(ss.rig_text);
				char label[80];
				snprintf(label, sizeof label, "(stored with session %.8s)", ss.id);
				console_field_set(&s->f[ROW_RIG], label);
			}
			s->row = ROW_DISPLAY;
		} else {
			console_say(c, CONSOLE_BAD, "cannot read session %s: %s", resume_id,
				    err ? err : "unknown error");
		}
		store_session_clear(&ss);
		store_close(db);
		free(err);
	}
	if (s->f[ROW_PROTOCOL].len)
		run_check(s);
	struct console_screen scr = {
		.title = resume_id ? "resume a session" : "set up a session",
		.keys = setup_keys,
		.nkeys = sizeof setup_keys / sizeof setup_keys[0],
		.draw = setup_draw,
		.key = setup_key,
		.destroy = setup_destroy,
		.st = s,
	};
	console_push(c, &scr);
}
