/* run — a session from start to end (see run.h for the stepwise interface and its contract):
 * opening (inputs, presenter, store, resume), the refresh measurement, block information, run_all
 * and closing. The session's data layout is in run_private.h; one block run is
 * app/run/run_block.c, the adaptive bookkeeping app/run/run_adaptive.c.
 *
 * Adaptive procedures plug in at two places in run_block.c: run_adaptive_pick (before a trial
 * whose plan_trial.staircase >= 0) and run_adaptive_update (after it is stored). */
#include "run_private.h"

#include <fcntl.h>
#include <math.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>


#include "adapt.h"
#include "dclock.h"
#include "display.h"
#include "evsrc.h"
#include "frames.h"
#include "geom.h"
#include "image.h"
#include "inputs.h"
#include "observer.h"
#include "plan.h"
#include "preload.h"
#include "protocol_file.h"
#include "responder.h"
#include "rig_file.h"
#include "rig_lum.h"
#include "sha256.h"
#include "stimlist_file.h"
#include "store.h"
#include "trialloop.h"
#include "trigger.h"
#include "version.h"

#define MEASURE_FLIPS 120

/* The process-wide stop flag, set by our SIGINT/SIGTERM/SIGHUP handlers or run_request_stop. */
static volatile sig_atomic_t run_stop_flag;

void run_request_stop(void) { run_stop_flag = 1; }
bool run_stop_requested(void) { return run_stop_flag != 0; }

static void on_signal(int sig)
{
	(void)sig;
	run_stop_flag = 1;
}

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
	const struct run_session *s = ctx;   /* read only while the queue lives */
	struct image img;
	struct image_info info;
	if (image_load_max(path, s->rig.max_image_side, &img, &info, err, errlen))
		return -1;
	if (s->linearize) {   /* here, on the worker, never during a trial */
		size_t n = (size_t)img.width * (size_t)img.height;
		for (size_t i = 0; i < n; i++)
			for (int c = 0; c < 3; c++)
				img.rgba[4 * i + c] = s->lin[c][img.rgba[4 * i + c]];
	}
	*w = img.width;
	*h = img.height;
	*rgba = img.rgba;
	return 0;
}

const char *run_session_id(const struct run_session *s) { return s->ss.id; }
const char *run_timing_mode(const struct run_session *s) { return s->ss.timing_mode; }
uint64_t run_seed(const struct run_session *s) { return s->plan.seed; }
const struct protocol *run_protocol(const struct run_session *s) { return &s->proto; }
const struct plan *run_plan(const struct run_session *s) { return &s->plan; }
size_t run_block_count(const struct run_session *s) { return s->plan.nblocks; }

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

/* Loads protocol, rig, list and images and builds the plan through the one loader `check` uses,
 * so a session refuses to begin on anything check would refuse, with its messages in D. */
static int load_inputs(struct run_session *s, const struct run_options *o, const char *rig_text,
		       uint64_t seed, size_t position, struct diag_list *d, char **err)
{
	struct inputs_options io = {.protocol_path = o->protocol_path, .rig_path = o->rig_path,
				    .rig_text = rig_text, .seed = seed, .design_position = position};
	struct inputs in;
	if (inputs_load(&io, &in, d)) {
		inputs_clear(&in);
		*err = xasprintf("nothing was started: `tachist check %s` finds the same problems",
				 o->protocol_path);
		return -1;
	}
	/* The session takes over what the loader built. */
	s->proto = in.proto;
	s->rig = in.rig;
	s->list = in.list;
	s->plan = in.plan;
	s->ss.design_position = (int)position;
	free(s->ss.block_order);
	free(s->ss.key_mapping);
	s->ss.block_order = in.block_order;
	s->ss.key_mapping = in.key_mapping;
	s->have_proto = s->have_rig = s->have_list = s->have_plan = true;
	s->linearize = s->proto.linearize && rig_lum_tables(&s->rig, s->lin);
	return 0;
}

/* The observer's window: refused when there is no real display (unless headless) or when it is
 * smaller than the stimulus (a size other than the rig's is rig_match's). */
static int open_display(struct run_session *s, const struct run_options *o, char **err)
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
	return 0;
}

