/* trigger — trigger codes through a serial port (see trigger.h).
 *
 * The port is opened non-blocking, so a stalled port can never hold up a frame: a full output
 * buffer (EAGAIN) is reported as a failure like any other. One byte per code; at 115200 baud a
 * byte takes 87 µs on the wire, and the kernel's buffer takes it at once. */
#include "trigger.h"

#include <errno.h>
#include <fcntl.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <termios.h>
#include <time.h>
#include <unistd.h>

#include "diag.h"

struct trigger {
	int fd;
	char port[256];
};

static const struct { int baud; speed_t speed; } speeds[] = {
	{1200, B1200}, {2400, B2400}, {4800, B4800}, {9600, B9600}, {19200, B19200},
	{38400, B38400}, {57600, B57600}, {115200, B115200}, {230400, B230400},
	{460800, B460800}, {500000, B500000}, {576000, B576000}, {921600, B921600},
	{1000000, B1000000}, {1152000, B1152000}, {1500000, B1500000}, {2000000, B2000000},
	{2500000, B2500000}, {3000000, B3000000}, {3500000, B3500000}, {4000000, B4000000},
};

struct trigger *trigger_open(const char *port, int baud, char *err, size_t errlen)
{
	speed_t sp = 0;
	int found = 0;
	for (size_t i = 0; i < sizeof speeds / sizeof speeds[0]; i++)
		if (speeds[i].baud == baud) {
			sp = speeds[i].speed;
			found = 1;
		}
	if (!found) {
		snprintf(err, errlen, "trigger port %s: %d baud is not a standard rate (1200, 2400, "
			 "4800, 9600, 19200, 38400, 57600, 115200, 230400, ... 4000000)", port, baud);
		return NULL;
	}
	int fd = open(port, O_RDWR | O_NOCTTY | O_NONBLOCK | O_CLOEXEC);
	if (fd < 0) {
		int e = errno;
		snprintf(err, errlen, "cannot open the trigger port %s: %s%s", port, strerror(e),
			 e == EACCES ? " (serial ports usually belong to the 'dialout' group)" : "");
		return NULL;
	}
	struct termios tio;
	if (tcgetattr(fd, &tio)) {
		snprintf(err, errlen, "trigger port %s is not a serial port: %s", port, strerror(errno));
		close(fd);
		return NULL;
	}
	cfmakeraw(&tio);
	tio.c_cflag &= ~(tcflag_t)(PARENB | CSTOPB | CSIZE | CRTSCTS);
	tio.c_cflag |= CS8 | CLOCAL | CREAD;
	if (cfsetispeed(&tio, sp) || cfsetospeed(&tio, sp) || tcsetattr(fd, TCSANOW, &tio)) {
		snprintf(err, errlen, "cannot set the trigger port %s to %d baud 8N1: %s", port, baud,
			 strerror(errno));
		close(fd);
		return NULL;
	}
	struct trigger *t = xcalloc(1, sizeof *t);
	t->fd = fd;
	snprintf(t->port, sizeof t->port, "%s", port);
	return t;
}

void trigger_close(struct trigger *t)
{
	if (!t)
		return;
	close(t->fd);
	free(t);
}

int trigger_send(struct trigger *t, int code, int64_t *t_ns, char *err, size_t errlen)
{
	unsigned char b = (unsigned char)code;
	ssize_t w;
	do
		w = write(t->fd, &b, 1);
	while (w < 0 && errno == EINTR);
	struct timespec ts;
	clock_gettime(CLOCK_MONOTONIC, &ts);
	if (w != 1) {
		snprintf(err, errlen, "the trigger port %s failed: %s", t->port,
			 w < 0 ? (errno == EAGAIN ? "its output buffer is full (nothing reads it)"
					       : strerror(errno)) : "nothing was written");
		return -1;
	}
	if (t_ns)
		*t_ns = (int64_t)ts.tv_sec * 1000000000 + ts.tv_nsec;
	return 0;
}

const char *trigger_port(const struct trigger *t) { return t->port; }
