/* run — a session from start to end (see run.h for the stepwise interface and its contract).
 *
 * A run_session owns the loaded inputs (protocol, rig, stimulus list, plan), the store and the
 * session row, and the presenter's parts (display, display clock, responder, trial loop, preload
 * queue). It keeps one flag per planned trial (stored or not), which is what a resume fills from
 * the database and what run_block walks. Trials are stored through the trial sink (run_sink) in
 * the inter-trial interval, before the next trial's first flip; after that come the progress
 * callback and the texture work of the look-ahead queue, and then the rest of the ITI is flipped.
 *
 * Adaptive procedures plug in at two marked places: run_adaptive_pick (before a trial whose
 * plan_trial.staircase >= 0) and run_adaptive_update (after it is stored). */
#include "run.h"

#include <errno.h>
#include <fcntl.h>
#include <math.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include <gsl/gsl_sort.h>
#include <gsl/gsl_statistics_double.h>

#include "adapt.h"
#include "dclock.h"
#include "display.h"
#include "estimate.h"
#include "frames.h"
#include "geom.h"
#include "image.h"
#include "observer.h"
#include "plan.h"
#include "preload.h"
#include "protocol.h"
#include "responder.h"
#include "rig.h"
#include "sha256.h"
#include "stimlist.h"
#include "store.h"
#include "trialloop.h"
#include "version.h"

#define LOOKAHEAD 8
#define MEASURE_FLIPS 120

/* The process-wide stop flag, set by our SIGINT/SIGTERM handlers or run_request_stop. */
static volatile sig_atomic_t run_stop_flag;

void run_request_stop(void) { run_stop_flag = 1; }
bool run_stop_requested(void) { return run_stop_flag != 0; }

static void on_signal(int sig)
{
	(void)sig;
	run_stop_flag = 1;
}

struct run_session {
	struct protocol proto;
	struct rig rig;
	struct stimlist list;
	struct plan plan;
	bool have_proto, have_rig, have_list, have_plan;
	struct store *store;
	struct store_session ss;
	char observer_text[160];
	bool keyboard, paced;

	struct display *disp;
	struct dclock *clock;
	struct responder *resp;
	struct trialloop *tl;
	struct preload *pre;
	struct SDL_Texture *mask;

	bool *stored;            /* per planned trial */
	/* Resume: timing-fault repeats the interrupted run owed (a stored fault in a block that
	 * repeats faults, with no stored repeat); shown at their block's end, dropped once stored. */
	struct pending_repeat {
		size_t block, plan_index;
		int repeat_of;
	} *pend;
	size_t npend;
	int *next_bt;            /* per block: next free block_trial number for repeats */
	int *runs;               /* per block */
	bool *skipped;           /* per block: skipped by the experimenter or the observer */
	int next_trial;          /* session trial number of the next trial shown */
	uint64_t serial;         /* preload ids */
	double refresh_hz;
	struct run_refresh refresh;
	bool failed, ended, interrupted;
	bool live;               /* the session row is ours to end (run_open succeeded) */
	const char *screenshot_dir;
	bool shots_done;
	int shot_epoch_seen[EPOCH_COUNT];
	struct sigaction old_int, old_term;
	bool handlers;

	/* Adaptive blocks: the rule's state per plan block, built on the block's first pick (from
	 * the stored trials on a resume); the pick of the current trial is kept until its update so
	 * a trial shown again after a pause asks the rule only once. */
	struct adapt_block **adapt;
	int *adapt_run;          /* per block: s->runs[] when its state was built */
	bool adapt_pending;
	size_t adapt_pending_index;
	int adapt_pending_stim;
	double adapt_pending_req;
};

/* ---- helpers ---- */

static uint64_t fresh_seed(void)
{
	uint64_t s = 0;
	int fd = open("/dev/urandom", O_RDONLY);
	if (fd >= 0) {
		if (read(fd, &s, sizeof s) != (ssize_t)sizeof s)
			s = 0;
		close(fd);
	}
	return s % 4294967296u;   /* GSL's mt19937 takes an unsigned long; keep seeds portable */
}

static int decode_image(const char *path, int *w, int *h, uint8_t **rgba, char *err, size_t errlen,
			void *ctx)
{
	(void)ctx;
	struct image img;
	struct image_info info;
	if (image_load(path, &img, &info, err, errlen))
		return -1;
	*w = img.width;
	*h = img.height;
	*rgba = img.rgba;
	return 0;
}

static double median_of(double *v, size_t n)
{
	if (!n)
		return NAN;
	gsl_sort(v, 1, n);
	return gsl_stats_median_from_sorted_data(v, 1, n);
}

const char *run_session_id(const struct run_session *s) { return s->ss.id; }
const char *run_timing_mode(const struct run_session *s) { return s->ss.timing_mode; }
uint64_t run_seed(const struct run_session *s) { return s->plan.seed; }
const struct protocol *run_protocol(const struct run_session *s) { return &s->proto; }
const struct plan *run_plan(const struct run_session *s) { return &s->plan; }
size_t run_block_count(const struct run_session *s) { return s->plan.nblocks; }

static const struct protocol_block *pblock(const struct run_session *s, size_t i)
{
	return &s->proto.blocks[s->plan.blocks[i].proto_block];
}

/* Debug hook: PNGs of the first frame of each epoch of the session's first trial. */
static void shot_hook(void *ctx, enum epoch e, int frame, bool stim)
{
	(void)stim;
	struct run_session *s = ctx;
	if (s->shots_done || frame != 0 || s->shot_epoch_seen[e])
		return;
	s->shot_epoch_seen[e] = 1;
	int w, h;
	uint8_t *px = display_read_pixels(s->disp, &w, &h);
	if (!px)
		return;
	struct image img = {w, h, px};
	char *path = xasprintf("%s/frame-%s.png", s->screenshot_dir, epoch_name(e));
	char err[256];
	image_save_png(path, &img, err, sizeof err);
	free(path);
	free(px);
}

/* ---- open ---- */

