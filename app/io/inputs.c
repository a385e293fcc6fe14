/* inputs — the one loader of protocol + rig + stimulus list + images, and the plan (see
 * include/inputs.h for the contract). Callers: app/cmd/cmd_check.c, app/run/run.c (run_open, for
 * `run`, `demo` and the console's presentation child) and app/console/setup.c.
 *
 * The images are decoded in path order, so a file the list names on several rows is opened once;
 * their sizes (per list row, 0 when unreadable) serve the check that the stimulus fits the
 * screen and then are dropped. */
#include "inputs.h"
#include "rig_lum.h"

#include <errno.h>
#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <unistd.h>

#include "counterbal.h"
#include "image.h"
#include "protocol_file.h"
#include "rig_file.h"
#include "stimlist_file.h"

/* Rows sorted by path, so each file is opened once however often the list names it. */
struct by_path {
	const char *path;
	size_t i;
};

static int cmp_path(const void *a, const void *b)
{
	const struct by_path *x = a, *y = b;
	int c = strcmp(x->path, y->path);
	return c ? c : (x->i > y->i) - (x->i < y->i);
}

/* Decodes every image of L (refusing from its header one wider or taller than MAX_SIDE, 0: the
 * default limit), reporting those that cannot be; W and H get each row's size (0 when not
 * decoded). */
static void probe_images(const struct stimlist *l, long max_side, int *w, int *h,
			 struct diag_list *d)
{
	struct by_path *sorted = xmalloc((l->n ? l->n : 1) * sizeof *sorted);
	for (size_t i = 0; i < l->n; i++) {
		sorted[i].path = l->items[i].path;
		sorted[i].i = i;
	}
	qsort(sorted, l->n, sizeof *sorted, cmp_path);
	for (size_t k = 0; k < l->n; k++) {
		size_t i = sorted[k].i;
		const struct stim *s = &l->items[i];
		if (k > 0 && !strcmp(s->path, sorted[k - 1].path)) {
			w[i] = w[sorted[k - 1].i];
			h[i] = h[sorted[k - 1].i];
			continue;
		}
		struct image_info info;
		char err[512];
		if (image_probe_max(s->path, max_side, &info, err, sizeof err)) {
			diag_add(d, DIAG_ERROR, l->path, s->line, "image '%s': %s", s->image, err);
			continue;
		}
		w[i] = info.width;
		h[i] = info.height;
	}
	free(sorted);
}

/* The stimulus is drawn with its longer side STIM_PX: an image that then overflows the screen is
 * an error (reported once, at size_deg), one drawn above its own size a warning. */
static void check_fit(const struct protocol *p, const struct rig *r, const struct stimlist *l,
		      const int *w, const int *h, int stim_px, struct diag_list *d)
{
	size_t over = 0, up = 0;
	double worst_up = 1;
	const char *over_img = NULL, *up_img = NULL;
	int over_w = 0, over_h = 0;
	for (size_t i = 0; i < l->n; i++) {
		if (!w[i] || !h[i])
			continue;
		int side = w[i] > h[i] ? w[i] : h[i];
		double sw = (double)stim_px * w[i] / side, sh = (double)stim_px * h[i] / side;
		if (lround(sw) > r->width_px || lround(sh) > r->height_px) {
			if (!over++) {
				over_img = l->items[i].image;
				over_w = (int)lround(sw);
				over_h = (int)lround(sh);
			}
		}
		if (stim_px > side) {
			up++;
			if ((double)stim_px / side > worst_up) {
				worst_up = (double)stim_px / side;
				up_img = l->items[i].image;
			}
		}
	}
	if (over)
		diag_add(d, DIAG_ERROR, p->path, p->size_line, "size_deg = %g is %d px: %zu image%s "
			 "do%s not fit the %dx%d px screen (for example '%s' at %dx%d px)", p->size_deg,
			 stim_px, over, over == 1 ? "" : "s", over == 1 ? "es" : "", r->width_px,
			 r->height_px, over_img, over_w, over_h);
	if (up)
		diag_add(d, DIAG_WARNING, p->path, p->size_line, "size_deg = %g is %d px: %zu image%s "
			 "must be scaled up beyond native size (up to %.2fx, for example '%s')",
			 p->size_deg, stim_px, up, up == 1 ? "" : "s", worst_up, up_img);
}

/* The list the protocol names, and its images (and the mask image), under the rig's size limit
 * when the rig is loaded. */
static void load_list(struct inputs *in, int **w, int **h, struct diag_list *d)
{
	const struct protocol *p = &in->proto;
	if (!p->stimuli)
		return;
	if (access(p->stimuli, R_OK) != 0) {
		diag_add(d, DIAG_ERROR, p->path, p->stimuli_line, "list: cannot read %s: %s",
			 p->stimuli, strerror(errno));
		return;
	}
	in->have_list = stimlist_load(p->stimuli, p->nchoices ? p : NULL, &in->list, d) == 0;
	size_t n = in->list.n ? in->list.n : 1;
	*w = xcalloc(n, sizeof **w);
	*h = xcalloc(n, sizeof **h);
	long max_side = in->have_rig ? in->rig.max_image_side : 0;
	probe_images(&in->list, max_side, *w, *h, d);
	if (p->mask == MASK_IMAGE && p->mask_image) {
		struct image_info info;
		char err[512];
		if (image_probe_max(p->mask_image, max_side, &info, err, sizeof err))
			diag_add(d, DIAG_ERROR, p->path, p->mask_image_line, "mask_image: %s", err);
	}
}

int inputs_load(const struct inputs_options *o, struct inputs *in, struct diag_list *d)
{
	memset(in, 0, sizeof *in);
	size_t errors_before = diag_count(d, DIAG_ERROR);
	in->have_proto = protocol_load(o->protocol_path, &in->proto, d) == 0;
	if (in->have_proto && o->design_position > 0)
		counterbal_apply(&in->proto, o->design_position, &in->block_order, &in->key_mapping);
	if (o->rig_text)
		in->have_rig = rig_parse(o->rig_path ? o->rig_path : "(stored rig)", o->rig_text,
					 &in->rig, d) == 0;
	else if (o->rig_path)
		in->have_rig = rig_load(o->rig_path, &in->rig, d) == 0;
	else if (o->missing_rig)
		diag_add(d, DIAG_ERROR, NULL, 0, "%s", o->missing_rig);
	/* The luminance a protocol asks for comes through the rig's calibration. */
	if (in->have_proto && in->have_rig)
		rig_lum_apply(&in->proto, &in->rig, NULL, d);
	int *w = NULL, *h = NULL;
	load_list(in, &w, &h, d);
	if (in->have_proto && in->have_rig && in->have_list) {
		in->have_plan = plan_build(&in->proto, &in->list, &in->rig, o->seed, &in->plan, d) == 0;
		if (in->have_plan)
			check_fit(&in->proto, &in->rig, &in->list, w, h, in->plan.stim_px, d);
	} else if (in->have_proto && in->have_list) {
		plan_check_blocks(&in->proto, &in->list, d);
	}
	free(w);
	free(h);
	return in->have_plan && diag_count(d, DIAG_ERROR) == errors_before ? 0 : -1;
}

void inputs_clear(struct inputs *in)
{
	if (!in)
		return;
	plan_clear(&in->plan);
	stimlist_clear(&in->list);
	rig_clear(&in->rig);
	protocol_clear(&in->proto);
	free(in->block_order);
	free(in->key_mapping);
	memset(in, 0, sizeof *in);
}
