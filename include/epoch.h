/* epoch — the named parts of a trial, in the order they are shown. Shared by the protocol (ms),
 * the timing plan (frames) and the trial loop. */
#ifndef TACHIST_EPOCH_H
#define TACHIST_EPOCH_H

enum epoch {
	EPOCH_FIXATION,
	EPOCH_BLANK,     /* blank between fixation and stimulus */
	EPOCH_STIMULUS,
	EPOCH_MASK,
	EPOCH_RESPONSE,  /* response window after the mask; 0 = wait without limit */
	EPOCH_FEEDBACK,
	EPOCH_ITI,       /* inter-trial interval */
	EPOCH_COUNT
};

/* Lower-case name used in files and output: "fixation", "blank", "stimulus", "mask", "response",
 * "feedback", "iti". */
const char *epoch_name(enum epoch e);

#endif