static int load_inputs(struct run_session *s, const struct run_options *o, const char *rig_text,
		       uint64_t seed, struct diag_list *d, char **err)
{
	if (protocol_load(o->protocol_path, &s->proto, d)) {
		*err = xasprintf("%s has problems; run `tachist check %s` for the list", o->protocol_path,
				 o->protocol_path);
		return -1;
	}
	s->have_proto = true;
	int rc = rig_text ? rig_parse(o->rig_path ? o->rig_path : "(stored rig)", rig_text, &s->rig, d)
			  : rig_load(o->rig_path, &s->rig, d);
	if (rc) {
		*err = xasprintf("the rig profile has problems");
		return -1;
	}
	s->have_rig = true;
	if (stimlist_load(s->proto.stimuli, &s->proto, &s->list, d)) {
		*err = xasprintf("the stimulus list %s has problems", s->proto.stimuli);
		return -1;
	}
	s->have_list = true;
	if (plan_build(&s->proto, &s->list, &s->rig, seed, &s->plan, d)) {
		*err = xasprintf("no trial plan can be built from %s", o->protocol_path);
		return -1;
	}
	s->have_plan = true;
	/* Every image the plan uses must be readable now; one that goes missing later stops the
	 * block when its turn comes. */
	size_t missing = 0;
	for (size_t i = 0; i < s->plan.ntrials; i++) {
		int k = s->plan.trials[i].stim;
		if (k < 0)
			continue;
		const struct stim *st = &s->list.items[k];
		if (access(st->path, R_OK) && missing++ < 20)
			diag_add(d, DIAG_ERROR, s->list.path, st->line, "image %s cannot be read (%s)",
				 st->image, strerror(errno));
	}
	if (missing) {
		*err = xasprintf("%zu planned image%s cannot be read", missing, missing == 1 ? "" : "s");
		return -1;
	}
	return 0;
}

static int open_presenter(struct run_session *s, const struct run_options *o, struct diag_list *d,
			  char **err)
{
	char e[512];
	struct display_opts dopt = {
		.headless = o->headless, .window = o->window, .vsync = true,
		.display_index = s->rig.display, .width_px = s->rig.width_px,
		.height_px = s->rig.height_px, .background = s->proto.background, .title = "tachist",
	};
	s->disp = display_open(&dopt, e, sizeof e);
	if (!s->disp) {
		*err = xstrdup(e);
		return -1;
	}
	const char *drv = display_driver(s->disp);
	if (!o->headless && (!strcmp(drv, "dummy") || !strcmp(drv, "offscreen"))) {
		*err = xasprintf("no display to show stimuli on (SDL chose its '%s' video driver); run "
				 "with --headless for simulated timing, or from a desktop session", drv);
		return -1;
	}
	int w, h, sw, sh;
	display_size(s->disp, &w, &h);
	display_screen_size(s->disp, &sw, &sh);
	int need = s->plan.stim_px;
	if (need > w || need > h || need > sw || need > sh) {
		*err = xasprintf("the stimulus needs %d×%d px but the display offers %d×%d px; use a "
				 "smaller size_deg or a larger display", need, need, w < sw ? w : sw,
				 h < sh ? h : sh);
		return -1;
	}
	if (!o->headless && (sw != s->rig.width_px || sh != s->rig.height_px))
		diag_add(d, DIAG_WARNING, s->rig.path, 0, "the display is %d×%d px but the rig says "
			 "%d×%d px: sizes in degrees are only right when the rig matches the display",
			 sw, sh, s->rig.width_px, s->rig.height_px);
	if (o->headless) {
		struct dclock_virtual_opts vo = {
			.hz = s->rig.refresh_hz, .drop_rate = o->inject_drops, .drop_frames = 1,
			.jitter_ms = o->inject_jitter_ms, .seed = s->plan.seed ^ 0x5eedc10cull,
			.pace = o->pace,
		};
		s->clock = dclock_virtual_new(display_renderer(s->disp), &vo);
		if (!s->clock) {
			*err = xasprintf("--inject-drops must be between 0 and 1");
			return -1;
		}
	} else {
		if (!display_has_vsync(s->disp))
			diag_add(d, DIAG_WARNING, NULL, 0, "the renderer has no vsync (driver %s): frame "
				 "times are not locked to the display", display_driver(s->disp));
		s->clock = dclock_vsync_new(display_renderer(s->disp), s->rig.refresh_hz);
	}
	if (!o->observer || !strcmp(o->observer, "keyboard")) {
		const char *keys[PROTOCOL_MAX_CHOICES];
		for (size_t i = 0; i < s->proto.nchoices; i++)
			keys[i] = s->proto.choices[i].key;
		s->resp = responder_keyboard_new(keys, (int)s->proto.nchoices);
		s->keyboard = true;
		snprintf(s->observer_text, sizeof s->observer_text, "keyboard");
	} else {
		struct observer_spec spec;
		if (strncmp(o->observer, "model", 5) ||
		    observer_parse(o->observer, &spec, e, sizeof e)) {
			*err = strncmp(o->observer, "model", 5)
				       ? xasprintf("--observer must be 'keyboard' or 'model:KEY=VALUE,...'")
				       : xstrdup(e);
			return -1;
		}
		s->resp = responder_model_new(&spec);
		observer_format(&spec, s->observer_text, sizeof s->observer_text);
	}
	s->paced = s->keyboard && !o->no_observer_screens;
	if (s->proto.mask == MASK_NOISE) {
		s->mask = display_texture_noise(s->disp, s->plan.stim_px, s->plan.stim_px,
						s->plan.stim_px / 32 + 1, s->plan.seed, e, sizeof e);
	} else if (s->proto.mask == MASK_IMAGE && s->proto.mask_image) {
		struct image img;
		struct image_info info;
		if (image_load(s->proto.mask_image, &img, &info, e, sizeof e) == 0) {
			s->mask = display_texture_rgba(s->disp, img.width, img.height, img.rgba,
						       s->proto.scaling == SCALING_NEAREST, e, sizeof e);
			image_free(&img);
		}
	}
	if (s->proto.mask != MASK_NONE && !s->mask) {
		*err = xasprintf("the mask cannot be made: %s", e);
		return -1;
	}
	struct trialloop_config tc = {
		.disp = s->disp, .clock = s->clock, .resp = s->resp,
		.period_ns = s->clock->period_ns, .stim_px = s->plan.stim_px,
		.fixation_px = s->proto.fixation_deg > 0 ? geom_deg_to_px(&s->rig, s->proto.fixation_deg, NULL) : 0,
		.marker_corner = (int)s->rig.marker_corner, .marker_px = s->rig.marker_px,
		.nchoices = (int)s->proto.nchoices, .mask = s->mask, .stop = &run_stop_flag,
	};
	memcpy(tc.epoch_frames, s->plan.epoch_frames, sizeof tc.epoch_frames);
	if (tc.fixation_px < 0)
		tc.fixation_px = 0;
	if (s->screenshot_dir) {
		tc.on_frame = shot_hook;
		tc.frame_ctx = s;
	}
	s->tl = trialloop_new(&tc);
	s->pre = preload_new(s->disp, LOOKAHEAD, s->proto.scaling == SCALING_NEAREST, decode_image, NULL);
	if (!s->pre) {
		*err = xasprintf("cannot start the image preloader");
		return -1;
	}
	return 0;
}

static int adaptive_mark_finished(struct run_session *s, char **err);

