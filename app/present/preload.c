/* preload — look-ahead texture queue (see preload.h).
 *
 * Slots: a fixed array of LOOKAHEAD entries, each FREE → QUEUED → (worker) DECODING → DECODED or
 * FAILED → (caller) TEXTURE, and back to FREE on release. One mutex guards the states; the worker
 * waits on a condition for queued work, the caller waits on another for a decode to finish. The
 * workers pick the queued slot with the smallest request sequence, so images decode in the order
 * they were asked for. */
#include "preload.h"

#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include <SDL.h>

#include "diag.h"
#include "display.h"

/* Decoding threads. One: decoding then never takes more than one core from the frame loop, and on a
 * busy two-core machine a second worker measured slower (tests/bench/bench_present.sh). The code
 * handles any number. */
#define PRELOAD_WORKERS 1

enum slot_state { SLOT_FREE, SLOT_QUEUED, SLOT_DECODING, SLOT_DECODED, SLOT_FAILED, SLOT_TEXTURE };

struct slot {
	enum slot_state st;
	uint64_t id, seq;
	char *path;
	int w, h;
	uint8_t *rgba;
	SDL_Texture *tex;
	char err[512];
};

struct preload {
	struct display *d;
	bool nearest;
	preload_decode_fn decode;
	void *ctx;
	struct slot *slots;
	size_t n;
	uint64_t seq;
	size_t ntex, peak;
	SDL_mutex *mu;
	SDL_cond *work, *done;
	SDL_Thread *threads[PRELOAD_WORKERS];
	bool quit;
};

static int worker(void *arg)
{
	struct preload *p = arg;
	SDL_LockMutex(p->mu);
	for (;;) {
		struct slot *next = NULL;
		for (size_t i = 0; i < p->n; i++)
			if (p->slots[i].st == SLOT_QUEUED && (!next || p->slots[i].seq < next->seq))
				next = &p->slots[i];
		if (p->quit)
			break;
		if (!next) {
			SDL_CondWait(p->work, p->mu);
			continue;
		}
		next->st = SLOT_DECODING;
		char *path = next->path;
		SDL_UnlockMutex(p->mu);
		int w = 0, h = 0;
		uint8_t *rgba = NULL;
		char err[512] = "";
		int rc = p->decode(path, &w, &h, &rgba, err, sizeof err, p->ctx);
		SDL_LockMutex(p->mu);
		if (rc == 0) {
			next->w = w;
			next->h = h;
			next->rgba = rgba;
			next->st = SLOT_DECODED;
		} else {
			snprintf(next->err, sizeof next->err, "%s", err[0] ? err : "cannot read the image");
			next->st = SLOT_FAILED;
		}
		SDL_CondBroadcast(p->done);
	}
	SDL_UnlockMutex(p->mu);
	return 0;
}

struct preload *preload_new(struct display *d, size_t lookahead, bool nearest,
			    preload_decode_fn decode, void *ctx)
{
	if (lookahead < 1)
		lookahead = 1;
	struct preload *p = xcalloc(1, sizeof *p);
	p->d = d;
	p->nearest = nearest;
	p->decode = decode;
	p->ctx = ctx;
	p->n = lookahead;
	p->slots = xcalloc(lookahead, sizeof *p->slots);
	p->mu = SDL_CreateMutex();
	p->work = SDL_CreateCond();
	p->done = SDL_CreateCond();
	bool ok = p->mu && p->work && p->done;
	for (int i = 0; ok && i < PRELOAD_WORKERS; i++)
		ok = (p->threads[i] = SDL_CreateThread(worker, "tachist-preload", p)) != NULL;
	if (!ok) {
		preload_destroy(p);
		return NULL;
	}
	return p;
}

static void slot_free(struct preload *p, struct slot *s)
{
	if (s->tex) {
		display_texture_free(s->tex);
		p->ntex--;
	}
	free(s->rgba);
	free(s->path);
	memset(s, 0, sizeof *s);
}

