/* preload — a bounded look-ahead queue that turns image files into textures before they are needed.
 *
 * The caller requests images by an id (for example the session trial number) as far ahead as the
 * queue has room (LOOKAHEAD slots). A worker thread decodes them to RGBA pixels in request order;
 * textures are created only on the caller's thread, in preload_ready() and preload_take(), which
 * the run layer calls in the inter-trial interval, never during stimulus epochs. A slot is held
 * from request until release, so memory is bounded by LOOKAHEAD images, whatever the list length.
 *
 * Decoding is the caller's function (the run layer passes one built on io/image.h), which keeps
 * file formats out of the presenter. */
#ifndef TACHIST_PRELOAD_H
#define TACHIST_PRELOAD_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

struct display;
struct SDL_Texture;
struct preload;

/* Decodes PATH to RGBA8 (*RGBA malloc'd, freed by the queue with free()). Returns 0 or -1 with a
 * sentence in ERR. Called on the worker thread; must be thread-safe. */
typedef int (*preload_decode_fn)(const char *path, int *w, int *h, uint8_t **rgba, char *err,
				 size_t errlen, void *ctx);

struct preload *preload_new(struct display *d, size_t lookahead, bool nearest,
			    preload_decode_fn decode, void *ctx);
void preload_destroy(struct preload *p);

/* Queues PATH under ID. Returns 0, 1 when ID is already queued, -1 when every slot is taken. */
int preload_request(struct preload *p, uint64_t id, const char *path);
/* Creates textures for every image already decoded (cheap when none). Caller's thread only. */
void preload_ready(struct preload *p);
/* The texture of ID, waiting for its decode when needed. NULL with ERR when it could not be read
 * (the slot stays held until released) or ID was never requested. */
struct SDL_Texture *preload_take(struct preload *p, uint64_t id, char *err, size_t errlen);
/* Frees ID's slot (texture and pixels). */
void preload_release(struct preload *p, uint64_t id);
/* Free slots now. */
size_t preload_free_slots(const struct preload *p);
/* Peak number of textures alive at once since creation (for tests). */
size_t preload_peak_textures(const struct preload *p);

#endif