static int cmp_int(const void *a, const void *b)
{
	int x = *(const int *)a, y = *(const int *)b;
	return (x > y) - (x < y);
}

/* Marks planned trials already stored for a resumed session, and finds the repeats it owes. */
static int mark_stored(struct run_session *s, char **err)
{
	struct store_trial *rows = NULL;
	size_t n = 0;
	if (store_trials_load(s->store, s->ss.id, &rows, &n, err))
		return -1;
	for (size_t i = 0; i < n; i++) {
		const struct store_trial *t = &rows[i];
		if (t->trial >= s->next_trial)
			s->next_trial = t->trial + 1;
		if (t->block < 0 || (size_t)t->block >= s->plan.nblocks)
			continue;
		const struct plan_block *b = &s->plan.blocks[t->block];
		if (t->block_trial + 1 > s->next_bt[t->block])
			s->next_bt[t->block] = t->block_trial + 1;
		if (t->repeat_of < 0 && t->block_trial >= 0 && (size_t)t->block_trial < b->ntrials)
			s->stored[b->first + (size_t)t->block_trial] = true;
		/* The model observer answers the stored trials again (discarding the answers) so
		 * its seeded generator stands where the interrupted run left it: the resumed
		 * session then gets the answers an uninterrupted one would have got. */
		if (s->resp && s->resp->is_model) {
			struct responder_trial rt = {(int)s->proto.nchoices, t->choice, t->has_level,
						     t->level};
			responder_begin(s->resp, &rt);
		}
	}
	/* Faults still owed a repeat, in trial order (the order an uninterrupted run queues them). */
	int *done = xmalloc((n + 1) * sizeof *done);
	size_t ndone = 0;
	for (size_t i = 0; i < n; i++)
		if (rows[i].repeat_of >= 0)
			done[ndone++] = rows[i].repeat_of;
	qsort(done, ndone, sizeof *done, cmp_int);
	s->pend = xmalloc((n + 1) * sizeof *s->pend);
	for (size_t i = 0; i < n; i++) {
		const struct store_trial *t = &rows[i];
		if (t->repeat_of >= 0 || t->timing_ok || t->block < 0 ||
		    (size_t)t->block >= s->plan.nblocks)
			continue;
		const struct plan_block *b = &s->plan.blocks[t->block];
		const struct protocol_block *prb = pblock(s, (size_t)t->block);
		if (!prb->repeat_faults || prb->adaptive || t->block_trial < 0 ||
		    (size_t)t->block_trial >= b->ntrials ||
		    bsearch(&t->trial, done, ndone, sizeof *done, cmp_int))
			continue;
		s->pend[s->npend++] = (struct pending_repeat){(size_t)t->block,
							       b->first + (size_t)t->block_trial,
							       t->trial};
	}
	free(done);
	store_trials_free(rows, n);
	return 0;
}

/* Repeats still owed in block B. */
static size_t pending_in(const struct run_session *s, size_t b)
{
	size_t k = 0;
	for (size_t i = 0; i < s->npend; i++)
		k += s->pend[i].block == b;
	return k;
}

/* Drops the owed repeat of session trial TRIAL (it has been stored). */
static void pending_done(struct run_session *s, int trial)
{
	for (size_t i = 0; i < s->npend; i++)
		if (s->pend[i].repeat_of == trial) {
			memmove(&s->pend[i], &s->pend[i + 1], (s->npend - i - 1) * sizeof *s->pend);
			s->npend--;
			return;
		}
}

struct run_session *run_open(const struct run_options *o, struct diag_list *d, char **err)
{
	*err = NULL;
	struct run_session *s = xcalloc(1, sizeof *s);
	s->screenshot_dir = o->screenshot_dir;
	if (!o->protocol_path || (!o->resume_id && (!o->subject || !store_subject_valid(o->subject)))) {
		*err = xasprintf("the subject ID must be 1 to 64 letters and digits");
		goto fail;
	}
	if (store_open(o->db_path ? o->db_path : "tachist.db", &s->store, err))
		goto fail;
	int nrec = 0;
	char *rerr = NULL;
	if (store_recover(s->store, &nrec, &rerr))
		free(rerr);   /* a read-only database fails later, at the session's first write */
	if (o->resume_id) {
		if (store_session_get(s->store, o->resume_id, &s->ss, err))
			goto fail;
		if (s->ss.status == STORE_COMPLETE) {
			*err = xasprintf("session %s is already complete", s->ss.id);
			goto fail;
		}
		if (s->ss.status == STORE_RUNNING) {
			/* Recovery left it running: its process is alive here or it runs elsewhere. */
			*err = xasprintf("session %.8s is still running in another process (here or on "
					 "another host); resume it once that run has ended", s->ss.id);
			goto fail;
		}
		if (load_inputs(s, o, s->ss.rig_text, s->ss.seed, d, err))
			goto fail;
		char hex[65];
		sha256_hex(s->proto.text, strlen(s->proto.text), hex);
		if (strcmp(hex, s->ss.protocol_sha256)) {
			*err = xasprintf("the protocol %s changed since session %.8s began; resume refused",
					 o->protocol_path, s->ss.id);
			goto fail;
		}
		if (strcmp(s->list.sha256, s->ss.stimuli_sha256)) {
			*err = xasprintf("the stimulus list %s changed since session %.8s began; resume "
					 "refused", s->list.path, s->ss.id);
			goto fail;
		}
	} else {
		uint64_t seed = o->has_seed ? o->seed : fresh_seed();
		if (!o->rig_path) {
			*err = xasprintf("no rig profile");
			goto fail;
		}
		if (load_inputs(s, o, NULL, seed, d, err))
			goto fail;
	}
	s->stored = xcalloc(s->plan.ntrials + 1, sizeof *s->stored);
	s->next_bt = xcalloc(s->plan.nblocks + 1, sizeof *s->next_bt);
	s->runs = xcalloc(s->plan.nblocks + 1, sizeof *s->runs);
	s->skipped = xcalloc(s->plan.nblocks + 1, sizeof *s->skipped);
	for (size_t b = 0; b < s->plan.nblocks; b++)
		s->next_bt[b] = (int)s->plan.blocks[b].ntrials;
	if (open_presenter(s, o, d, err))
		goto fail;
	const char *mode = o->headless ? "simulated" : "vsync";
	if (o->resume_id) {
		if (mark_stored(s, err) || adaptive_mark_finished(s, err))
			goto fail;
		if (strcmp(s->ss.timing_mode ? s->ss.timing_mode : "", mode))
			diag_add(d, DIAG_WARNING, NULL, 0, "session %.8s began with timing mode %s and "
				 "goes on with %s", s->ss.id, s->ss.timing_mode, mode);
		char *detail = xasprintf("resumed by tachist %s, %s", TACHIST_VERSION, s->observer_text);
		if (store_event(s->store, s->ss.id, "resume", detail, err)) {
			free(detail);
			goto fail;
		}
		free(detail);
		/* From here the session is running again, owned by this process. */
		char *was = xasprintf("running again (was %s), pid %ld",
				      store_status_name(s->ss.status), (long)getpid());
		int rc = store_session_own(s->store, s->ss.id, (long)getpid(), NULL, err);
		if (!rc)
			rc = store_event(s->store, s->ss.id, "status", was, err);
		free(was);
		if (rc)
			goto fail;
		s->ss.status = STORE_RUNNING;
	} else {
		store_session_describe(&s->ss, &s->proto, &s->list, &s->rig);
		free(s->ss.subject);
		s->ss.subject = xstrdup(o->subject);
		sha256_hex(s->proto.text, strlen(s->proto.text), s->ss.protocol_sha256);
		s->ss.seed = s->plan.seed;
		free(s->ss.timing_mode);
		s->ss.timing_mode = xstrdup(mode);
		free(s->ss.observer);
		s->ss.observer = xstrdup(s->observer_text);
		if (store_session_begin(s->store, &s->ss, err))
			goto fail;
	}
	if (!o->no_signal_handlers) {
		struct sigaction sa;
		memset(&sa, 0, sizeof sa);
		sa.sa_handler = on_signal;
		sigemptyset(&sa.sa_mask);
		sigaction(SIGINT, &sa, &s->old_int);
		sigaction(SIGTERM, &sa, &s->old_term);
		s->handlers = true;
	}
	run_stop_flag = 0;
	s->live = true;
	return s;
fail:
	{
		char *ignored = NULL;
		s->ended = true;
		if (s->ss.id[0] && !o->resume_id && !s->failed)
			store_session_end(s->store, s->ss.id, STORE_ABORTED, &ignored);
		free(ignored);
		run_close(s, &ignored);
		free(ignored);
	}
	return NULL;
}

