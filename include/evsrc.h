/* evsrc — key presses from one Linux input device with the kernel's own event times.
 *
 * A reader thread reads `struct input_event` records from a file descriptor (an evdev device, or
 * any pipe or socket carrying the same records, which is how the tests feed it) and passes each
 * key-down (code, time in CLOCK_MONOTONIC ns) to the consumer through a lock-free
 * single-producer single-consumer ring. Auto-repeats (value 2) and key-ups (value 0) are counted,
 * never queued. For a real device, evsrc_open_device sets the event clock to CLOCK_MONOTONIC
 * (libevdev_set_clock_id, the EVIOCSCLOCKID ioctl), so event times share the clock of the flip
 * stamps, and refuses a device that is not a keyboard, naming it.
 *
 * The consumer is the trial loop's responder (one thread); the producer is the reader thread.
 * When the device vanishes (unplugged) or a read fails, the thread stops and evsrc_next reports
 * it once the keys already queued have been taken. */
#ifndef TACHIST_EVSRC_H
#define TACHIST_EVSRC_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

struct evsrc;

struct evsrc_key {
	int code;          /* Linux key code (KEY_* of linux/input-event-codes.h) */
	int64_t t_ns;      /* the kernel's time of the event, CLOCK_MONOTONIC ns (µs resolution) */
};

struct evsrc_stats {
	uint64_t downs;    /* key-downs queued */
	uint64_t repeats;  /* auto-repeats ignored */
	uint64_t ups;      /* key-ups ignored */
	uint64_t lost;     /* key-downs dropped because the ring was full (never expected) */
	uint64_t syn_dropped; /* SYN_DROPPED reports: the kernel's own buffer overflowed */
};

/* Opens PATH (an event device such as /dev/input/by-id/...-event-kbd) or, when PATH does not
 * start with '/', the readable device whose name is PATH. Refuses a device that is not a keyboard
 * (no letter keys), naming it. Sets the event clock to CLOCK_MONOTONIC and starts the reader.
 * Returns NULL with a message in ERR (ERRLEN bytes) that says how to get read access when that is
 * the problem. */
struct evsrc *evsrc_open_device(const char *path, char *err, size_t errlen);
/* Starts a reader on FD, which carries struct input_event records with CLOCK_MONOTONIC times
 * (a pipe or socket in tests). Takes ownership of FD. NAME labels it in messages. */
struct evsrc *evsrc_open_fd(int fd, const char *name, char *err, size_t errlen);
/* Stops the reader and closes the device. NULL does nothing. */
void evsrc_close(struct evsrc *s);

/* Takes the next queued key-down. Returns 1 and fills K, 0 when none is queued, -1 when the
 * queue is empty and the device has gone (evsrc_error says why). */
int evsrc_next(struct evsrc *s, struct evsrc_key *k);
/* Why the reader stopped ("" while it runs). */
const char *evsrc_error(const struct evsrc *s);
/* The device's name (the kernel's), and its USB id "vvvv:pppp" or NULL when not a USB device. */
const char *evsrc_name(const struct evsrc *s);
const char *evsrc_usb(const struct evsrc *s);
void evsrc_stats(const struct evsrc *s, struct evsrc_stats *out);

/* The name of key CODE as the keyboard responder names keys (SDL's lower-case names for a US
 * layout: "f", "space", "left", "return", "1"), in BUF (N bytes); "" for a code without one. */
const char *evsrc_key_name(int code, char *buf, size_t n);

/* One input device found under /dev/input. */
struct evsrc_device {
	char path[272];       /* /dev/input/eventN */
	char by_id[4096];     /* its stable /dev/input/by-id/ link, "" when none */
	char name[256];       /* the kernel's name, "" when it cannot be opened */
	char usb[10];         /* "vvvv:pppp", "" when not USB or not readable */
	bool readable;
	bool keyboard;        /* has letter keys */
};
/* Lists /dev/input/event* into *OUT (N entries; free()). Returns 0, or -1 when /dev/input cannot
 * be read (no input devices on this machine). */
int evsrc_list(struct evsrc_device **out, size_t *n);

#endif
