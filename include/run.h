/* run — a session from start to end: loads protocol, rig and list, builds the plan, opens the store,
 * runs the blocks through the presenter with the chosen responder, stores every trial, and reports
 * progress to whoever watches (the `run` command's line printer or the console).
 *
 * The run layer owns this header; the console and `run`/`demo` commands use it. */
#ifndef TACHIST_RUN_H
#define TACHIST_RUN_H

#include <stdbool.h>
#include <stdint.h>

struct run_options {
	const char *protocol_path;
	const char *subject;
	const char *db_path;         /* default "tachist.db" */
	const char *rig_path;        /* resolved by the caller */
	const char *observer;        /* "keyboard" (default) or "model:KEY=VALUE,..." */
	bool headless;               /* virtual display clock, offscreen/dummy SDL driver */
	bool pace;                   /* headless: keep real time */
	double inject_drops;         /* headless: rate of dropped frames to inject (seeded) */
	bool window;                 /* windowed instead of full screen */
	bool has_seed;
	uint64_t seed;
	const char *resume_id;       /* continue this session */
};

#endif