/* ---- refresh ---- */

int run_measure_refresh(struct run_session *s, struct run_refresh *out, char **err)
{
	int64_t flips[MEASURE_FLIPS];
	if (trialloop_measure(s->tl, flips, MEASURE_FLIPS)) {
		*err = xasprintf("the refresh measurement was interrupted");
		return -1;
	}
	struct frames_measure m;
	if (frames_measure(flips, MEASURE_FLIPS, s->rig.refresh_hz, &m)) {
		*err = xasprintf("too few flips to measure the refresh");
		return -1;
	}
	struct run_refresh r = {
		.median_ms = m.median_ms, .mad_ms = m.mad_ms, .min_ms = m.min_ms, .max_ms = m.max_ms,
		.rate_hz = m.rate_hz, .nominal_hz = s->rig.refresh_hz, .nflips = MEASURE_FLIPS,
		.dropped = m.dropped,
	};
	r.off_percent = (r.rate_hz - r.nominal_hz) / r.nominal_hz * 100.0;
	if (!s->clock->simulated && m.median_ms < 1.0) {
		/* No display refreshes every millisecond: present returned without waiting. */
		*err = xasprintf("presenting does not wait for the display's refresh (frames %.3f ms apart, "
				 "the rig says %.3f Hz), so frame timing would mean nothing; check the "
				 "driver's vsync setting with `tachist timing`, or use --headless",
				 m.median_ms, r.nominal_hz);
		return -1;
	}
	r.mismatch = fabs(r.off_percent) > 1.0;
	s->refresh = r;
	s->refresh_hz = r.rate_hz;
	/* Frame counts and drops use the measured period when it is plausible (within 10% of the
	 * nominal rate); a wildly different figure means present does not block, and the nominal
	 * period is kept. */
	if (fabs(r.off_percent) < 10 && m.median_ms > 0)
		trialloop_set_period(s->tl, (int64_t)llround(m.median_ms * 1e6));
	if (out)
		*out = r;
	if (store_session_refresh(s->store, s->ss.id, r.rate_hz, err))
		return -1;
	if (r.mismatch) {
		char *detail = xasprintf("measured %.3f Hz, rig says %.3f Hz (%+.2f%%)", r.rate_hz,
					 r.nominal_hz, r.off_percent);
		int rc = store_event(s->store, s->ss.id, "refresh_mismatch", detail, err);
		free(detail);
		if (rc)
			return -1;
	}
	return 0;
}

/* ---- blocks ---- */

int run_block_info(const struct run_session *s, size_t i, struct run_block_info *out)
{
	if (i >= s->plan.nblocks)
		return -1;
	const struct plan_block *b = &s->plan.blocks[i];
	const struct protocol_block *pb = pblock(s, i);
	memset(out, 0, sizeof *out);
	out->name = pb->name;
	out->proto_block = b->proto_block;
	out->ntrials = b->ntrials;
	for (size_t k = 0; k < b->ntrials; k++)
		out->stored += s->stored[b->first + k];
	out->practice = pb->practice;
	out->adaptive = pb->adaptive != NULL;
	out->trial_seconds = b->trial_seconds;
	out->est_seconds = b->est_seconds;
	out->runs = s->runs[i];
	return 0;
}

size_t run_next_block(const struct run_session *s)
{
	for (size_t b = 0; b < s->plan.nblocks; b++) {
		const struct plan_block *pb = &s->plan.blocks[b];
		if (s->skipped[b])
			continue;
		if (pending_in(s, b))
			return b;
		for (size_t k = 0; k < pb->ntrials; k++)
			if (!s->stored[pb->first + k])
				return b;
	}
	return s->plan.nblocks;
}

int run_block_skip(struct run_session *s, size_t i, char **err)
{
	if (i >= s->plan.nblocks) {
		*err = xasprintf("no block %zu", i + 1);
		return -1;
	}
	s->runs[i]++;
	s->skipped[i] = true;
	return store_event(s->store, s->ss.id, "skip", pblock(s, i)->name, err);
}

/* What a block run keeps while it goes. */
struct blockrun {
	struct run_session *s;
	size_t block;
	run_progress_fn progress;
	void *ctx;
	struct run_block_summary sum;
	double *rts;
	size_t nrts;
	struct run_trial_brief last[RUN_LAST_TRIALS];
	size_t nlast;
	size_t total;            /* trials this run will show (grows with repeats) */
	int64_t t0;
	enum run_state state;
	bool paused_by_observer;
	enum run_cmd last_cmd;
};

