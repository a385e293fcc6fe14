/* sender — sending finished sessions to the lab's PostgreSQL server while the console runs, when
 * the rig's [pool] server is set: a child process running `tachist pool --follow` on the
 * console's database (its own process group, started with the console and stopped when it
 * quits), so no network wait ever reaches the console or a running session; the child reads the
 * database only between trials (read transactions) and is safe to stop at any time. The console
 * reads the child's lines from a pipe it never blocks on and keeps a short state for the first
 * screen: how many sessions were sent, the last problem. */
#include "console.h"

#include <errno.h>
#include <fcntl.h>
#include <signal.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/types.h>
#include <sys/wait.h>
#include <time.h>
#include <unistd.h>
#ifdef __linux__
#include <sys/prctl.h>
#endif

#include "diag.h"
#include "rig_file.h"
#include "store_pg.h"

struct console_send {
	pid_t pid;
	int fd;                  /* read end of the child's stdout and stderr; -1 once closed */
	char *shown;             /* the server, password-free, for the screen */
	char line[1024];         /* the line being read */
	size_t len;
	unsigned long sent;      /* sessions added or updated on the server */
	char problem[1024];      /* the last problem the child told, "" after a success */
	bool ended;              /* the child ended on its own */
};

struct console_send *console_send_start(const char *self_exe, const char *db_path,
					const char *rig_path)
{
	if (!db_path || !rig_path)
		return NULL;
	if (!self_exe)
		self_exe = "/proc/self/exe";   /* this program (Linux) */
	struct rig r;
	struct diag_list d;
	diag_init(&d);
	int rc = rig_load(rig_path, &r, &d);
	diag_clear(&d);
	if (rc != 0)
		return NULL;
	if (!r.pool_server) {
		rig_clear(&r);
		return NULL;
	}
	struct console_send *s = xcalloc(1, sizeof *s);
	s->fd = -1;
	s->pid = -1;
	s->shown = store_pg_shown(r.pool_server);
	int p[2];
	if (pipe(p) != 0) {
		snprintf(s->problem, sizeof s->problem, "cannot start: %s", strerror(errno));
		rig_clear(&r);
		return s;
	}
	const char *schema = r.pool_schema ? r.pool_schema : STORE_PG_DEFAULT_SCHEMA;
	pid_t pid = fork();
	if (pid == 0) {
		setpgid(0, 0);
#ifdef __linux__
		prctl(PR_SET_PDEATHSIG, SIGTERM);
#endif
		int null = open("/dev/null", O_RDONLY);
		if (null >= 0)
			dup2(null, STDIN_FILENO);
		dup2(p[1], STDOUT_FILENO);
		dup2(p[1], STDERR_FILENO);
		close(p[0]);
		close(p[1]);
		execl(self_exe, "tachist", "pool", "--follow", "--into", r.pool_server, "--schema",
		      schema, "--interval", "2", db_path, (char *)NULL);
		fprintf(stderr, "tachist pool: cannot run %s: %s\n", self_exe, strerror(errno));
		_exit(127);
	}
	close(p[1]);
	rig_clear(&r);
	if (pid < 0) {
		close(p[0]);
		snprintf(s->problem, sizeof s->problem, "cannot start: %s", strerror(errno));
		return s;
	}
	setpgid(pid, pid);
	s->pid = pid;
	s->fd = p[0];
	fcntl(s->fd, F_SETFL, fcntl(s->fd, F_GETFL) | O_NONBLOCK);
	fcntl(s->fd, F_SETFD, FD_CLOEXEC);
	return s;
}

/* One whole line from the child: "DB: N sessions added, M updated, ..." after sending, else
 * "tachist pool: PROBLEM". */
static void take_line(struct console_send *s, const char *l)
{
	const char *added = strstr(l, " sessions added, ");
	if (added) {
		const char *colon = strstr(l, ": ");
		unsigned long a = 0, u = 0;
		if (colon && sscanf(colon + 2, "%lu sessions added, %lu updated", &a, &u) == 2)
			s->sent += a + u;
		s->problem[0] = '\0';
		return;
	}
	const char *prefix = "tachist pool: ";
	if (!strncmp(l, prefix, strlen(prefix)))
		l += strlen(prefix);
	if (!strcmp(l, "connected again") || !strcmp(l, "stopped")) {
		s->problem[0] = '\0';
		return;
	}
	if (*l)
		snprintf(s->problem, sizeof s->problem, "%s", l);
}

bool console_send_poll(struct console_send *s)
{
	if (!s || s->fd < 0)
		return false;
	bool changed = false;
	char buf[512];
	for (;;) {
		ssize_t n = read(s->fd, buf, sizeof buf);
		if (n < 0 && errno == EINTR)
			continue;
		if (n <= 0) {
			if (n == 0) {   /* the child ended */
				close(s->fd);
				s->fd = -1;
				if (s->pid > 0 && waitpid(s->pid, NULL, WNOHANG) == s->pid)
					s->pid = -1;
				s->ended = true;
				changed = true;
			}
			break;
		}
		for (ssize_t i = 0; i < n; i++) {
			if (buf[i] == '\n') {
				s->line[s->len] = '\0';
				take_line(s, s->line);
				s->len = 0;
				changed = true;
			} else if (s->len + 1 < sizeof s->line) {
				s->line[s->len++] = buf[i];
			}
		}
	}
	return changed;
}

void console_send_status(const struct console_send *s, char *buf, size_t len, bool *bad)
{
	*bad = s->problem[0] != '\0' || s->ended || s->pid < 0;
	int n = snprintf(buf, len, "%s: %lu session%s sent", s->shown, s->sent,
			 s->sent == 1 ? "" : "s");
	if (n < 0 || (size_t)n >= len)
		return;
	if (s->problem[0])
		snprintf(buf + n, len - (size_t)n, "; last problem: %s", s->problem);
	else if (s->ended || s->pid < 0)
		snprintf(buf + n, len - (size_t)n, "; stopped");
}

void console_send_stop(struct console_send *s)
{
	if (!s)
		return;
	if (s->pid > 0) {
		kill(s->pid, SIGTERM);
		/* The child stops within a tenth of a second, or a session's transaction at most. */
		for (int i = 0; i < 50; i++) {
			if (waitpid(s->pid, NULL, WNOHANG) == s->pid) {
				s->pid = -1;
				break;
			}
			struct timespec ts = {0, 100 * 1000 * 1000};
			nanosleep(&ts, NULL);
		}
		if (s->pid > 0) {
			kill(s->pid, SIGKILL);
			waitpid(s->pid, NULL, 0);
		}
	}
	if (s->fd >= 0)
		close(s->fd);
	free(s->shown);
	free(s);
}
