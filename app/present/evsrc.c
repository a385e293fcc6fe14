/* evsrc — kernel-stamped key presses from one input device (see evsrc.h).
 *
 * Layout: one reader thread per source blocks in poll() on the device and on a wake-up pipe; it
 * decodes whole struct input_event records (a partial record is kept for the next read, since a
 * pipe may split them) and pushes each key-down into a ring of RING entries. The ring is
 * single-producer single-consumer: the reader alone writes `head`, the consumer alone writes
 * `tail`, both as C11 atomics (release on publish, acquire on read), so neither side ever waits
 * for the other and the trial loop's poll costs a few loads. When the ring is full a key-down is
 * counted as lost rather than blocking the reader; at RING = 4096 that takes 4,096 presses between
 * two polls of the trial loop.
 *
 * libevdev is used to identify the device (name, USB id, whether it has keys) and to set its
 * clock; the events themselves are read as the kernel's plain records, which is also the format
 * of the pipes the tests feed. */
#include "evsrc.h"

#include <dirent.h>
#include <stdarg.h>
#include <errno.h>
#include <fcntl.h>
#include <limits.h>
#include <poll.h>
#include <pthread.h>
#include <stdatomic.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>
#include <unistd.h>

#include <libevdev/libevdev.h>
#include <linux/input.h>

#include "diag.h"

#define RING 4096u

struct evsrc {
	int fd;
	int wake[2];                 /* writing to wake[1] stops the reader */
	pthread_t thread;
	bool started;
	char name[256];
	char usb[10];
	struct evsrc_key ring[RING];
	_Atomic size_t head;         /* written by the reader */
	_Atomic size_t tail;         /* written by the consumer */
	_Atomic int gone;            /* the reader stopped; error holds why */
	char error[300];
	_Atomic uint64_t downs, repeats, ups, lost, syn_dropped;
};

static void set_err(char *err, size_t n, const char *fmt, ...) __attribute__((format(printf, 3, 4)));
static void set_err(char *err, size_t n, const char *fmt, ...)
{
	va_list ap;
	va_start(ap, fmt);
	vsnprintf(err, n, fmt, ap);
	va_end(ap);
}

/* Handles one record from the device (reader thread). */
static void take(struct evsrc *s, const struct input_event *ev)
{
	if (ev->type == EV_SYN && ev->code == SYN_DROPPED) {
		atomic_fetch_add_explicit(&s->syn_dropped, 1, memory_order_relaxed);
		return;
	}
	if (ev->type != EV_KEY)
		return;
	if (ev->value == 2) {
		atomic_fetch_add_explicit(&s->repeats, 1, memory_order_relaxed);
		return;
	}
	if (ev->value == 0) {
		atomic_fetch_add_explicit(&s->ups, 1, memory_order_relaxed);
		return;
	}
	size_t h = atomic_load_explicit(&s->head, memory_order_relaxed);
	size_t t = atomic_load_explicit(&s->tail, memory_order_acquire);
	if (h - t >= RING) {
		atomic_fetch_add_explicit(&s->lost, 1, memory_order_relaxed);
		return;
	}
	struct evsrc_key *k = &s->ring[h % RING];
	k->code = ev->code;
	k->t_ns = (int64_t)ev->input_event_sec * 1000000000 + (int64_t)ev->input_event_usec * 1000;
	atomic_store_explicit(&s->head, h + 1, memory_order_release);
	atomic_fetch_add_explicit(&s->downs, 1, memory_order_relaxed);
}

static void stop_with(struct evsrc *s, const char *why, int e)
{
	if (e)
		snprintf(s->error, sizeof s->error, "%s: %s (%s)", s->name, why, strerror(e));
	else
		snprintf(s->error, sizeof s->error, "%s: %s", s->name, why);
	atomic_store_explicit(&s->gone, 1, memory_order_release);
}