static void fill_snapshot(struct blockrun *br, struct run_snapshot *sn)
{
	struct run_session *s = br->s;
	memset(sn, 0, sizeof *sn);
	sn->state = br->state;
	sn->paused_by_observer = br->paused_by_observer;
	sn->block = (int)br->block;
	sn->block_name = pblock(s, br->block)->name;
	sn->practice = pblock(s, br->block)->practice;
	sn->trial_n = br->sum.trials;
	sn->trial_total = br->total;
	for (size_t k = 0; k < s->plan.ntrials; k++)
		sn->session_done += s->stored[k];
	sn->session_total = s->plan.ntrials;
	sn->elapsed_s = (double)(dclock_monotonic_ns() - br->t0) / 1e9;
	double per = estimate_per_trial(s->plan.blocks[br->block].trial_seconds, sn->elapsed_s,
					br->sum.trials);
	sn->remaining_s = per * (double)(br->total - br->sum.trials);
	sn->answered = br->sum.answered;
	sn->correct = br->sum.correct;
	sn->accuracy = br->sum.answered ? (double)br->sum.correct / (double)br->sum.answered : NAN;
	double tmp[4096];
	size_t n = br->nrts < 4096 ? br->nrts : 4096;
	memcpy(tmp, br->rts + (br->nrts - n), n * sizeof *tmp);
	sn->median_rt_ms = median_of(tmp, n);
	sn->refresh_hz = s->refresh_hz;
	sn->refresh_nominal_hz = s->rig.refresh_hz;
	sn->dropped_frames = br->sum.dropped_frames;
	sn->flagged_trials = br->sum.faults;
	memcpy(sn->last, br->last, sizeof sn->last);
	sn->nlast = br->nlast;
	sn->timing_mode = s->ss.timing_mode;
	sn->session_id = s->ss.id;
}

static enum run_cmd call_progress(struct blockrun *br, enum run_state st)
{
	if (!br->progress)
		return RUN_CMD_CONTINUE;
	br->state = st;
	struct run_snapshot sn;
	fill_snapshot(br, &sn);
	br->last_cmd = br->progress(&sn, br->ctx);
	return br->last_cmd;
}

static int tick_break(void *ctx)
{
	struct blockrun *br = ctx;
	return call_progress(br, RUN_STATE_BREAK) == RUN_CMD_END;
}

static int tick_observer_pause(void *ctx)
{
	struct blockrun *br = ctx;
	return call_progress(br, RUN_STATE_PAUSED) == RUN_CMD_END;
}

static int tick_console_pause(void *ctx)
{
	struct blockrun *br = ctx;
	return call_progress(br, RUN_STATE_PAUSED) != RUN_CMD_PAUSE;
}

enum flow { FLOW_ON, FLOW_SKIP, FLOW_END, FLOW_STOP };

static enum flow event(struct run_session *s, const char *kind, const char *detail, char **err)
{
	if (store_event(s->store, s->ss.id, kind, detail, err)) {
		s->failed = true;
		return FLOW_END;
	}
	return FLOW_ON;
}

/* The observer pressed Escape: the pause menu. */
static enum flow observer_pause(struct blockrun *br, char **err)
{
	struct run_session *s = br->s;
	if (event(s, "pause", "observer", err) != FLOW_ON)
		return FLOW_END;
	static const char *const lines[] = {"Paused", "", "R  go on", "S  skip the rest of this block",
					    "Q  end the session (answers so far are kept)"};
	static const char *const keys[] = {"r", "s", "q"};
	br->paused_by_observer = true;
	int k = trialloop_screen(s->tl, lines, 5, keys, 3, false, tick_observer_pause, br, 0);
	br->paused_by_observer = false;
	switch (k) {
	case 0: return event(s, "resume", "observer", err);
	case 1: return event(s, "skip", pblock(s, br->block)->name, err) == FLOW_ON ? FLOW_SKIP : FLOW_END;
	case 2: event(s, "end", "observer", err); return FLOW_END;
	case -1: event(s, "end", "experimenter", err); return FLOW_END;
	default: return FLOW_STOP;
	}
}

/* The console asked for a pause. */
static enum flow console_pause(struct blockrun *br, char **err)
{
	struct run_session *s = br->s;
	if (event(s, "pause", "experimenter", err) != FLOW_ON)
		return FLOW_END;
	static const char *const lines[] = {"Paused", "", "Please wait for the experimenter"};
	int k = trialloop_screen(s->tl, lines, 3, NULL, 0, false, tick_console_pause, br, 0);
	if (k == -1 && br->last_cmd == RUN_CMD_CONTINUE)
		return event(s, "resume", "experimenter", err);
	if (k == -1) {
		event(s, "end", "experimenter", err);
		return FLOW_END;
	}
	return FLOW_STOP;
}

/* A rest or start screen. The keyboard observer goes on with space; the model goes on at once. */
static enum flow break_screen(struct blockrun *br, const char *title, char **err)
{
	struct run_session *s = br->s;
	if (!s->paced) {
		return call_progress(br, RUN_STATE_BREAK) == RUN_CMD_END
			       ? (event(s, "end", "experimenter", err), FLOW_END) : FLOW_ON;
	}
	const char *lines[] = {title, "", "Press SPACE to go on"};
	static const char *const keys[] = {"space"};
	int k = trialloop_screen(s->tl, lines, 3, keys, 1, true, tick_break, br, 0);
	if (k == 0)
		return FLOW_ON;
	if (k == -3)
		return observer_pause(br, err);
	if (k == -1) {
		event(s, "end", "experimenter", err);
		return FLOW_END;
	}
	return FLOW_STOP;
}

/* The adaptive state of plan block BI, built on first use: the staircases of its [adaptive]
 * section over the rows it selects, then (first run of the block) the session's stored trials of
 * the block replayed through them in plan order, so a resumed session continues every staircase
 * where it was. A block run again (every planned trial stored) starts fresh staircases. Returns
 * NULL with *ERR. */
