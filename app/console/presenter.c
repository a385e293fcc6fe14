/* presenter — runs a session's presentation in a child process and relays it to the console.
 *
 * Why a child: the observer's display, the trial loop and the store writes must never wait for
 * the experimenter's terminal, and a crash on that side must never leave the terminal raw. The
 * child (fork, its own process group so the terminal's Ctrl-C reaches only the console) calls the
 * run layer (run.h) step by step. Its progress callback, which the run layer calls only outside
 * stimulus epochs, copies the snapshot into a fixed-size message and writes it to a non-blocking
 * pipe: when the pipe is full the snapshot is dropped, never waited for. The same callback reads
 * the console's commands (pause, resume, end) from a second non-blocking pipe. The child's stdout
 * and stderr go to a third pipe whose last lines the console keeps for error messages.
 *
 * Messages are plain structs of at most PIPE_BUF bytes, so each write is atomic. The console
 * drains the pipes about ten times a second (console_pres_poll), and notices the child's end with
 * waitpid: a child killed by a signal is reported as a crash and its session is marked
 * interrupted in the store, ready to be resumed. */
#include "console.h"

#include <errno.h>
#include <fcntl.h>
#include <limits.h>
#include <math.h>
#include <poll.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/types.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>

#include "diag.h"
#include "run.h"
#include "store.h"

enum msg_type {
	MSG_OPENED = 1, MSG_BLOCK, MSG_SNAP, MSG_SUMMARY, MSG_DIAG, MSG_ERROR, MSG_CLOSED
};
enum cmd_type { CMD_RUN = 1, CMD_SKIP, CMD_PAUSE, CMD_RESUME, CMD_END, CMD_CLOSE, CMD_GO_ON,
		CMD_SKIP_REST };

struct pres_msg {
	int type;
	union {
		struct {
			char id[37];
			char timing_mode[16];
			uint64_t seed;
			int nblocks;
		} opened;
		struct {
			int index;
			struct console_block b;
		} block;
		struct console_snap snap;
		struct console_summary sum;
		char text[1024];   /* MSG_DIAG, MSG_ERROR, MSG_CLOSED (error or "") */
	} u;
};

struct pres_cmd {
	int type;
	int arg;
};

_Static_assert(sizeof(struct pres_msg) <= PIPE_BUF, "a message must fit one atomic pipe write");

struct console_pres {
	pid_t pid;
	int cmd_fd, ev_fd, log_fd;
	struct console_pres_state st;
	char partial[512];        /* an unfinished log line */
	size_t npartial;
	char *db_path;
	struct run_options opt;   /* what the session was opened with; strings are copies */
};

/* ---------------- the child ---------------- */

struct child_ctx {
	int cmd_fd, ev_fd;
	bool paused, end, close;
	enum run_cmd answer;      /* GO_ON or SKIP for the observer's pause, sent once */
	long dropped;             /* snapshots that found the pipe full */
};

/* Writes a message, waiting for room: used only outside blocks (open, block list, summaries). */
static int send_wait(int fd, const struct pres_msg *m)
{
	for (;;) {
		ssize_t n = write(fd, m, sizeof *m);
		if (n == (ssize_t)sizeof *m)
			return 0;
		if (n < 0 && errno == EINTR)
			continue;
		if (n < 0 && errno == EAGAIN) {
			struct pollfd p = {.fd = fd, .events = POLLOUT};
			poll(&p, 1, 200);
			continue;
		}
		return -1;   /* EPIPE: the console is gone */
	}
}

static void send_text(int fd, int type, const char *text)
{
	struct pres_msg m;
	memset(&m, 0, sizeof m);
	m.type = type;
	snprintf(m.u.text, sizeof m.u.text, "%s", text ? text : "");
	send_wait(fd, &m);
}

static void take_cmd(struct child_ctx *x, const struct pres_cmd *k)
{
	switch (k->type) {
	case CMD_PAUSE: x->paused = true; break;
	case CMD_RESUME: x->paused = false; break;
	case CMD_END: x->end = true; break;
	case CMD_CLOSE: x->end = x->close = true; break;
	case CMD_GO_ON: x->answer = RUN_CMD_GO_ON; break;
	case CMD_SKIP_REST: x->answer = RUN_CMD_SKIP; break;
	default: break;   /* RUN and SKIP make no sense inside a block; ignored */
	}
}