static void *reader(void *arg)
{
	struct evsrc *s = arg;
	unsigned char buf[64 * sizeof(struct input_event)];
	size_t have = 0;
	for (;;) {
		struct pollfd p[2] = {{s->fd, POLLIN, 0}, {s->wake[0], POLLIN, 0}};
		int n = poll(p, 2, -1);
		if (n < 0) {
			if (errno == EINTR)
				continue;
			stop_with(s, "waiting for input failed", errno);
			return NULL;
		}
		if (p[1].revents)
			return NULL;
		if (p[0].revents & POLLNVAL) {
			stop_with(s, "the device was closed", 0);
			return NULL;
		}
		ssize_t r = read(s->fd, buf + have, sizeof buf - have);
		if (r < 0) {
			if (errno == EINTR || errno == EAGAIN)
				continue;
			stop_with(s, errno == ENODEV ? "the device vanished (unplugged?)"
						     : "reading the device failed", errno);
			return NULL;
		}
		if (r == 0) {
			stop_with(s, "the device closed (unplugged?)", 0);
			return NULL;
		}
		have += (size_t)r;
		size_t whole = have / sizeof(struct input_event) * sizeof(struct input_event);
		for (size_t off = 0; off < whole; off += sizeof(struct input_event)) {
			struct input_event ev;
			memcpy(&ev, buf + off, sizeof ev);
			take(s, &ev);
		}
		memmove(buf, buf + whole, have - whole);
		have -= whole;
	}
}

/* Starts the reader on S->fd. Returns S, or NULL (S freed, fd closed) with ERR. */
static struct evsrc *start(struct evsrc *s, char *err, size_t errlen)
{
	int fl = fcntl(s->fd, F_GETFL);
	if (fl < 0 || fcntl(s->fd, F_SETFL, fl | O_NONBLOCK) < 0 || pipe(s->wake)) {
		set_err(err, errlen, "%s: cannot set up the reader: %s", s->name, strerror(errno));
		close(s->fd);
		free(s);
		return NULL;
	}
	int e = pthread_create(&s->thread, NULL, reader, s);
	if (e) {
		set_err(err, errlen, "%s: cannot start the reader thread: %s", s->name, strerror(e));
		close(s->wake[0]);
		close(s->wake[1]);
		close(s->fd);
		free(s);
		return NULL;
	}
	s->started = true;
	return s;
}

static struct evsrc *alloc(int fd, const char *name)
{
	struct evsrc *s = xcalloc(1, sizeof *s);
	s->fd = fd;
	s->wake[0] = s->wake[1] = -1;
	snprintf(s->name, sizeof s->name, "%s", name ? name : "input");
	return s;
}

struct evsrc *evsrc_open_fd(int fd, const char *name, char *err, size_t errlen)
{
	return start(alloc(fd, name), err, errlen);
}

/* Whether DEV has keys of a keyboard's main block (digits, letters, punctuation, space): a
 * mouse, a power button or a touchpad has none. Response pads that send digits or letters pass. */
static bool has_keyboard_keys(const struct libevdev *dev)
{
	if (!libevdev_has_event_type(dev, EV_KEY))
		return false;
	for (unsigned c = KEY_1; c <= KEY_SPACE; c++)
		if (libevdev_has_event_code(dev, EV_KEY, c))
			return true;
	return false;
}

static void usb_id(const struct libevdev *dev, char *out, size_t n)
{
	if (libevdev_get_id_bustype(dev) == BUS_USB)
		snprintf(out, n, "%04x:%04x", (unsigned)libevdev_get_id_vendor(dev) & 0xffff,
			 (unsigned)libevdev_get_id_product(dev) & 0xffff);
	else if (n)
		out[0] = '\0';
}

static const char access_hint[] =
	"; to read input devices without being root, add your user to the 'input' group "
	"(sudo usermod -aG input $USER, then log in again) or give the device a udev rule "
	"(docs/response-timing.md); never run tachist as root for this";