static struct adapt_block *adaptive_state(struct run_session *s, size_t bi, bool again, char **err)
{
	if (!s->adapt) {
		s->adapt = xcalloc(s->plan.nblocks + 1, sizeof *s->adapt);
		s->adapt_run = xcalloc(s->plan.nblocks + 1, sizeof *s->adapt_run);
	}
	if (s->adapt[bi] && s->adapt_run[bi] == s->runs[bi])
		return s->adapt[bi];
	adapt_block_destroy(s->adapt[bi]);
	s->adapt[bi] = NULL;
	const struct plan_block *pb = &s->plan.blocks[bi];
	const struct protocol_block *prb = pblock(s, bi);
	const struct adapt_spec *as = adapt_spec_find(s->proto.adaptive, s->proto.nadaptive,
						      prb->adaptive);
	if (!as) {
		*err = xasprintf("block '%s' names no adaptive section", prb->name);
		return NULL;
	}
	size_t ni;
	struct adapt_item *items = plan_adaptive_items(&s->proto, &s->list, pb->proto_block, &ni);
	char why[256];
	struct adapt_block *ab = adapt_block_create(as, s->proto.nchoices, items, ni, s->plan.seed,
						    (int)bi, why, sizeof why);
	free(items);
	if (!ab) {
		*err = xasprintf("block '%s': %s", prb->name, why);
		return NULL;
	}
	if (!again) {
		struct store_trial *rows = NULL;
		size_t n = 0;
		if (store_trials_load(s->store, s->ss.id, &rows, &n, err)) {
			adapt_block_destroy(ab);
			return NULL;
		}
		struct adapt_outcome *done = xmalloc((n ? n : 1) * sizeof *done);
		int *st = xmalloc((pb->ntrials ? pb->ntrials : 1) * sizeof *st);
		int *ch = xmalloc((pb->ntrials ? pb->ntrials : 1) * sizeof *ch);
		size_t nd = 0, at;
		/* First-run trials of this block in plan order (block_trial is the plan index). */
		for (size_t k = 0; k < pb->ntrials; k++) {
			st[k] = s->plan.trials[pb->first + k].staircase;
			ch[k] = s->plan.trials[pb->first + k].choice;
			for (size_t i = 0; i < n; i++)
				if (rows[i].block == (int)bi && rows[i].repeat_of < 0 &&
				    rows[i].block_trial == (int)k)
					done[nd++] = (struct adapt_outcome){rows[i].staircase,
									    rows[i].stim,
									    rows[i].level,
									    rows[i].correct};
		}
		int rc = adapt_block_replay(ab, st, ch, pb->ntrials, done, nd, &at, why, sizeof why);
		store_trials_free(rows, n);
		free(done);
		free(st);
		free(ch);
		if (rc) {
			*err = xasprintf("block '%s': the stored trials do not fit its staircases (%s)",
					 prb->name, why);
			adapt_block_destroy(ab);
			return NULL;
		}
	}
	s->adapt[bi] = ab;
	s->adapt_run[bi] = s->runs[bi];
	s->adapt_pending = false;
	return ab;
}

/* Resume: in adaptive blocks begun before, planned trials of staircases that have already
 * finished will be skipped when their turn comes; mark them done now so a block whose staircases
 * all finished is not entered again. Returns 0 or -1 with *ERR. */
static int adaptive_mark_finished(struct run_session *s, char **err)
{
	for (size_t bi = 0; bi < s->plan.nblocks; bi++) {
		const struct plan_block *pb = &s->plan.blocks[bi];
		bool begun = false;
		for (size_t k = 0; k < pb->ntrials && !begun; k++)
			begun = s->stored[pb->first + k] &&
				s->plan.trials[pb->first + k].staircase >= 0;
		if (!begun)
			continue;
		struct adapt_block *ab = adaptive_state(s, bi, false, err);
		if (!ab)
			return -1;
		for (size_t k = 0; k < pb->ntrials; k++) {
			int st = s->plan.trials[pb->first + k].staircase;
			if (st >= 0 && (size_t)st < adapt_block_nstairs(ab) &&
			    adapt_stair_done(adapt_block_stair(ab, (size_t)st)))
				s->stored[pb->first + k] = true;
		}
	}
	return 0;
}

/* ADAPTIVE HOOK 1 — before a trial whose plan_trial.staircase >= 0: the adaptive rule picks the
 * stimulus (REC->stim) and records the level it asked for (REC->level_requested); the caller
 * fills the level shown from the stimulus. Returns 0, 1 when the trial's staircase has finished
 * (the trial is skipped, nothing is shown or stored), or -1 with *ERR. */
static int run_adaptive_pick(struct run_session *s, const struct plan_trial *pt,
			     struct trial_record *rec, char **err)
{
	size_t bi = (size_t)rec->block;
	bool again = rec->block_trial >= (int)s->plan.blocks[bi].ntrials;
	struct adapt_block *ab = adaptive_state(s, bi, again, err);
	if (!ab)
		return -1;
	size_t index = (size_t)(pt - s->plan.trials);
	if (s->adapt_pending && s->adapt_pending_index == index) {
		rec->stim = s->adapt_pending_stim;
		rec->level_requested = s->adapt_pending_req;
		return 0;
	}
	int stim;
	double req;
	int rc = adapt_block_next(ab, pt->staircase, pt->choice, &stim, &req);
	if (rc < 0) {
		*err = xasprintf("block '%s': category %s has no level for staircase %d",
				 pblock(s, bi)->name, s->proto.choices[pt->choice].category,
				 pt->staircase);
		return -1;
	}
	if (rc == 1)
		return 1;
	rec->stim = stim;
	rec->level_requested = req;
	s->adapt_pending = true;
	s->adapt_pending_index = index;
	s->adapt_pending_stim = stim;
	s->adapt_pending_req = req;
	return 0;
}

/* ADAPTIVE HOOK 2 — after a trial of an adaptive staircase has been stored: its staircase takes
 * the outcome (the level shown; no response counts as incorrect; a trial with a timing fault
 * counts as shown, since adaptive blocks do not repeat trials). */
static void run_adaptive_update(struct run_session *s, const struct trial_record *rec)
{
	s->adapt_pending = false;
	if (s->adapt && s->adapt[rec->block])
		adapt_block_update(s->adapt[rec->block], rec->staircase, rec->stim, rec->level,
				   rec->correct);
}

static void remember(struct blockrun *br, const struct trial_record *r)
{
	struct run_session *s = br->s;
	memmove(&br->last[1], &br->last[0], (RUN_LAST_TRIALS - 1) * sizeof br->last[0]);
	struct run_trial_brief *b = &br->last[0];
	memset(b, 0, sizeof *b);
	b->trial = r->trial;
	b->block_trial = r->block_trial;
	snprintf(b->category, sizeof b->category, "%s", s->proto.choices[r->choice].category);
	if (r->response >= 0)
		snprintf(b->response, sizeof b->response, "%s", s->proto.choices[r->response].category);
	b->correct = r->correct;
	b->timed_out = r->timed_out;
	b->rt_ms = r->has_rt ? r->rt_ms : NAN;
	b->frames_actual = r->frames_actual;
	b->frames_planned = r->frames_planned;
	b->timing_ok = r->timing_ok;
	if (br->nlast < RUN_LAST_TRIALS)
		br->nlast++;
}

/* A trial queued in this block run: a planned trial, or a repeat of one with a timing fault. */
struct queued {
	size_t plan_index;
	int repeat_of;          /* -1 or the session trial number it repeats */
	uint64_t id;            /* preload id */
};

