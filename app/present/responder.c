/* responder — keyboard and model-observer responders (see responder.h).
 *
 * Both drain SDL's event queue on every poll: the keyboard turns key presses into events, the model
 * only passes Escape and window-close through and otherwise answers once per trial at onset + RT. */
#include "responder.h"

#include <ctype.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <SDL.h>

#include "diag.h"
#include "evsrc.h"
#include "observer.h"

#define MAX_KEYS 32

/* Next SDL event that matters: returns RESP_KEY (KEY, SDL_MS filled), RESP_ESCAPE, RESP_QUIT or
 * RESP_NONE when the queue is empty. */
static enum responder_kind next_sdl(char *key, size_t keylen, int64_t *sdl_ms)
{
	SDL_Event ev;
	while (SDL_PollEvent(&ev)) {
		if (ev.type == SDL_QUIT)
			return RESP_QUIT;
		if (ev.type != SDL_KEYDOWN || ev.key.repeat)
			continue;
		*sdl_ms = ev.key.timestamp;
		if (ev.key.keysym.sym == SDLK_ESCAPE)
			return RESP_ESCAPE;
		snprintf(key, keylen, "%s", SDL_GetKeyName(ev.key.keysym.sym));
		for (char *p = key; *p; p++)
			*p = (char)tolower((unsigned char)*p);
		return RESP_KEY;
	}
	return RESP_NONE;
}

/* ---- keyboard ---- */

struct keyboard {
	struct responder base;
	char keys[MAX_KEYS][24];
	int n;
};

static void kb_begin(struct responder *r, const struct responder_trial *t) { (void)r; (void)t; }
static void kb_onset(struct responder *r, int64_t t) { (void)r; (void)t; }

static int kb_poll(struct responder *r, int64_t now, struct responder_event *ev)
{
	struct keyboard *k = (struct keyboard *)r;
	memset(ev, 0, sizeof *ev);
	ev->choice = -1;
	ev->kind = next_sdl(ev->key, sizeof ev->key, &ev->sdl_ms);
	if (ev->kind == RESP_NONE)
		return 0;
	ev->t_ns = now;
	if (ev->kind == RESP_KEY)
		for (int i = 0; i < k->n; i++)
			if (!strcmp(ev->key, k->keys[i]))
				ev->choice = i;
	return 1;
}

static void kb_destroy(struct responder *r) { free(r); }

static const struct responder_ops kb_ops = {kb_begin, kb_onset, kb_poll, kb_destroy, NULL};

struct responder *responder_keyboard_new(const char *const *keys, int n)
{
	if (n < 1 || n > MAX_KEYS)
		return NULL;
	struct keyboard *k = xcalloc(1, sizeof *k);
	k->base.ops = &kb_ops;
	k->base.rt_clock = "frame";
	k->n = n;
	for (int i = 0; i < n; i++) {
		snprintf(k->keys[i], sizeof k->keys[i], "%s", keys[i]);
		for (char *p = k->keys[i]; *p; p++)
			*p = (char)tolower((unsigned char)*p);
	}
	return &k->base;
}

/* ---- keyboard on an input device (kernel time stamps) ---- */

struct evkb {
	struct responder base;
	struct evsrc *src;
	char keys[MAX_KEYS][24];
	int n;
	bool lost;
};

/* Keys queued before the trial began were pressed in the last inter-trial interval (the SDL
 * keyboard drains those there too): drop them. */
static void ev_begin(struct responder *r, const struct responder_trial *t)
{
	(void)t;
	struct evkb *k = (struct evkb *)r;
	struct evsrc_key key;
	while (evsrc_next(k->src, &key) == 1)
		;
}

static int ev_poll(struct responder *r, int64_t now, struct responder_event *ev)
{
	struct evkb *k = (struct evkb *)r;
	memset(ev, 0, sizeof *ev);
	ev->choice = -1;
	/* SDL: only Escape and a window close; key presses there are the experimenter's. */
	enum responder_kind sk;
	while ((sk = next_sdl(ev->key, sizeof ev->key, &ev->sdl_ms)) == RESP_KEY)
		;
	if (sk != RESP_NONE) {
		ev->kind = sk;
		ev->key[0] = '\0';
		ev->t_ns = now;
		return 1;
	}
	ev->sdl_ms = 0;
	struct evsrc_key key;
	int rc = evsrc_next(k->src, &key);
	if (rc < 0) {
		if (k->lost)
			return 0;
		k->lost = true;
		ev->kind = RESP_LOST;
		ev->t_ns = now;
		return 1;
	}
	if (rc == 0)
		return 0;
	ev->kind = RESP_KEY;
	ev->t_ns = key.t_ns;
	evsrc_key_name(key.code, ev->key, sizeof ev->key);
	for (int i = 0; i < k->n; i++)
		if (!strcmp(ev->key, k->keys[i]))
			ev->choice = i;
	return 1;
}

