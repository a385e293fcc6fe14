/* trial — one finished trial as the trial loop hands it to the trial sink (and the store keeps
 * it). Times are CLOCK_MONOTONIC nanoseconds; reaction time is from the stimulus onset flip. */
#ifndef TACHIST_TRIAL_H
#define TACHIST_TRIAL_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

struct trial_record {
	int block;              /* plan block index */
	int block_trial;        /* 0-based within the block (repeats continue the count) */
	int trial;              /* 0-based within the session, in the order shown */
	int stim;               /* index into the stimulus list */
	int choice;             /* true category (index among the protocol's categories) */
	bool has_level;
	double level;           /* level shown */
	int staircase;          /* -1 when not adaptive */
	double level_requested; /* adaptive: the level the rule asked for before snapping */
	int repeat_of;          /* -1, or the trial index this one repeats after a timing fault */

	int response;           /* chosen category index, -1 when none */
	char response_key[24];  /* key name, "" when none */
	int correct;            /* 1, 0, or -1 when no response */
	bool timed_out;
	bool anticipation;      /* a choice key was pressed before the response could count */
	bool has_rt;
	double rt_ms;           /* from onset flip to the key's time (see rt_clock) */
	int64_t key_sdl_ms;     /* SDL's own millisecond stamp of the key event, 0 when none */
	const char *rt_clock;   /* what stamped the response: "frame", "kernel" or "model" (static) */

	int frames_planned;     /* stimulus frames planned */
	int frames_actual;      /* stimulus frames actually shown, from flip times */
	int dropped_frames;     /* frames lost anywhere in the trial */
	bool timing_ok;         /* exposure exact and no drop during stimulus epochs */
	int64_t onset_ns, offset_ns;   /* stimulus onset and offset flips */
	int64_t start_ns;       /* first flip of the trial */
	int64_t trigger_ns;     /* the onset trigger code's write returned; 0 = no trigger port */

	const int64_t *flips;   /* every flip time of the trial (borrowed; valid during the call) */
	size_t nflips;
};

#endif
