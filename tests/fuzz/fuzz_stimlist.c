/* fuzz_stimlist — libFuzzer target: any bytes as a stimulus list, checked against a fixed protocol
 * and without one, then planned. Nothing may crash, leak or read out of bounds. */
#include <stddef.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "plan.h"
#include "protocol.h"
#include "rig.h"
#include "stimlist.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

static const char *proto_text =
	"[experiment]\nlist = s.csv\n[categories]\nring = f\nbar = j\nx = k\n[timing]\n"
	"stimulus_ms = 100\n[display]\nsize_deg = 3\n"
	"[block a]\nselect = level=0,1 & note=q\nlongest_streak = 2\n[block b]\norder = fixed\n";

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
	struct diag_list d;
	diag_init(&d);
	struct protocol p;
	struct rig r;
	protocol_parse("p.ini", proto_text, &p, &d);
	rig_parse("r.ini", "[screen]\nwidth_cm=53\nheight_cm=30\nwidth_px=1920\nheight_px=1080\n"
		  "distance_cm=57\nrefresh_hz=60\n", &r, &d);
	struct stimlist l;
	if (stimlist_parse("s.csv", (const char *)data, size, &p, &l, &d) == 0) {
		struct plan pl;
		if (plan_build(&p, &l, &r, 1, &pl, &d) == 0)
			plan_clear(&pl);
	}
	stimlist_clear(&l);
	stimlist_parse("s.csv", (const char *)data, size, NULL, &l, &d);
	stimlist_clear(&l);
	protocol_clear(&p);
	rig_clear(&r);
	diag_clear(&d);
	return 0;
}