/* The display clock: virtual (headless, with the injected faults) or locked to vsync. */
static int open_clock(struct run_session *s, const struct run_options *o, struct diag_list *d,
		      char **err)
{
	if (o->headless) {
		struct dclock_virtual_opts vo = {
			.hz = o->clock_hz > 0 ? o->clock_hz : s->rig.refresh_hz, .drop_rate = o->inject_drops, .drop_frames = 1,
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
	return 0;
}

/* The rig must describe the display it runs on: a screen of another size than the rig's pixels (a
 * real display) or a refresh measured more than RIG_HZ_TOLERANCE percent from the rig's refuses the
 * session before anything is stored, with both values and the fix. With accept_rig_mismatch the
 * session runs and *NOTE (malloc'd, NULL when all matches) is recorded as its event. The 2% bound
 * is the choice (common practice, no source): a 60 Hz rig on a 59.94 Hz display passes, a
 * 120 Hz rig on a 60 Hz display does not. A virtual clock (headless) runs at the rate it was made
 * with (--clock-hz), so its rate is read, not measured. Returns 0 or -1 with *ERR. */
#define RIG_HZ_TOLERANCE 2.0
static int rig_match(struct run_session *s, const struct run_options *o, char **note, char **err)
{
	*note = NULL;
	char *size = NULL, *rate = NULL;
	int sw, sh;
	display_screen_size(s->disp, &sw, &sh);
	if (!o->headless && (sw != s->rig.width_px || sh != s->rig.height_px))
		size = xasprintf("the display is %d×%d px but the rig %s says %d×%d px", sw, sh,
				 s->rig.path, s->rig.width_px, s->rig.height_px);
	double hz = 1e9 / (double)s->clock->period_ns;   /* a virtual clock's rate is its period's */
	if (!s->clock->simulated) {
		int64_t flips[MEASURE_FLIPS];
		struct frames_measure m;
		if (trialloop_measure(s->tl, flips, MEASURE_FLIPS) ||
		    frames_measure(flips, MEASURE_FLIPS, s->rig.refresh_hz, &m)) {
			free(size);
			*err = xasprintf("the refresh measurement was interrupted");
			return -1;
		}
		/* The first block takes this measurement instead of flipping another 120 frames. */
		s->premeasured = m;
		s->have_premeasured = true;
		hz = m.rate_hz;
	}
	double off = (hz - s->rig.refresh_hz) / s->rig.refresh_hz * 100.0;
	if (fabs(off) > RIG_HZ_TOLERANCE)
		rate = xasprintf("the display refreshes at %.3f Hz (%s) but the rig %s says "
				 "%.3f Hz (%+.1f%%, more than %.0f%%)", hz,
				 s->clock->simulated ? "virtual clock" : "measured", s->rig.path,
				 s->rig.refresh_hz, off, RIG_HZ_TOLERANCE);
	if (!size && !rate)
		return 0;
	char *both = xasprintf("%s%s%s", size ? size : "", size && rate ? "; " : "", rate ? rate : "");
	free(size);
	free(rate);
	if (o->accept_rig_mismatch) {
		*note = both;
		return 0;
	}
	*err = xasprintf("%s. Sizes in degrees and durations in frames are only right on the display "
			 "the rig describes: set width_px, height_px and refresh_hz in [screen] of "
			 "the rig to what the display does (`tachist timing` measures the refresh), "
			 "or set the display to the rig's mode; --accept-rig-mismatch runs anyway "
			 "and records that choice", both);
	free(both);
	return -1;
}

/* The responder: the keyboard (the protocol's keys) or the model observer O->observer names. */
static int open_responder(struct run_session *s, const struct run_options *o, char **err)
{
	char e[512];
	if (!o->observer || !strcmp(o->observer, "keyboard")) {
		const char *keys[PROTOCOL_MAX_CHOICES];
		for (size_t i = 0; i < s->proto.nchoices; i++)
			keys[i] = s->proto.choices[i].key;
		s->keyboard = true;
		snprintf(s->observer_text, sizeof s->observer_text, "keyboard");
		if (!s->rig.input_device) {
			s->resp = responder_keyboard_new(keys, (int)s->proto.nchoices);
			return 0;
		}
		/* The rig names the response keyboard: only it answers, with kernel time stamps.
		 * A device that cannot be opened is an error, never a quiet fall-back to SDL keys. */
		struct evsrc *src = evsrc_open_device(s->rig.input_device, e, sizeof e);
		if (!src) {
			*err = xasprintf("%s: [input] device: %s", s->rig.path ? s->rig.path : "rig", e);
			return -1;
		}
		s->response_device = xstrdup(evsrc_name(src));
		s->response_usb = evsrc_usb(src) ? xstrdup(evsrc_usb(src)) : NULL;
		s->resp = responder_evdev_new(keys, (int)s->proto.nchoices, src);
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
	return 0;
}

/* The mask texture the protocol asks for (noise, or its image), if any. */
static int make_mask(struct run_session *s, char **err)
{
	char e[512] = "";
	if (s->proto.mask == MASK_NOISE) {
		s->mask = display_texture_noise(s->disp, s->plan.stim_px, s->plan.stim_px,
						s->plan.stim_px / 32 + 1, s->plan.seed, e, sizeof e);
	} else if (s->proto.mask == MASK_IMAGE && s->proto.mask_image) {
		struct image img;
		struct image_info info;
		if (image_load_max(s->proto.mask_image, s->rig.max_image_side, &img, &info, e,
				   sizeof e) == 0) {
			s->mask = display_texture_rgba(s->disp, img.width, img.height, img.rgba,
						       s->proto.scaling == SCALING_NEAREST, e, sizeof e);
			image_free(&img);
		}
	}
	if (s->proto.mask != MASK_NONE && !s->mask) {
		*err = xasprintf("the mask cannot be made: %s", e);
		return -1;
	}
	return 0;
}

/* The rig's trigger port, when it names one: opened before the session begins, so a missing
 * port is an error before any trial. */
static int open_trigger(struct run_session *s, char **err)
{
	if (!s->rig.trigger_port)
		return 0;
	char e[600];
	s->trig = trigger_open(s->rig.trigger_port, s->rig.trigger_baud, e, sizeof e);
	if (!s->trig) {
		*err = xasprintf("%s: [trigger] port: %s", s->rig.path ? s->rig.path : "rig", e);
		return -1;
	}
	return 0;
}

/* The presenter's parts: display, clock, responder, trigger port, mask, trial loop and
 * preloader. */
static int open_presenter(struct run_session *s, const struct run_options *o, struct diag_list *d,
			  char **err)
{
	if (open_display(s, o, err) || open_clock(s, o, d, err) || open_responder(s, o, err) ||
	    open_trigger(s, err))
		return -1;
	s->paced = s->keyboard && !o->no_observer_screens;
	if (make_mask(s, err))
		return -1;
	struct trialloop_config tc = {
		.disp = s->disp, .clock = s->clock, .resp = s->resp,
		.period_ns = s->clock->period_ns, .stim_px = s->plan.stim_px,
		.fixation_px = s->proto.fixation_deg > 0 ? geom_deg_to_px(&s->rig, s->proto.fixation_deg, NULL) : 0,
		.marker_corner = (int)s->rig.marker_corner, .marker_px = s->rig.marker_px,
		.nchoices = (int)s->proto.nchoices, .mask = s->mask, .stop = &run_stop_flag,
		.trigger = s->trig, .onset_codes = s->proto.triggers.onset_choice,
		.response_code = s->proto.triggers.response,
	};
	memcpy(tc.epoch_frames, s->plan.epoch_frames, sizeof tc.epoch_frames);
	if (run_screens_setup(s, &tc, d, err))
		return -1;
	if (tc.fixation_px < 0)
		tc.fixation_px = 0;
	if (s->screenshot_dir) {
		tc.on_frame = shot_hook;
		tc.frame_ctx = s;
	}
	s->tl = trialloop_new(&tc);
	s->pre = preload_new(s->disp, RUN_LOOKAHEAD, s->proto.scaling == SCALING_NEAREST, decode_image, s);
	if (!s->pre) {
		*err = xasprintf("cannot start the image preloader");
		return -1;
	}
	return 0;
}

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
		const struct protocol_block *prb = run_pblock(s, (size_t)t->block);
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
size_t run_pending_in(const struct run_session *s, size_t b)
{
	size_t k = 0;
	for (size_t i = 0; i < s->npend; i++)
		k += s->pend[i].block == b;
	return k;
}

/* Drops the owed repeat of session trial TRIAL (it has been stored). */
void run_pending_done(struct run_session *s, int trial)
{
	for (size_t i = 0; i < s->npend; i++)
		if (s->pend[i].repeat_of == trial) {
			memmove(&s->pend[i], &s->pend[i + 1], (s->npend - i - 1) * sizeof *s->pend);
			s->npend--;
			return;
		}
}

/* Resume: the stored session O->resume_id, refused when complete or still running elsewhere, and
 * its inputs (with the stored rig and seed), refused when the protocol or the list changed. */
static int resume_load(struct run_session *s, const struct run_options *o, struct diag_list *d,
		       char **err)
{
	if (store_session_get(s->store, o->resume_id, &s->ss, err))
		return -1;
	if (s->ss.status == STORE_COMPLETE) {
		*err = xasprintf("session %s is already complete", s->ss.id);
		return -1;
	}
	if (s->ss.status == STORE_RUNNING && store_session_orphaned(&s->ss)) {
		/* Its process is gone but recovery could not mark it: the file cannot be written. */
		*err = xasprintf("session %.8s was left running by a process that has ended, and "
				 "cannot be taken over: %s; resume it where the database and its "
				 "folder can be written", s->ss.id,
				 s->recover_err ? s->recover_err : "the database cannot be written");
		return -1;
	}
	if (s->ss.status == STORE_RUNNING) {
		/* Recovery left it running: its process is alive here or it runs elsewhere. */
		*err = xasprintf("session %.8s is still running in another process (here or on "
				 "another host); resume it once that run has ended", s->ss.id);
		return -1;
	}
	if (load_inputs(s, o, s->ss.rig_text, s->ss.seed, (size_t)s->ss.design_position, d, err))
		return -1;
	char hex[65];
	sha256_hex(s->proto.text, strlen(s->proto.text), hex);
	if (strcmp(hex, s->ss.protocol_sha256)) {
		*err = xasprintf("the protocol %s changed since session %.8s began; resume refused",
				 o->protocol_path, s->ss.id);
		return -1;
	}
	if (strcmp(s->list.sha256, s->ss.stimuli_sha256)) {
		*err = xasprintf("the stimulus list %s changed since session %.8s began; resume "
				 "refused", s->list.path, s->ss.id);
		return -1;
	}
	return 0;
}

/* Resume: what is stored and owed, then the session is running again, owned by this process. */
static int resume_begin(struct run_session *s, const char *mode, struct diag_list *d, char **err)
{
	if (mark_stored(s, err) || run_adaptive_mark_finished(s, err))
		return -1;
	if (strcmp(s->ss.timing_mode ? s->ss.timing_mode : "", mode))
		diag_add(d, DIAG_WARNING, NULL, 0, "session %.8s began with timing mode %s and "
			 "goes on with %s", s->ss.id, s->ss.timing_mode, mode);
	char *detail = xasprintf("resumed by tachist %s, %s", TACHIST_VERSION, s->observer_text);
	int rc = store_event(s->store, s->ss.id, "resume", detail, err);
	free(detail);
	if (rc)
		return -1;
	char *was = xasprintf("running again (was %s), pid %ld",
			      store_status_name(s->ss.status), (long)getpid());
	rc = store_session_own(s->store, s->ss.id, (long)getpid(), NULL, err);
	if (!rc)
		rc = store_event(s->store, s->ss.id, "status", was, err);
	free(was);
	if (rc)
		return -1;
	s->ss.status = STORE_RUNNING;
	return 0;
}

/* The subject's position in the protocol's counterbalancing design for a new session: 0 when the
 * protocol has no [counterbalance]; else --counterbalance N, or one more than the sessions of this
 * protocol (by name) already begun in the database, whatever their status. Returns 0 or -1. */
static int design_position(struct run_session *s, const struct run_options *o, struct diag_list *d,
			   size_t *pos, char **err)
{
	*pos = 0;
	struct protocol p;
	struct diag_list ignored;
	diag_init(&ignored);
	bool cb = protocol_load(o->protocol_path, &p, &ignored) == 0 &&
		  (p.counterbalance.block_order || p.counterbalance.key_mapping);
	char *name = cb ? xstrdup(p.name) : NULL;
	protocol_clear(&p);
	diag_clear(&ignored);
	if (!cb) {
		if (o->counterbalance)
			diag_add(d, DIAG_WARNING, o->protocol_path, 0, "--counterbalance %zu is ignored: "
				 "the protocol has no [counterbalance] section", o->counterbalance);
		return 0;   /* load_inputs reports the protocol's errors */
	}
	if (o->counterbalance) {
		*pos = o->counterbalance;
		free(name);
		return 0;
	}
	struct store_session *v = NULL;
	size_t n = 0, k = 0;
	if (store_sessions_list(s->store, NULL, &v, &n, err)) {
		free(name);
		return -1;
	}
	for (size_t i = 0; i < n; i++)
		k += v[i].protocol_name && !strcmp(v[i].protocol_name, name);
	store_sessions_free(v, n);
	free(name);
	*pos = k + 1;
	return 0;
}

/* A new session: its row describes the inputs, subject, seed, timing mode and observer. */
static int session_begin(struct run_session *s, const struct run_options *o, const char *mode,
			 char **err)
{
	store_session_describe(&s->ss, &s->proto, &s->list, &s->rig);
	free(s->ss.subject);
	s->ss.subject = xstrdup(o->subject);
	sha256_hex(s->proto.text, strlen(s->proto.text), s->ss.protocol_sha256);
	s->ss.seed = s->plan.seed;
	free(s->ss.timing_mode);
	s->ss.timing_mode = xstrdup(mode);
	free(s->ss.observer);
	s->ss.observer = xstrdup(s->observer_text);
	s->ss.response_device = s->response_device ? xstrdup(s->response_device) : NULL;
	s->ss.response_usb = s->response_usb ? xstrdup(s->response_usb) : NULL;
	s->ss.trigger_port = s->trig ? xstrdup(trigger_port(s->trig)) : NULL;
	s->ss.planned_trials = (int)s->plan.ntrials;
	return store_session_begin(s->store, &s->ss, err);
}

/* SIGINT, SIGTERM and SIGHUP (the terminal closed) only set the stop flag while the session is
 * open, so the session is closed as interrupted. */
static void install_handlers(struct run_session *s)
{
	struct sigaction sa;
	memset(&sa, 0, sizeof sa);
	sa.sa_handler = on_signal;
	sigemptyset(&sa.sa_mask);
	sigaction(SIGINT, &sa, &s->old_int);
	sigaction(SIGTERM, &sa, &s->old_term);
	sigaction(SIGHUP, &sa, &s->old_hup);
	s->handlers = true;
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
	/* A read-only database fails later, at the session's first write (or a resume says why its
	 * crashed session could not be taken over). */
	if (store_recover(s->store, &nrec, &s->recover_err) && !s->recover_err)
		s->recover_err = xstrdup("the database cannot be written");
	if (o->resume_id) {
		if (resume_load(s, o, d, err))
			goto fail;
	} else {
		uint64_t seed = o->has_seed ? o->seed : fresh_seed();
		if (!o->rig_path) {
			*err = xasprintf("no rig profile");
			goto fail;
		}
		size_t position = 0;
		if (design_position(s, o, d, &position, err) ||
		    load_inputs(s, o, NULL, seed, position, d, err))
			goto fail;
	}
	s->stored = xcalloc(s->plan.ntrials + 1, sizeof *s->stored);
	s->next_bt = xcalloc(s->plan.nblocks + 1, sizeof *s->next_bt);
	s->runs = xcalloc(s->plan.nblocks + 1, sizeof *s->runs);
	s->skipped = xcalloc(s->plan.nblocks + 1, sizeof *s->skipped);
	for (size_t b = 0; b < s->plan.nblocks; b++)
		s->next_bt[b] = (int)s->plan.blocks[b].ntrials;
	char *mismatch = NULL;
	if (open_presenter(s, o, d, err) || rig_match(s, o, &mismatch, err))
		goto fail;
	const char *mode = o->headless ? "simulated" : "vsync";
	if ((o->resume_id ? resume_begin(s, mode, d, err) : session_begin(s, o, mode, err)) ||
	    (mismatch && store_event(s->store, s->ss.id, "rig_mismatch_accepted", mismatch, err))) {
		free(mismatch);
		goto fail;
	}
	if (mismatch)
		diag_add(d, DIAG_WARNING, s->rig.path, 0, "running although %s (--accept-rig-mismatch, "
			 "recorded as an event of the session)", mismatch);
	free(mismatch);
	if (!o->no_signal_handlers)
		install_handlers(s);
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
	struct frames_measure m = s->premeasured;
	if (s->have_premeasured) {
		s->have_premeasured = false;
	} else if (trialloop_measure(s->tl, flips, MEASURE_FLIPS)) {
		*err = xasprintf("the refresh measurement was interrupted");
		return -1;
	} else if (frames_measure(flips, MEASURE_FLIPS, s->rig.refresh_hz, &m)) {
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
	const struct protocol_block *pb = run_pblock(s, i);
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
		if (run_pending_in(s, b))
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
	return store_event(s->store, s->ss.id, "skip", run_pblock(s, i)->name, err);
}


/* The end screen's watcher: leaves on the experimenter's END or GO_ON. */
struct end_watch {
	run_progress_fn progress;
	void *ctx;
	struct run_session *s;
};

static int end_tick(void *ctx)
{
	struct end_watch *w = ctx;
	if (!w->progress)
		return 0;
	struct run_snapshot sn;
	memset(&sn, 0, sizeof sn);
	sn.state = RUN_STATE_BREAK;
	sn.block = -1;
	sn.block_name = "end";
	sn.session_total = w->s->plan.ntrials;
	for (size_t k = 0; k < w->s->plan.ntrials; k++)
		sn.session_done += w->s->stored[k];
	sn.accuracy = sn.median_rt_ms = NAN;
	sn.timing_mode = w->s->ss.timing_mode;
	sn.session_id = w->s->ss.id;
	enum run_cmd c = w->progress(&sn, w->ctx);
	return c == RUN_CMD_END || c == RUN_CMD_GO_ON;
}

/* A keyboard observer's end screen: thanks, held until the experimenter closes it (the watcher,
 * the chord Ctrl+Alt+E or G, or closing the window). Every trial is stored before it shows. */
static void run_end_screen(struct run_session *s, run_progress_fn progress, void *ctx)
{
	if (!s->paced || s->failed)
		return;
	struct run_text t = {0};
	run_screen_end(&t);
	run_screen_shot(s, "end", &t);
	static const char *const keys[] = {"ctrl+alt+e", "ctrl+alt+g"};
	struct end_watch w = {progress, ctx, s};
	trialloop_screen(s->tl, (const char *const *)t.v, t.n, keys, 2, false, end_tick, &w, 0);
	run_text_free(&t);
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
	if (r == RUN_BLOCK_DONE || r == RUN_BLOCK_ENDED)
		run_end_screen(s, progress, ctx);
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
		/* Every planned trial stored: complete, however the run ended. Otherwise a signal
		 * interrupted it, a storage failure aborted it, or the experimenter ended it early. */
		if (done >= s->plan.ntrials)
			st = STORE_COMPLETE;
		else if (s->interrupted || run_stop_requested())
			st = STORE_INTERRUPTED;
		else if (s->failed)
			st = STORE_ABORTED;
		else
			st = STORE_ENDED_EARLY;
		rc = store_session_end(s->store, s->ss.id, st, err);
	}
	if (s->handlers) {
		sigaction(SIGINT, &s->old_int, NULL);
		sigaction(SIGTERM, &s->old_term, NULL);
		sigaction(SIGHUP, &s->old_hup, NULL);
	}
	preload_destroy(s->pre);
	trialloop_destroy(s->tl);
	trigger_close(s->trig);
	display_texture_free(s->mask);
	responder_destroy(s->resp);
	free(s->response_device);
	free(s->response_usb);
	dclock_destroy(s->clock);
	display_close(s->disp);
	store_close(s->store);
	free(s->recover_err);
	store_session_clear(&s->ss);
	run_adaptive_free(s);
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
	run_text_free(&s->legend);
	for (size_t i = 0; i < s->nshot_names; i++)
		free(s->shot_names[i]);
	free(s->shot_names);
	free(s);
	return rc;
}