/* Reads every command waiting, without blocking. Returns -1 when the console has gone. */
static int drain_cmds(struct child_ctx *x)
{
	struct pres_cmd k;
	for (;;) {
		ssize_t n = read(x->cmd_fd, &k, sizeof k);
		if (n == (ssize_t)sizeof k) {
			take_cmd(x, &k);
			continue;
		}
		if (n == 0)
			return -1;
		return 0;   /* EAGAIN (nothing more) or a short read, which pipes of 8 bytes never do */
	}
}

static void copy_str(char *dst, size_t len, const char *src)
{
	snprintf(dst, len, "%s", src ? src : "");
}

/* The run layer's progress callback: never blocks, returns at once. */
static enum run_cmd child_progress(const struct run_snapshot *s, void *ctx)
{
	struct child_ctx *x = ctx;
	struct pres_msg m;
	memset(&m, 0, sizeof m);
	m.type = MSG_SNAP;
	struct console_snap *o = &m.u.snap;
	o->state = (int)s->state;
	o->paused_by_observer = s->paused_by_observer;
	o->block = s->block;
	copy_str(o->block_name, sizeof o->block_name, s->block_name);
	o->practice = s->practice;
	o->trial_n = s->trial_n;
	o->trial_total = s->trial_total;
	o->session_done = s->session_done;
	o->session_total = s->session_total;
	o->elapsed_s = s->elapsed_s;
	o->remaining_s = s->remaining_s;
	o->answered = s->answered;
	o->correct = s->correct;
	o->accuracy = s->accuracy;
	o->median_rt_ms = s->median_rt_ms;
	o->refresh_hz = s->refresh_hz;
	o->refresh_nominal_hz = s->refresh_nominal_hz;
	o->dropped_frames = s->dropped_frames;
	o->flagged_trials = s->flagged_trials;
	o->nlast = s->nlast < RUN_LAST_TRIALS ? s->nlast : RUN_LAST_TRIALS;
	memcpy(o->last, s->last, o->nlast * sizeof s->last[0]);
	copy_str(o->timing_mode, sizeof o->timing_mode, s->timing_mode);
	o->snaps_dropped = x->dropped;
	ssize_t n = write(x->ev_fd, &m, sizeof m);
	if (n < 0 && errno == EAGAIN)
		x->dropped++;
	else if (n < 0 && errno == EPIPE)
		x->end = true;   /* the console is gone: end cleanly, data kept */
	if (drain_cmds(x) != 0)
		x->end = true;
	if (x->end)
		return RUN_CMD_END;
	if (x->answer != RUN_CMD_CONTINUE) {
		enum run_cmd a = x->answer;
		x->answer = RUN_CMD_CONTINUE;
		return a;
	}
	return x->paused ? RUN_CMD_PAUSE : RUN_CMD_CONTINUE;
}

static void send_blocks(int fd, struct run_session *s)
{
	size_t n = run_block_count(s);
	for (size_t i = 0; i < n; i++) {
		struct run_block_info bi;
		if (run_block_info(s, i, &bi) != 0)
			continue;
		struct pres_msg m;
		memset(&m, 0, sizeof m);
		m.type = MSG_BLOCK;
		m.u.block.index = (int)i;
		struct console_block *b = &m.u.block.b;
		copy_str(b->name, sizeof b->name, bi.name);
		b->ntrials = bi.ntrials;
		b->stored = bi.stored;
		b->practice = bi.practice;
		b->adaptive = bi.adaptive;
		b->trial_seconds = bi.trial_seconds;
		b->est_seconds = bi.est_seconds;
		b->runs = bi.runs;
		send_wait(fd, &m);
	}
}

static void send_summary(int fd, const struct run_block_summary *s, enum run_block_result r,
			 const char *err)
{
	struct pres_msg m;
	memset(&m, 0, sizeof m);
	m.type = MSG_SUMMARY;
	struct console_summary *o = &m.u.sum;
	o->block = s->block;
	copy_str(o->name, sizeof o->name, s->name);
	o->trials = s->trials;
	o->answered = s->answered;
	o->correct = s->correct;
	o->timeouts = s->timeouts;
	o->faults = s->faults;
	o->repeats = s->repeats;
	o->dropped_frames = s->dropped_frames;
	o->accuracy = s->accuracy;
	o->median_rt_ms = s->median_rt_ms;
	o->refresh_hz = s->refresh.rate_hz;
	o->refresh_nominal_hz = s->refresh.nominal_hz;
	o->refresh_mismatch = s->refresh.mismatch;
	o->result = (int)r;
	copy_str(o->error, sizeof o->error, err);
	send_wait(fd, &m);
}

