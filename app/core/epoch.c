/* epoch — names of a trial's epochs (see epoch.h). */
#include "epoch.h"

const char *epoch_name(enum epoch e)
{
	static const char *const names[EPOCH_COUNT] = {
		"fixation", "blank", "stimulus", "mask", "response", "feedback", "iti",
	};
	return (unsigned)e < EPOCH_COUNT ? names[e] : "?";
}