struct evsrc *evsrc_open_device(const char *path, char *err, size_t errlen)
{
	char found[272];
	if (path[0] != '/') {
		/* By name: the first readable keyboard whose kernel name is PATH. */
		struct evsrc_device *v;
		size_t n;
		if (evsrc_list(&v, &n)) {
			set_err(err, errlen, "no input device named '%s': /dev/input cannot be read", path);
			return NULL;
		}
		found[0] = '\0';
		bool unreadable = false;
		for (size_t i = 0; i < n && !found[0]; i++)
			if (v[i].readable && v[i].keyboard && !strcmp(v[i].name, path))
				snprintf(found, sizeof found, "%s", v[i].path);
		for (size_t i = 0; i < n; i++)
			unreadable |= !v[i].readable;
		free(v);
		if (!found[0]) {
			set_err(err, errlen, "no readable keyboard named '%s' (tachist timing --keys "
				"lists them)%s", path, unreadable ? access_hint : "");
			return NULL;
		}
		path = found;
	}
	int fd = open(path, O_RDONLY | O_NONBLOCK | O_CLOEXEC);
	if (fd < 0) {
		int e = errno;
		set_err(err, errlen, "cannot open the response device %s: %s%s", path, strerror(e),
			e == EACCES || e == EPERM ? access_hint : "");
		return NULL;
	}
	struct libevdev *dev = NULL;
	int rc = libevdev_new_from_fd(fd, &dev);
	if (rc < 0) {
		set_err(err, errlen, "%s is not an input event device: %s", path, strerror(-rc));
		close(fd);
		return NULL;
	}
	if (!has_keyboard_keys(dev)) {
		set_err(err, errlen, "%s (\"%s\") is not a keyboard: it has no letter, digit or space "
			"keys", path, libevdev_get_name(dev));
		libevdev_free(dev);
		close(fd);
		return NULL;
	}
	rc = libevdev_set_clock_id(dev, CLOCK_MONOTONIC);
	if (rc < 0) {
		set_err(err, errlen, "%s (\"%s\"): cannot set its event clock to CLOCK_MONOTONIC: %s",
			path, libevdev_get_name(dev), strerror(-rc));
		libevdev_free(dev);
		close(fd);
		return NULL;
	}
	struct evsrc *s = alloc(fd, libevdev_get_name(dev));
	usb_id(dev, s->usb, sizeof s->usb);
	libevdev_free(dev);   /* the fd stays open; the reader reads plain records from it */
	return start(s, err, errlen);
}

void evsrc_close(struct evsrc *s)
{
	if (!s)
		return;
	if (s->started) {
		ssize_t w;
		do
			w = write(s->wake[1], "x", 1);
		while (w < 0 && errno == EINTR);
		pthread_join(s->thread, NULL);
	}
	if (s->wake[0] >= 0)
		close(s->wake[0]);
	if (s->wake[1] >= 0)
		close(s->wake[1]);
	close(s->fd);
	free(s);
}

int evsrc_next(struct evsrc *s, struct evsrc_key *k)
{
	/* Read `gone` before the ring: a key pushed before the reader stopped is still taken. */
	int gone = atomic_load_explicit(&s->gone, memory_order_acquire);
	size_t t = atomic_load_explicit(&s->tail, memory_order_relaxed);
	size_t h = atomic_load_explicit(&s->head, memory_order_acquire);
	if (h == t)
		return gone ? -1 : 0;
	*k = s->ring[t % RING];
	atomic_store_explicit(&s->tail, t + 1, memory_order_release);
	return 1;
}

const char *evsrc_error(const struct evsrc *s)
{
	return atomic_load_explicit(&((struct evsrc *)s)->gone, memory_order_acquire) ? s->error : "";
}

const char *evsrc_name(const struct evsrc *s) { return s->name; }
const char *evsrc_usb(const struct evsrc *s) { return s->usb[0] ? s->usb : NULL; }

void evsrc_stats(const struct evsrc *s, struct evsrc_stats *out)
{
	struct evsrc *m = (struct evsrc *)s;
	out->downs = atomic_load(&m->downs);
	out->repeats = atomic_load(&m->repeats);
	out->ups = atomic_load(&m->ups);
	out->lost = atomic_load(&m->lost);
	out->syn_dropped = atomic_load(&m->syn_dropped);
}