/* The trial sink: stores REC and logs its ignored keys. Returns 0 or -1 with *ERR. */
static int run_sink(struct run_session *s, const struct trial_record *rec, char **err)
{
	if (store_trial_put(s->store, s->ss.id, rec, &s->proto, &s->list, err))
		return -1;
	size_t n;
	const struct trialloop_key *k = trialloop_ignored(s->tl, &n);
	for (size_t i = 0; i < n; i++) {
		char *d = isnan(k[i].t_ms) ? xasprintf("trial %d key %s", rec->trial, k[i].key)
					   : xasprintf("trial %d key %s at %+.1f ms", rec->trial,
						       k[i].key, k[i].t_ms);
		int rc = store_event(s->store, s->ss.id, k[i].anticipation ? "anticipation" : "key_ignored",
				     d, err);
		free(d);
		if (rc)
			return -1;
	}
	return 0;
}

enum run_block_result run_block(struct run_session *s, size_t bi, run_progress_fn progress,
				void *ctx, struct run_block_summary *sumout, char **err)
{
	*err = NULL;
	if (bi >= s->plan.nblocks) {
		*err = xasprintf("no block %zu", bi + 1);
		return RUN_BLOCK_FAILED;
	}
	if (s->failed) {
		*err = xasprintf("the session has stopped after an error");
		return RUN_BLOCK_FAILED;
	}
	const struct plan_block *pb = &s->plan.blocks[bi];
	const struct protocol_block *prb = pblock(s, bi);
	struct blockrun br = {.s = s, .block = bi, .progress = progress, .ctx = ctx};
	br.sum.block = (int)bi;
	br.sum.name = prb->name;
	br.t0 = dclock_monotonic_ns();
	br.rts = xmalloc((pb->ntrials * 2 + 16) * sizeof *br.rts);
	size_t capq = pb->ntrials * 2 + 16, nq = 0;
	struct queued *q = xmalloc(capq * sizeof *q);
	size_t owed = pending_in(s, bi);
	bool repeat_run = owed == 0;
	for (size_t k = 0; k < pb->ntrials; k++)
		if (!s->stored[pb->first + k])
			repeat_run = false;
	for (size_t k = 0; k < pb->ntrials; k++)
		if (repeat_run || !s->stored[pb->first + k])
			q[nq++] = (struct queued){pb->first + k, -1, 0};
	/* A resumed block first finishes its planned trials, then shows the repeats it owes. */
	if (nq + owed > capq) {
		capq = nq + owed + 16;
		q = xrealloc(q, capq * sizeof *q);
	}
	for (size_t i = 0; i < s->npend && !repeat_run; i++)
		if (s->pend[i].block == bi)
			q[nq++] = (struct queued){s->pend[i].plan_index, s->pend[i].repeat_of, 0};
	br.total = nq;
	s->runs[bi]++;
	enum run_block_result result = RUN_BLOCK_DONE;
	enum flow fl = FLOW_ON;

	char *detail = xasprintf("%s%s", prb->name, repeat_run ? " (again)" : "");
	fl = event(s, "block_start", detail, err);
	free(detail);
	if (fl == FLOW_ON && run_measure_refresh(s, &br.sum.refresh, err)) {
		fl = run_stop_requested() ? FLOW_STOP : FLOW_END;
		if (fl == FLOW_END)
			s->failed = true;
	}
	if (fl == FLOW_ON) {
		char *title = xasprintf("Block %zu of %zu%s", bi + 1, s->plan.nblocks,
					prb->practice ? " (practice)" : "");
		fl = break_screen(&br, title, err);
		free(title);
	}
	size_t qi = 0;
	size_t requested = 0;
	size_t rested_at = 0;      /* trial count at the last rest break */
	while (fl == FLOW_ON && qi < nq) {
		if (run_stop_requested()) {
			fl = FLOW_STOP;
			break;
		}
		/* Keep the look-ahead queue full (adaptive trials are decoded when picked). */
		for (; requested < nq && requested < qi + LOOKAHEAD; requested++) {
			const struct plan_trial *pt = &s->plan.trials[q[requested].plan_index];
			if (pt->stim < 0)
				continue;
			q[requested].id = ++s->serial;
			if (preload_request(s->pre, q[requested].id, s->list.items[pt->stim].path) < 0) {
				q[requested].id = 0;
				break;
			}
		}
		if (s->proto.break_every > 0 && br.sum.trials > 0 && br.sum.trials != rested_at &&
		    br.sum.trials % (size_t)s->proto.break_every == 0) {
			rested_at = br.sum.trials;
			fl = break_screen(&br, "Rest a moment", err);
			if (fl != FLOW_ON)
				break;
		}
		struct queued *cur = &q[qi];
		const struct plan_trial *pt = &s->plan.trials[cur->plan_index];
		struct trial_record rec;
		memset(&rec, 0, sizeof rec);
		rec.block = (int)bi;
		rec.block_trial = cur->repeat_of >= 0 || repeat_run ? s->next_bt[bi] : pt->block_trial;
		rec.trial = s->next_trial;
		rec.stim = pt->stim;
		rec.choice = pt->choice;
		rec.staircase = pt->staircase;
		rec.level_requested = NAN;
		rec.repeat_of = cur->repeat_of;
		if (pt->staircase >= 0) {
			int pick = run_adaptive_pick(s, pt, &rec, err);
			if (pick == 1) {
				/* The staircase has finished: the planned trial is not shown. */
				if (cur->repeat_of < 0 && !repeat_run)
					s->stored[cur->plan_index] = true;
				cur->id = UINT64_MAX;   /* no texture; no second rest break */
				br.total--;
				qi++;
				continue;
			}
			if (pick) {
				fl = FLOW_END;
				s->failed = true;
				break;
			}
			cur->id = ++s->serial;
			preload_request(s->pre, cur->id, s->list.items[rec.stim].path);
		} else if (!cur->id) {
			cur->id = ++s->serial;
			preload_request(s->pre, cur->id, s->list.items[rec.stim].path);
		}
		const struct stim *st = &s->list.items[rec.stim];
		rec.has_level = st->has_level;
		rec.level = st->level;
		char e[600];
		struct SDL_Texture *tex = preload_take(s->pre, cur->id, e, sizeof e);
		if (!tex) {
			*err = xasprintf("%s:%d: image %s cannot be read now (%s); the block stopped, every "
					 "trial before it is kept", s->list.path, st->line, st->image, e);
			s->failed = true;
			fl = FLOW_END;
			break;
		}
		struct trialloop_trial tt = {tex, rec.choice, rec.has_level, rec.level,
					     prb->feedback && s->proto.feedback != FEEDBACK_NONE};
		enum trialloop_status ts = trialloop_run(s->tl, &tt, &rec);
		if (ts == TRIALLOOP_PAUSE) {
			/* Abandoned: shown again after the pause. */
			fl = observer_pause(&br, err);
			if (fl == FLOW_ON)
				fl = break_screen(&br, "Ready?", err);
			continue;
		}
		if (ts == TRIALLOOP_STOP) {
			fl = FLOW_STOP;
			break;
		}
		/* Inter-trial interval from here: store first, then everything else. */
		if (run_sink(s, &rec, err)) {
			char *why = *err;
			*err = xasprintf("%s; the block stopped, every trial before this one is kept", why);
			free(why);
			s->failed = true;
			fl = FLOW_END;
			break;
		}
		s->next_trial++;
		if (rec.block_trial >= s->next_bt[bi])
			s->next_bt[bi] = rec.block_trial + 1;
		if (cur->repeat_of < 0 && !repeat_run)
			s->stored[cur->plan_index] = true;
		if (cur->repeat_of >= 0)
			pending_done(s, cur->repeat_of);
		if (rec.staircase >= 0)
			run_adaptive_update(s, &rec);
		br.sum.trials++;
		br.sum.dropped_frames += (size_t)rec.dropped_frames;
		if (rec.response >= 0) {
			br.sum.answered++;
			br.sum.correct += rec.correct == 1;
			br.rts[br.nrts++] = rec.rt_ms;
		}
		br.sum.timeouts += rec.timed_out;
		if (!rec.timing_ok) {
			br.sum.faults++;
			if (prb->repeat_faults && cur->repeat_of < 0 && !prb->adaptive) {
				if (nq == capq) {
					capq *= 2;
					q = xrealloc(q, capq * sizeof *q);
				}
				q[nq++] = (struct queued){cur->plan_index, rec.trial, 0};
				br.total++;
				br.sum.repeats++;
			}
		}
		remember(&br, &rec);
		preload_release(s->pre, cur->id);
		qi++;
		enum run_cmd cmd = call_progress(&br, RUN_STATE_ITI);
		preload_ready(s->pre);
		if (cmd == RUN_CMD_END) {
			event(s, "end", "experimenter", err);
			fl = FLOW_END;
			break;
		}
		if (cmd == RUN_CMD_PAUSE) {
			fl = console_pause(&br, err);
			if (fl == FLOW_ON && s->paced)
				fl = break_screen(&br, "Ready?", err);
			continue;
		}
		enum trialloop_status is = trialloop_iti_finish(s->tl);
		if (is == TRIALLOOP_STOP)
			fl = FLOW_STOP;
		else if (is == TRIALLOOP_PAUSE)
			fl = observer_pause(&br, err);
	}
	/* Release whatever the look-ahead still holds. */
	for (size_t k = qi; k < nq; k++)
		if (q[k].id)
			preload_release(s->pre, q[k].id);
	if (run_stop_requested() && fl == FLOW_ON)
		fl = FLOW_STOP;
	switch (fl) {
	case FLOW_ON: result = RUN_BLOCK_DONE; break;
	case FLOW_SKIP: result = RUN_BLOCK_SKIPPED; break;
	case FLOW_END: result = s->failed ? RUN_BLOCK_FAILED : RUN_BLOCK_ENDED; break;
	case FLOW_STOP: result = RUN_BLOCK_INTERRUPTED; break;
	}
	if (result == RUN_BLOCK_ENDED)
		s->ended = true;
	if (result == RUN_BLOCK_SKIPPED)
		s->skipped[bi] = true;
	if (result == RUN_BLOCK_INTERRUPTED)
		s->interrupted = true;
	if (!s->failed) {
		char *ignored = NULL;
		char *d2 = xasprintf("%s: %zu trials, %zu correct of %zu answered, %zu timing faults",
				     prb->name, br.sum.trials, br.sum.correct, br.sum.answered, br.sum.faults);
		if (store_event(s->store, s->ss.id, "block_end", d2, &ignored)) {
			if (!*err) {
				*err = ignored;
				ignored = NULL;
			}
			s->failed = true;
			result = RUN_BLOCK_FAILED;
		}
		free(ignored);
		free(d2);
	}
	br.sum.accuracy = br.sum.answered ? (double)br.sum.correct / (double)br.sum.answered : NAN;
	br.sum.median_rt_ms = median_of(br.rts, br.nrts);
	br.sum.result = result;
	if (sumout)
		*sumout = br.sum;
	free(br.rts);
	free(q);
	return result;
}

