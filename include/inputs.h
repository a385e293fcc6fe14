/* inputs — the protocol, the rig, the stimulus list and every image they name, loaded and checked
 * together, and the trial plan built from them: the one loader behind `tachist check`, `tachist
 * run` (and so the console's presentation child) and the console's set-up form, so that run
 * refuses exactly what check refuses, with the same messages.
 *
 * Every problem goes to the caller's diagnostics as FILE:LINE, and loading goes on past problems
 * so one pass finds them all: the list is read even when the protocol has errors (when it names
 * one), every image of the list is decoded (a truncated file is caught here, not at its trial),
 * the stimulus must fit the rig's screen, and the plan is built when protocol, rig and list are
 * usable. Implemented by app/io/inputs.c. */
#ifndef TACHIST_INPUTS_H
#define TACHIST_INPUTS_H

#include <stdbool.h>
#include <stdint.h>

#include "diag.h"
#include "plan.h"
#include "protocol.h"
#include "rig.h"
#include "stimlist.h"

struct inputs_options {
	const char *protocol_path;
	const char *rig_path;      /* the rig profile, or the name rig_text goes by in messages */
	const char *rig_text;      /* a rig's text already in memory (a resumed session's), or NULL */
	const char *missing_rig;   /* error to report when there is neither rig_path nor rig_text;
				    * NULL: say nothing (the caller has no rig yet) */
	uint64_t seed;             /* for the plan */
	size_t design_position;    /* the subject's position in the protocol's counterbalancing design
				    * (1, 2, ...); 0 = the protocol's own order and keys */
};

/* What was loaded. The have_* flags say which parts are usable; the structs are valid (and
 * released by inputs_clear) whatever they say. */
struct inputs {
	struct protocol proto;
	struct rig rig;
	struct stimlist list;
	struct plan plan;
	bool have_proto, have_rig, have_list, have_plan;
	char *block_order, *key_mapping;   /* with a design position: what it chose (counterbal.h) */
};

/* Loads and checks everything O names into IN (which the caller releases with inputs_clear, also
 * after a failure). Returns 0 when the session can run (a plan was built and no error was
 * found; warnings allowed), -1 otherwise. */
int inputs_load(const struct inputs_options *o, struct inputs *in, struct diag_list *d);
/* Releases what inputs_load filled. IN may be NULL. */
void inputs_clear(struct inputs *in);

#endif