static void child_main(int cmd_fd, int ev_fd, const struct run_options *opt)
{
	struct child_ctx x = {.cmd_fd = cmd_fd, .ev_fd = ev_fd};
	struct diag_list d;
	diag_init(&d);
	char *err = NULL;
	struct run_session *s = run_open(opt, &d, &err);
	char line[1024];
	for (size_t i = 0; i < d.n; i++) {
		diag_format(&d.v[i], line, sizeof line);
		send_text(ev_fd, MSG_DIAG, line);
	}
	diag_clear(&d);
	if (!s) {
		send_text(ev_fd, MSG_ERROR, err ? err : "the session could not be opened");
		free(err);
		_exit(1);
	}
	struct pres_msg m;
	memset(&m, 0, sizeof m);
	m.type = MSG_OPENED;
	copy_str(m.u.opened.id, sizeof m.u.opened.id, run_session_id(s));
	copy_str(m.u.opened.timing_mode, sizeof m.u.opened.timing_mode, run_timing_mode(s));
	m.u.opened.seed = run_seed(s);
	m.u.opened.nblocks = (int)run_block_count(s);
	send_wait(ev_fd, &m);
	send_blocks(ev_fd, s);

	/* Between blocks the child waits for the console's next command. */
	int flags = fcntl(cmd_fd, F_GETFL);
	while (!x.close) {
		struct pollfd p = {.fd = cmd_fd, .events = POLLIN};
		if (poll(&p, 1, 500) < 0 && errno != EINTR)
			break;
		if (run_stop_requested())
			break;
		struct pres_cmd k;
		ssize_t n = read(cmd_fd, &k, sizeof k);
		if (n == 0)
			break;    /* the console is gone */
		if (n != (ssize_t)sizeof k)
			continue;
		if (k.type == CMD_RUN && k.arg >= 0 && (size_t)k.arg < run_block_count(s)) {
			x.paused = x.end = false;
			x.answer = RUN_CMD_CONTINUE;
			struct run_block_summary sum;
			memset(&sum, 0, sizeof sum);
			free(err);
			err = NULL;
			enum run_block_result r = run_block(s, (size_t)k.arg, child_progress, &x, &sum,
							    &err);
			/* Blocks first: the console acts on the summary with the counts current. */
			send_blocks(ev_fd, s);
			send_summary(ev_fd, &sum, r, err);
			if (r == RUN_BLOCK_ENDED || r == RUN_BLOCK_INTERRUPTED || r == RUN_BLOCK_FAILED)
				break;
		} else if (k.type == CMD_SKIP && k.arg >= 0 &&
			   (size_t)k.arg < run_block_count(s)) {
			free(err);
			err = NULL;
			if (run_block_skip(s, (size_t)k.arg, &err) != 0)
				send_text(ev_fd, MSG_ERROR, err);
			send_blocks(ev_fd, s);
		} else {
			take_cmd(&x, &k);
		}
	}
	(void)flags;
	free(err);
	err = NULL;
	int rc = run_close(s, &err);
	send_text(ev_fd, MSG_CLOSED, rc == 0 ? "" : err ? err : "closing the session failed");
	free(err);
	_exit(rc == 0 ? 0 : 1);
}

/* ---------------- the console side ---------------- */

static void set_nonblock(int fd)
{
	fcntl(fd, F_SETFL, fcntl(fd, F_GETFL) | O_NONBLOCK);
	fcntl(fd, F_SETFD, FD_CLOEXEC);
}