/* Key codes whose SDL name is not libevdev's name without "KEY_" in lower case. */
static const struct { int code; const char *name; } renamed[] = {
	{KEY_ENTER, "return"}, {KEY_ESC, "escape"}, {KEY_LEFTSHIFT, "left shift"},
	{KEY_RIGHTSHIFT, "right shift"}, {KEY_LEFTCTRL, "left ctrl"}, {KEY_RIGHTCTRL, "right ctrl"},
	{KEY_LEFTALT, "left alt"}, {KEY_RIGHTALT, "right alt"}, {KEY_MINUS, "-"}, {KEY_EQUAL, "="},
	{KEY_COMMA, ","}, {KEY_DOT, "."}, {KEY_SLASH, "/"}, {KEY_SEMICOLON, ";"},
	{KEY_APOSTROPHE, "'"}, {KEY_LEFTBRACE, "["}, {KEY_RIGHTBRACE, "]"}, {KEY_BACKSLASH, "\\"},
	{KEY_GRAVE, "`"}, {KEY_KPENTER, "keypad enter"}, {KEY_KP0, "keypad 0"}, {KEY_KP1, "keypad 1"},
	{KEY_KP2, "keypad 2"}, {KEY_KP3, "keypad 3"}, {KEY_KP4, "keypad 4"}, {KEY_KP5, "keypad 5"},
	{KEY_KP6, "keypad 6"}, {KEY_KP7, "keypad 7"}, {KEY_KP8, "keypad 8"}, {KEY_KP9, "keypad 9"},
};

const char *evsrc_key_name(int code, char *buf, size_t n)
{
	if (!n)
		return buf;
	buf[0] = '\0';
	for (size_t i = 0; i < sizeof renamed / sizeof renamed[0]; i++)
		if (renamed[i].code == code) {
			snprintf(buf, n, "%s", renamed[i].name);
			return buf;
		}
	const char *s = code >= 0 && code <= KEY_MAX ? libevdev_event_code_get_name(EV_KEY, (unsigned)code)
						     : NULL;
	if (!s)
		return buf;
	if (!strncmp(s, "KEY_", 4))
		s += 4;
	size_t i = 0;
	for (; s[i] && i + 1 < n; i++)
		buf[i] = (char)(s[i] >= 'A' && s[i] <= 'Z' ? s[i] - 'A' + 'a' : s[i]);
	buf[i] = '\0';
	return buf;
}

static int by_number(const void *a, const void *b)
{
	const struct evsrc_device *x = a, *y = b;
	return atoi(x->path + 16) - atoi(y->path + 16);
}

int evsrc_list(struct evsrc_device **out, size_t *n)
{
	*out = NULL;
	*n = 0;
	DIR *d = opendir("/dev/input");
	if (!d)
		return -1;
	size_t cap = 0;
	struct evsrc_device *v = NULL;
	for (struct dirent *e; (e = readdir(d));) {
		if (strncmp(e->d_name, "event", 5) || strlen(e->d_name) > 40)
			continue;
		if (*n == cap) {
			cap = cap ? 2 * cap : 16;
			v = xrealloc(v, cap * sizeof *v);
		}
		struct evsrc_device *x = &v[(*n)++];
		memset(x, 0, sizeof *x);
		snprintf(x->path, sizeof x->path, "/dev/input/%s", e->d_name);
		int fd = open(x->path, O_RDONLY | O_NONBLOCK | O_CLOEXEC);
		if (fd < 0)
			continue;
		x->readable = true;
		struct libevdev *dev = NULL;
		if (libevdev_new_from_fd(fd, &dev) == 0) {
			snprintf(x->name, sizeof x->name, "%s", libevdev_get_name(dev));
			x->keyboard = has_keyboard_keys(dev);
			usb_id(dev, x->usb, sizeof x->usb);
			libevdev_free(dev);
		}
		close(fd);
	}
	closedir(d);
	DIR *b = opendir("/dev/input/by-id");
	if (b) {
		for (struct dirent *e; (e = readdir(b));) {
			if (e->d_name[0] == '.')
				continue;
			char link[PATH_MAX], real[PATH_MAX];
			snprintf(link, sizeof link, "/dev/input/by-id/%s", e->d_name);
			if (!realpath(link, real))
				continue;
			for (size_t i = 0; i < *n; i++)
				if (!strcmp(real, v[i].path) && !v[i].by_id[0])
					snprintf(v[i].by_id, sizeof v[i].by_id, "%s", link);
		}
		closedir(b);
	}
	if (*n)
		qsort(v, *n, sizeof *v, by_number);
	*out = v;
	return 0;
}