void preload_destroy(struct preload *p)
{
	if (!p)
		return;
	if (p->mu) {
		SDL_LockMutex(p->mu);
		p->quit = true;
		if (p->work)
			SDL_CondBroadcast(p->work);
		SDL_UnlockMutex(p->mu);
	}
	for (int i = 0; i < PRELOAD_WORKERS; i++)
		if (p->threads[i])
			SDL_WaitThread(p->threads[i], NULL);
	for (size_t i = 0; i < p->n; i++)
		slot_free(p, &p->slots[i]);
	free(p->slots);
	if (p->work) SDL_DestroyCond(p->work);
	if (p->done) SDL_DestroyCond(p->done);
	if (p->mu) SDL_DestroyMutex(p->mu);
	free(p);
}

/* The slot holding ID, or NULL. Mutex held. */
static struct slot *find(struct preload *p, uint64_t id)
{
	for (size_t i = 0; i < p->n; i++)
		if (p->slots[i].st != SLOT_FREE && p->slots[i].id == id)
			return &p->slots[i];
	return NULL;
}

int preload_request(struct preload *p, uint64_t id, const char *path)
{
	SDL_LockMutex(p->mu);
	int rc = -1;
	if (find(p, id)) {
		rc = 1;
	} else {
		for (size_t i = 0; i < p->n; i++)
			if (p->slots[i].st == SLOT_FREE) {
				struct slot *s = &p->slots[i];
				s->st = SLOT_QUEUED;
				s->id = id;
				s->seq = p->seq++;
				s->path = xstrdup(path);
				SDL_CondSignal(p->work);
				rc = 0;
				break;
			}
	}
	SDL_UnlockMutex(p->mu);
	return rc;
}

/* Turns a decoded slot into a texture. Called with the mutex held, on the caller's thread (the
 * worker never touches a DECODED slot). */
static void make_texture(struct preload *p, struct slot *s)
{
	s->tex = display_texture_rgba(p->d, s->w, s->h, s->rgba, p->nearest, s->err, sizeof s->err);
	free(s->rgba);
	s->rgba = NULL;
	if (!s->tex) {
		s->st = SLOT_FAILED;
		return;
	}
	s->st = SLOT_TEXTURE;
	if (++p->ntex > p->peak)
		p->peak = p->ntex;
}

void preload_ready(struct preload *p)
{
	SDL_LockMutex(p->mu);
	for (size_t i = 0; i < p->n; i++)
		if (p->slots[i].st == SLOT_DECODED)
			make_texture(p, &p->slots[i]);
	SDL_UnlockMutex(p->mu);
}

struct SDL_Texture *preload_take(struct preload *p, uint64_t id, char *err, size_t errlen)
{
	SDL_LockMutex(p->mu);
	struct slot *s = find(p, id);
	SDL_Texture *t = NULL;
	if (!s) {
		snprintf(err, errlen, "image %llu was not queued", (unsigned long long)id);
		goto out;
	}
	while (s->st == SLOT_QUEUED || s->st == SLOT_DECODING)
		SDL_CondWait(p->done, p->mu);
	if (s->st == SLOT_DECODED)
		make_texture(p, s);
	if (s->st == SLOT_FAILED)
		snprintf(err, errlen, "%s", s->err);
	else
		t = s->tex;
out:
	SDL_UnlockMutex(p->mu);
	return t;
}

void preload_release(struct preload *p, uint64_t id)
{
	SDL_LockMutex(p->mu);
	struct slot *s = find(p, id);
	/* A slot in the worker's hands is waited for; a queued one is simply dropped. */
	while (s && s->st == SLOT_DECODING)
		SDL_CondWait(p->done, p->mu);
	if (s)
		slot_free(p, s);
	SDL_UnlockMutex(p->mu);
}

size_t preload_free_slots(const struct preload *p)
{
	SDL_LockMutex(p->mu);
	size_t n = 0;
	for (size_t i = 0; i < p->n; i++)
		n += p->slots[i].st == SLOT_FREE;
	SDL_UnlockMutex(p->mu);
	return n;
}

size_t preload_peak_textures(const struct preload *p)
{
	return p->peak;
}
