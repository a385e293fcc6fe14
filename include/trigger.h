/* trigger — event codes out to EEG amplifiers and eye trackers through a serial port.
 *
 * One byte per event (codes 1 to 255), written to a port set raw, 8 data bits, no parity, one
 * stop bit, at the rig's baud (termios). The trial loop writes the onset code right after the
 * onset flip returns and keeps the time the write call returned; a write that fails (the port
 * vanished, or its peer closed) is reported so the block stops. The port is opened before the
 * session begins, so a missing one is an error before any trial. The write call's time is not
 * the time the code reaches the amplifier, and neither is the time light leaves the screen: a
 * photodiode on the screen is the truth for onset latency (docs/response-timing.md). */
#ifndef TACHIST_TRIGGER_H
#define TACHIST_TRIGGER_H

#include <stddef.h>
#include <stdint.h>

struct trigger;

/* Opens PORT (a serial device such as /dev/ttyUSB0) at BAUD (a standard rate from 1200 to
 * 4000000). Returns NULL with a message in ERR (ERRLEN bytes) naming the port. */
struct trigger *trigger_open(const char *port, int baud, char *err, size_t errlen);
void trigger_close(struct trigger *t);
/* Writes CODE (1..255). Returns 0 and the CLOCK_MONOTONIC ns at which the write call returned in
 * *T_NS (may be NULL), or -1 with a message in ERR naming the port. */
int trigger_send(struct trigger *t, int code, int64_t *t_ns, char *err, size_t errlen);
const char *trigger_port(const struct trigger *t);

#endif