enum run_block_result run_all(struct run_session *s, run_progress_fn progress, void *ctx,
			      void (*on_block)(const struct run_block_summary *, void *),
			      char **err)
{
	enum run_block_result r = RUN_BLOCK_DONE;
	size_t b;
	while ((b = run_next_block(s)) < s->plan.nblocks) {
		struct run_block_summary sum;
		r = run_block(s, b, progress, ctx, &sum, err);
		if (on_block)
			on_block(&sum, ctx);
		if (r == RUN_BLOCK_SKIPPED) {
			r = RUN_BLOCK_DONE;   /* run_next_block passes over it now */
			continue;
		}
		if (r != RUN_BLOCK_DONE)
			break;
	}
	return r;
}

int run_close(struct run_session *s, char **err)
{
	*err = NULL;
	if (!s)
		return 0;
	int rc = 0;
	if (s->live) {
		enum store_status st = STORE_COMPLETE;
		/* Complete: every planned trial stored, except in blocks deliberately skipped. */
		size_t done = 0;
		for (size_t k = 0; k < s->plan.ntrials; k++)
			done += s->stored[k] || s->skipped[s->plan.trials[k].block];
		if (s->interrupted || run_stop_requested())
			st = STORE_INTERRUPTED;
		else if (s->failed || s->ended || done < s->plan.ntrials)
			st = STORE_ABORTED;
		rc = store_session_end(s->store, s->ss.id, st, err);
	}
	if (s->handlers) {
		sigaction(SIGINT, &s->old_int, NULL);
		sigaction(SIGTERM, &s->old_term, NULL);
	}
	preload_destroy(s->pre);
	trialloop_destroy(s->tl);
	display_texture_free(s->mask);
	responder_destroy(s->resp);
	dclock_destroy(s->clock);
	display_close(s->disp);
	store_close(s->store);
	store_session_clear(&s->ss);
	for (size_t b = 0; s->adapt && b < s->plan.nblocks; b++)
		adapt_block_destroy(s->adapt[b]);
	free(s->adapt);
	free(s->adapt_run);
	if (s->have_plan)
		plan_clear(&s->plan);
	if (s->have_list)
		stimlist_clear(&s->list);
	if (s->have_rig)
		rig_clear(&s->rig);
	if (s->have_proto)
		protocol_clear(&s->proto);
	free(s->stored);
	free(s->pend);
	free(s->next_bt);
	free(s->runs);
	free(s->skipped);
	free(s);
	return rc;
}
