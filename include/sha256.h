/* sha256 — SHA-256 (FIPS 180-4) of bytes in memory or a file, as lower-case hex. Used to pin a
 * session to the exact protocol and stimulus list it ran with. */
#ifndef TACHIST_SHA256_H
#define TACHIST_SHA256_H

#include <stddef.h>

/* Writes 64 hex digits and a NUL to HEX. */
void sha256_hex(const void *data, size_t len, char hex[65]);
/* Hashes a file's bytes; returns 0, or -1 when it cannot be read. */
int sha256_file_hex(const char *path, char hex[65]);

#endif
