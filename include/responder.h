/* responder — where answers come from: the keyboard or the model observer, behind one vtable.
 *
 * The trial loop calls begin() before a trial's first flip, onset() right after the stimulus onset
 * flip, and poll() after every flip until it returns 0 (so the SDL event queue is drained every
 * frame and no key is lost). Each event carries the time it counts from: for the SDL keyboard the
 * clock's now at the poll (monotonic; the SDL millisecond stamp is kept too), for the evdev
 * keyboard the kernel's time of the key-down, for the model the onset plus its drawn reaction
 * time. Both implementations also report Escape and a window-close
 * request, so the observer can pause a model-observer run too. */
#ifndef TACHIST_RESPONDER_H
#define TACHIST_RESPONDER_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

struct observer_spec;

enum responder_kind {
	RESP_NONE,
	RESP_KEY,       /* a key went down; choice >= 0 when it is one of the choice keys */
	RESP_ESCAPE,    /* the observer asked to pause */
	RESP_QUIT,      /* the window was closed */
	RESP_LOST       /* the response device vanished or failed (responder_error says why) */
};

struct responder_event {
	enum responder_kind kind;
	int choice;             /* index among the choices, -1 for another key */
	char key[24];           /* lower-case SDL key name, "model" for the model observer */
	int64_t t_ns;           /* when the answer counts from (see above) */
	int64_t sdl_ms;         /* SDL's timestamp of the event, 0 for the model */
};

struct responder_trial {
	int nchoices;
	int truth;              /* true category index */
	bool has_level;
	double level;
};

struct responder;
struct responder_ops {
	void (*begin)(struct responder *r, const struct responder_trial *t);
	void (*onset)(struct responder *r, int64_t onset_ns);
	/* Returns 1 and fills EV when an event is pending at NOW_NS, else 0. */
	int (*poll)(struct responder *r, int64_t now_ns, struct responder_event *ev);
	void (*destroy)(struct responder *r);
	const char *(*error)(const struct responder *r);   /* may be NULL: never fails */
};
struct responder {
	const struct responder_ops *ops;
	bool is_model;
	const char *rt_clock;   /* what stamps its answers: "frame", "kernel" or "model" */
};

/* Keyboard with the choice keys KEYS[0..N) (lower-case SDL key names, e.g. "f", "space"). */
struct responder *responder_keyboard_new(const char *const *keys, int n);
/* Keyboard whose answers come only from the input device SRC (kernel time stamps, rt_clock
 * "kernel"); takes ownership of SRC (closed also when NULL is returned). SDL's key events are drained but only Escape and a window
 * close count: other keyboards belong to the experimenter. Keys SRC queued before begin() are
 * dropped there (they were pressed before the trial). */
struct evsrc;
struct responder *responder_evdev_new(const char *const *keys, int n, struct evsrc *src);
/* Why a RESP_LOST event came ("" when none did). */
const char *responder_error(const struct responder *r);
/* The model observer of SPEC. */
struct responder *responder_model_new(const struct observer_spec *spec);
void responder_destroy(struct responder *r);

static inline void responder_begin(struct responder *r, const struct responder_trial *t) { r->ops->begin(r, t); }
static inline void responder_onset(struct responder *r, int64_t t) { r->ops->onset(r, t); }
static inline int responder_poll(struct responder *r, int64_t now, struct responder_event *ev) { return r->ops->poll(r, now, ev); }

#endif