struct console_pres *console_pres_start(const struct run_options *opt, char *err, size_t errlen)
{
	int cmdp[2], evp[2], logp[2];
	if (pipe(cmdp) != 0) {
		snprintf(err, errlen, "cannot make a pipe: %s", strerror(errno));
		return NULL;
	}
	if (pipe(evp) != 0) {
		close(cmdp[0]);
		close(cmdp[1]);
		snprintf(err, errlen, "cannot make a pipe: %s", strerror(errno));
		return NULL;
	}
	if (pipe(logp) != 0) {
		close(cmdp[0]);
		close(cmdp[1]);
		close(evp[0]);
		close(evp[1]);
		snprintf(err, errlen, "cannot make a pipe: %s", strerror(errno));
		return NULL;
	}
	fflush(NULL);
	pid_t pid = fork();
	if (pid < 0) {
		snprintf(err, errlen, "cannot start the presentation: %s", strerror(errno));
		int fds[] = {cmdp[0], cmdp[1], evp[0], evp[1], logp[0], logp[1]};
		for (int i = 0; i < 6; i++)
			close(fds[i]);
		return NULL;
	}
	if (pid == 0) {
		/* Child: its own process group (the terminal's Ctrl-C is the console's to handle),
		 * default signal dispositions (run_open installs its own), no terminal at all. */
		setpgid(0, 0);
		int sigs[] = {SIGINT, SIGTERM, SIGHUP, SIGSEGV, SIGBUS, SIGFPE, SIGILL, SIGABRT,
			      SIGWINCH, SIGTSTP};
		for (size_t i = 0; i < sizeof sigs / sizeof sigs[0]; i++)
			signal(sigs[i], SIG_DFL);
		signal(SIGPIPE, SIG_IGN);
		signal(SIGTTOU, SIG_IGN);
		close(cmdp[1]);
		close(evp[0]);
		close(logp[0]);
		int devnull = open("/dev/null", O_RDONLY);
		if (devnull >= 0) {
			dup2(devnull, STDIN_FILENO);
			close(devnull);
		}
		dup2(logp[1], STDOUT_FILENO);
		dup2(logp[1], STDERR_FILENO);
		close(logp[1]);
		set_nonblock(cmdp[0]);
		set_nonblock(evp[1]);
		child_main(cmdp[0], evp[1], opt);
		_exit(0);
	}
	setpgid(pid, pid);   /* both sides set it, whichever runs first */
	close(cmdp[0]);
	close(evp[1]);
	close(logp[1]);
	set_nonblock(cmdp[1]);
	set_nonblock(evp[0]);
	set_nonblock(logp[0]);
	struct console_pres *p = xcalloc(1, sizeof *p);
	p->pid = pid;
	p->cmd_fd = cmdp[1];
	p->ev_fd = evp[0];
	p->log_fd = logp[0];
	p->st.phase = CONSOLE_PRES_OPENING;
	p->st.seed = opt->has_seed ? opt->seed : 0;
	p->db_path = xstrdup(opt->db_path ? opt->db_path : "tachist.db");
	p->opt = *opt;
	const char **strs[] = {&p->opt.protocol_path, &p->opt.subject, &p->opt.db_path,
			       &p->opt.rig_path, &p->opt.observer, &p->opt.resume_id,
			       &p->opt.screenshot_dir};
	for (size_t i = 0; i < sizeof strs / sizeof strs[0]; i++)
		if (*strs[i])
			*strs[i] = xstrdup(*strs[i]);
	return p;
}

struct console_pres *console_pres_reopen_accepting(const struct console_pres *p, char *err,
						   size_t errlen)
{
	struct run_options o = p->opt;
	o.accept_rig_mismatch = true;
	return console_pres_start(&o, err, errlen);
}

static void add_line(char (*ring)[200], int *n, int cap, const char *text)
{
	if (*n == cap) {
		memmove(ring[0], ring[1], (size_t)(cap - 1) * sizeof ring[0]);
		(*n)--;
	}
	size_t len = strnlen(text, sizeof ring[0] - 1);
	memcpy(ring[*n], text, len);
	ring[*n][len] = '\0';
	(*n)++;
}

