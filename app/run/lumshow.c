/* lumshow — see include/lumshow.h.
 *
 * The child and its parent talk over a Unix stream socket pair: the child sends one status
 * message when its display is open ("" or the error), then, for each (channel, code) request, a
 * one-byte acknowledgement after the code is presented. The parent sends with MSG_NOSIGNAL, so
 * a child that is gone is an error, never a SIGPIPE. The child polls the socket ten times a
 * second and pumps the window's events meanwhile; a request to close the window ends it. */
#include "lumshow.h"

#include <errno.h>
#include <fcntl.h>
#include <poll.h>
#include <signal.h>
#include <stdint.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/socket.h>
#include <sys/types.h>
#include <sys/wait.h>
#include <unistd.h>

#include "dclock.h"
#include "diag.h"
#include "display.h"
#include "geom.h"
#include "lum.h"
#include "rig.h"

#define LUMSHOW_WAIT_MS 15000   /* longest wait for the child to open or show */

struct lumshow {
	pid_t pid;
	int fd;
};

void lumshow_draw(struct display *disp, int patch_px, int surround, int code, int ch)
{
	uint8_t v = (uint8_t)code, rgb[3] = {v, v, v};
	if (ch != LUM_GREY) {
		rgb[0] = rgb[1] = rgb[2] = 0;
		rgb[ch - 1] = v;
	}
	int w, h;
	display_size(disp, &w, &h);
	if (patch_px > 0) {
		uint8_t s = (uint8_t)surround;
		display_fill_rect(disp, NULL, s, s, s);
		int rect[4] = {(w - patch_px) / 2, (h - patch_px) / 2, patch_px, patch_px};
		display_fill_rect(disp, rect, rgb[0], rgb[1], rgb[2]);
	} else {
		display_fill_rect(disp, NULL, rgb[0], rgb[1], rgb[2]);
	}
}

/* ---------------- the child ---------------- */

struct status {
	char text[480];
};

static void child_main(int fd, const struct rig *rig, const struct lumshow_opts *o)
{
	struct status st = {""};
	struct display_opts dopt = {.headless = o->headless, .window = o->window, .vsync = true,
				    .display_index = rig->display, .width_px = rig->width_px,
				    .height_px = rig->height_px, .background = o->surround,
				    .title = "tachist calibrate"};
	struct display *disp = display_open(&dopt, st.text, sizeof st.text);
	struct dclock *clk = NULL;
	if (disp) {
		struct dclock_virtual_opts vo = {.hz = rig->refresh_hz, .seed = 1};
		clk = o->headless ? dclock_virtual_new(display_renderer(disp), &vo)
				  : dclock_vsync_new(display_renderer(disp), rig->refresh_hz);
		if (!clk)
			snprintf(st.text, sizeof st.text, "cannot start the display clock");
	}
	if (send(fd, &st, sizeof st, MSG_NOSIGNAL) != (ssize_t)sizeof st || st.text[0])
		_exit(1);
	int patch_px = o->patch_deg > 0 ? geom_deg_to_px(rig, o->patch_deg, NULL) : 0;
	lumshow_draw(disp, patch_px, o->surround, 0, LUM_GREY);
	dclock_flip(clk);
	for (;;) {
		struct pollfd p = {fd, POLLIN, 0};
		int r = poll(&p, 1, 100);
		char key[24];
		uint32_t ms;
		if (display_poll_key(disp, key, sizeof key, &ms) == 2)
			break;
		if (r < 0 && errno != EINTR)
			break;
		if (r <= 0)
			continue;
		int req[2];
		ssize_t n = recv(fd, req, sizeof req, MSG_WAITALL);
		if (n != (ssize_t)sizeof req)
			break;   /* the parent closed the socket: done */
		lumshow_draw(disp, patch_px, o->surround, req[1], req[0]);
		dclock_flip(clk);
		char ack = 1;
		if (send(fd, &ack, 1, MSG_NOSIGNAL) != 1)
			break;
	}
	dclock_destroy(clk);
	display_close(disp);
	_exit(0);
}

/* ---------------- the parent ---------------- */

/* Waits for N bytes from the child. Returns 0, or -1 when it has gone or is silent too long. */
static int recv_wait(int fd, void *buf, size_t n)
{
	struct pollfd p = {fd, POLLIN, 0};
	int r;
	do
		r = poll(&p, 1, LUMSHOW_WAIT_MS);
	while (r < 0 && errno == EINTR);
	if (r <= 0)
		return -1;
	return recv(fd, buf, n, MSG_WAITALL) == (ssize_t)n ? 0 : -1;
}

struct lumshow *lumshow_start(const struct rig *rig, const struct lumshow_opts *o, char *err,
			      size_t errlen)
{
	int sv[2];
	if (socketpair(AF_UNIX, SOCK_STREAM | SOCK_CLOEXEC, 0, sv)) {
		snprintf(err, errlen, "cannot start the display: %s", strerror(errno));
		return NULL;
	}
	fflush(NULL);
	pid_t pid = fork();
	if (pid < 0) {
		snprintf(err, errlen, "cannot start the display: %s", strerror(errno));
		close(sv[0]);
		close(sv[1]);
		return NULL;
	}
	if (pid == 0) {
		close(sv[0]);
		/* Its own process group: the terminal's Ctrl-C reaches only the console. Nothing
		 * of the child may reach the terminal the console draws on. */
		setpgid(0, 0);
		int null = open("/dev/null", O_RDWR);
		if (null >= 0) {
			dup2(null, STDIN_FILENO);
			dup2(null, STDOUT_FILENO);
			dup2(null, STDERR_FILENO);
			if (null > STDERR_FILENO)
				close(null);
		}
		signal(SIGINT, SIG_DFL);
		signal(SIGTERM, SIG_DFL);
		child_main(sv[1], rig, o);
	}
	close(sv[1]);
	struct lumshow *s = xcalloc(1, sizeof *s);
	s->pid = pid;
	s->fd = sv[0];
	struct status st;
	if (recv_wait(s->fd, &st, sizeof st)) {
		snprintf(err, errlen, "the observer's display did not open");
		lumshow_stop(s);
		return NULL;
	}
	if (st.text[0]) {
		st.text[sizeof st.text - 1] = '\0';
		snprintf(err, errlen, "%s", st.text);
		lumshow_stop(s);
		return NULL;
	}
	return s;
}

int lumshow_show(struct lumshow *s, int ch, int code, char *err, size_t errlen)
{
	int req[2] = {ch, code};
	char ack;
	if (send(s->fd, req, sizeof req, MSG_NOSIGNAL) != (ssize_t)sizeof req ||
	    recv_wait(s->fd, &ack, 1)) {
		snprintf(err, errlen, "the observer's window was closed or its process ended");
		return -1;
	}
	return 0;
}

void lumshow_stop(struct lumshow *s)
{
	if (!s)
		return;
	close(s->fd);
	/* The child ends when it sees the socket closed; one that does not is ended. */
	int status;
	for (int i = 0; i < 50; i++) {
		pid_t r = waitpid(s->pid, &status, WNOHANG);
		if (r == s->pid || (r < 0 && errno != EINTR))
			goto done;
		usleep(20000);
	}
	kill(s->pid, SIGKILL);
	waitpid(s->pid, &status, 0);
done:
	free(s);
}