static void ev_destroy(struct responder *r)
{
	struct evkb *k = (struct evkb *)r;
	evsrc_close(k->src);
	free(k);
}

static const char *ev_error(const struct responder *r)
{
	const struct evkb *k = (const struct evkb *)r;
	return k->lost ? evsrc_error(k->src) : "";
}

static const struct responder_ops ev_ops = {ev_begin, kb_onset, ev_poll, ev_destroy, ev_error};

struct responder *responder_evdev_new(const char *const *keys, int n, struct evsrc *src)
{
	if (n < 1 || n > MAX_KEYS || !src) {
		evsrc_close(src);
		return NULL;
	}
	struct evkb *k = xcalloc(1, sizeof *k);
	k->base.ops = &ev_ops;
	k->base.rt_clock = "kernel";
	k->src = src;
	k->n = n;
	for (int i = 0; i < n; i++) {
		snprintf(k->keys[i], sizeof k->keys[i], "%s", keys[i]);
		for (char *p = k->keys[i]; *p; p++)
			*p = (char)tolower((unsigned char)*p);
	}
	return &k->base;
}

const char *responder_error(const struct responder *r)
{
	return r->ops->error ? r->ops->error(r) : "";
}

/* ---- model observer ---- */

struct model {
	struct responder base;
	struct observer *obs;
	struct observer_answer ans;
	int64_t due_ns;         /* onset + RT; 0 before the onset */
	bool answered;
	unsigned ntrials;       /* trials begun */
	unsigned pause_at;      /* the spec's pause=N: Escape at the onset of every Nth trial */
	bool pause_due;
};

static void model_begin(struct responder *r, const struct responder_trial *t)
{
	struct model *m = (struct model *)r;
	observer_answer(m->obs, t->nchoices, t->truth, t->has_level, t->level, &m->ans);
	m->due_ns = 0;
	m->answered = false;
	m->pause_due = m->pause_at && ++m->ntrials % m->pause_at == 0;
}

static void model_onset(struct responder *r, int64_t t)
{
	struct model *m = (struct model *)r;
	m->due_ns = t + (int64_t)(m->ans.rt_ms * 1e6 + 0.5);
}

static int model_poll(struct responder *r, int64_t now, struct responder_event *ev)
{
	struct model *m = (struct model *)r;
	memset(ev, 0, sizeof *ev);
	ev->choice = -1;
	enum responder_kind k = next_sdl(ev->key, sizeof ev->key, &ev->sdl_ms);
	if (k == RESP_ESCAPE || k == RESP_QUIT) {
		ev->kind = k;
		ev->t_ns = now;
		return 1;
	}
	if (m->due_ns && m->pause_due) {
		m->pause_due = false;
		ev->kind = RESP_ESCAPE;
		ev->t_ns = now;
		return 1;
	}
	/* Other keys are not the model's answers; they are dropped here. */
	if (m->due_ns && !m->answered && now >= m->due_ns) {
		m->answered = true;
		ev->kind = RESP_KEY;
		ev->choice = m->ans.choice;
		snprintf(ev->key, sizeof ev->key, "model");
		ev->sdl_ms = 0;
		ev->t_ns = m->due_ns;
		return 1;
	}
	return k == RESP_KEY ? model_poll(r, now, ev) : 0;
}

static void model_destroy(struct responder *r)
{
	struct model *m = (struct model *)r;
	observer_destroy(m->obs);
	free(m);
}

static const struct responder_ops model_ops = {model_begin, model_onset, model_poll, model_destroy,
					       NULL};

struct responder *responder_model_new(const struct observer_spec *spec)
{
	struct model *m = xcalloc(1, sizeof *m);
	m->base.ops = &model_ops;
	m->base.is_model = true;
	m->base.rt_clock = "model";
	m->obs = observer_new(spec);
	m->pause_at = spec->pause_at;
	return &m->base;
}

void responder_destroy(struct responder *r)
{
	if (r)
		r->ops->destroy(r);
}