static void take_msg(struct console_pres *p, const struct pres_msg *m)
{
	struct console_pres_state *st = &p->st;
	switch (m->type) {
	case MSG_OPENED:
		memcpy(st->session_id, m->u.opened.id, sizeof st->session_id);
		memcpy(st->timing_mode, m->u.opened.timing_mode, sizeof st->timing_mode);
		st->seed = m->u.opened.seed;
		st->nblocks = m->u.opened.nblocks > 0 ? (size_t)m->u.opened.nblocks : 0;
		if (st->nblocks > CONSOLE_MAX_BLOCKS)
			st->nblocks = CONSOLE_MAX_BLOCKS;
		st->phase = CONSOLE_PRES_IDLE;
		break;
	case MSG_BLOCK:
		if (m->u.block.index >= 0 && m->u.block.index < CONSOLE_MAX_BLOCKS)
			st->blocks[m->u.block.index] = m->u.block.b;
		break;
	case MSG_SNAP:
		st->snap = m->u.snap;
		st->has_snap = true;
		st->nsnaps++;
		break;
	case MSG_SUMMARY:
		/* The block's last snapshot holds its run time and trial count: measured durations
		 * then replace planned ones in every estimate (estimate_per_trial). */
		if (st->has_snap && st->snap.block == m->u.sum.block && st->snap.trial_n > 0 &&
		    st->snap.elapsed_s > 0) {
			st->measured_s += st->snap.elapsed_s;
			st->measured_trials += st->snap.trial_n;
		}
		st->summary = m->u.sum;
		st->has_summary = true;
		st->nsummaries++;
		if (m->u.sum.block >= 0 && m->u.sum.block < CONSOLE_MAX_BLOCKS) {
			st->block_result[m->u.sum.block] = m->u.sum;
			st->block_has_result[m->u.sum.block] = true;
		}
		if (st->phase == CONSOLE_PRES_RUNNING)
			st->phase = CONSOLE_PRES_IDLE;
		break;
	case MSG_DIAG:
		add_line(st->diags, &st->ndiags, CONSOLE_PRES_LINES, m->u.text);
		break;
	case MSG_ERROR:
		snprintf(st->error, sizeof st->error, "%s", m->u.text);
		/* run_open's refusal of a display that does not match the rig names the option. */
		st->rig_mismatch = st->phase == CONSOLE_PRES_OPENING &&
				   strstr(m->u.text, "--accept-rig-mismatch") != NULL;
		break;
	case MSG_CLOSED:
		if (m->u.text[0])
			snprintf(st->error, sizeof st->error, "%s", m->u.text);
		st->closed_msg = true;
		break;
	default:
		break;
	}
}

static void drain_log(struct console_pres *p)
{
	char buf[1024];
	for (;;) {
		ssize_t n = read(p->log_fd, buf, sizeof buf);
		if (n <= 0)
			return;
		for (ssize_t i = 0; i < n; i++) {
			char ch = buf[i];
			if (ch == '\n' || p->npartial == sizeof p->partial - 1) {
				p->partial[p->npartial] = '\0';
				if (p->npartial)
					add_line(p->st.log, &p->st.nlog, CONSOLE_PRES_LINES, p->partial);
				p->npartial = 0;
				if (ch == '\n')
					continue;
			}
			p->partial[p->npartial++] = ch;
		}
	}
}

/* Marks the session interrupted after the child died without closing it. */
static void mark_interrupted(struct console_pres *p)
{
	if (!p->st.session_id[0])
		return;
	struct store *s = NULL;
	char *err = NULL;
	if (store_open(p->db_path, &s, &err) == 0) {
		struct store_session ss;
		memset(&ss, 0, sizeof ss);
		if (store_session_get(s, p->st.session_id, &ss, NULL) == 0 &&
		    ss.status == STORE_RUNNING) {
			store_event(s, p->st.session_id, "note",
				    "presentation process ended unexpectedly", NULL);
			store_session_end(s, p->st.session_id, STORE_INTERRUPTED, NULL);
		}
		store_session_clear(&ss);
		store_close(s);
	}
	free(err);
}

bool console_pres_poll(struct console_pres *p)
{
	if (!p)
		return false;
	bool changed = false;
	struct pres_msg m;
	for (;;) {
		ssize_t n = read(p->ev_fd, &m, sizeof m);
		if (n == (ssize_t)sizeof m) {
			take_msg(p, &m);
			changed = true;
			continue;
		}
		break;
	}
	int before = p->st.nlog;
	drain_log(p);
	if (p->st.nlog != before)
		changed = true;
	if (p->pid > 0) {
		int status;
		pid_t r = waitpid(p->pid, &status, WNOHANG);
		if (r == p->pid) {
			/* Read what the child wrote last before it went. */
			while (read(p->ev_fd, &m, sizeof m) == (ssize_t)sizeof m)
				take_msg(p, &m);
			drain_log(p);
			p->pid = -1;
			changed = true;
			if (WIFSIGNALED(status)) {
				p->st.term_signal = WTERMSIG(status);
				p->st.phase = CONSOLE_PRES_CRASHED;
				mark_interrupted(p);
			} else {
				p->st.exit_code = WEXITSTATUS(status);
				/* Closed cleanly; or refused with a reason; or gone without one
				 * (a sanitizer's fault report exits instead of dying of the
				 * signal): the last is a crash like any other. */
				p->st.phase = p->st.closed_msg ? CONSOLE_PRES_CLOSED
					    : p->st.error[0] ? CONSOLE_PRES_FAILED
							     : CONSOLE_PRES_CRASHED;
				if (!p->st.closed_msg)
					mark_interrupted(p);
			}
		}
	}
	return changed;
}

const struct console_pres_state *console_pres_state(const struct console_pres *p)
{
	return &p->st;
}

static int send_cmd(struct console_pres *p, int type, int arg)
{
	if (p->pid <= 0)
		return -1;
	struct pres_cmd k = {.type = type, .arg = arg};
	ssize_t n = write(p->cmd_fd, &k, sizeof k);
	return n == (ssize_t)sizeof k ? 0 : -1;
}

int console_pres_run_block(struct console_pres *p, int block)
{
	if (p->st.phase != CONSOLE_PRES_IDLE || send_cmd(p, CMD_RUN, block) != 0)
		return -1;
	p->st.phase = CONSOLE_PRES_RUNNING;
	p->st.has_snap = false;
	p->st.running_block = block;
	return 0;
}

int console_pres_skip_block(struct console_pres *p, int block)
{
	if (p->st.phase != CONSOLE_PRES_IDLE)
		return -1;
	return send_cmd(p, CMD_SKIP, block);
}

int console_pres_pause(struct console_pres *p, bool pause)
{
	return send_cmd(p, pause ? CMD_PAUSE : CMD_RESUME, 0);
}

int console_pres_answer(struct console_pres *p, bool skip)
{
	return send_cmd(p, skip ? CMD_SKIP_REST : CMD_GO_ON, 0);
}

int console_pres_end(struct console_pres *p)
{
	return send_cmd(p, CMD_END, 0);
}

int console_pres_close(struct console_pres *p)
{
	if (p->pid <= 0)
		return -1;
	if (p->st.phase != CONSOLE_PRES_CRASHED && p->st.phase != CONSOLE_PRES_FAILED)
		p->st.phase = CONSOLE_PRES_CLOSING;
	return send_cmd(p, CMD_CLOSE, 0);
}

int console_pres_interrupt(struct console_pres *p)
{
	if (!p || p->pid <= 0)
		return -1;
	/* The child's run layer turns SIGTERM into its stop flag; the session closes interrupted. */
	return kill(p->pid, SIGTERM);
}

bool console_pres_alive(const struct console_pres *p)
{
	return p && p->pid > 0;
}

static int64_t mono_ms(void)
{
	struct timespec ts;
	clock_gettime(CLOCK_MONOTONIC, &ts);
	return (int64_t)ts.tv_sec * 1000 + ts.tv_nsec / 1000000;
}

static void wait_for_end(struct console_pres *p, int ms)
{
	int64_t until = mono_ms() + ms;
	while (p->pid > 0 && mono_ms() < until) {
		console_pres_poll(p);
		if (p->pid > 0) {
			struct timespec ts = {0, 20 * 1000000};
			nanosleep(&ts, NULL);
		}
	}
}

void console_pres_destroy(struct console_pres *p, int wait_ms)
{
	if (!p)
		return;
	if (p->pid > 0) {
		/* End the block and the session cleanly; the run layer keeps every stored trial. */
		send_cmd(p, CMD_CLOSE, 0);
		wait_for_end(p, wait_ms);
	}
	if (p->pid > 0) {
		kill(p->pid, SIGTERM);   /* the run layer's handler stops and marks interrupted */
		wait_for_end(p, 3000);
	}
	if (p->pid > 0) {
		kill(p->pid, SIGKILL);
		waitpid(p->pid, NULL, 0);
		p->pid = -1;
		mark_interrupted(p);
	}
	close(p->cmd_fd);
	close(p->ev_fd);
	close(p->log_fd);
	free(p->db_path);
	const char *strs[] = {p->opt.protocol_path, p->opt.subject, p->opt.db_path,
			      p->opt.rig_path, p->opt.observer, p->opt.resume_id,
			      p->opt.screenshot_dir};
	for (size_t i = 0; i < sizeof strs / sizeof strs[0]; i++)
		free((char *)strs[i]);
	free(p);
}
