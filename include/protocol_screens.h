/* protocol_screens — the protocol's "[screens]" section: what the observer reads (font and text
 * size in degrees, the session's instructions file, the key legend in the response window, the
 * accuracy on break screens), and the instruction files of blocks (`instructions` in [block NAME]).
 *
 * The section kind plugs into the table of app/io/protocol.c and fills protocol.screens; its
 * finish hook reads every instructions file named (session and blocks) into *_text, so a missing
 * or unreadable file, or one that is not UTF-8 text, is a FILE:LINE error of the protocol. Keys are
 * documented in docs/observer.md. */
#ifndef TACHIST_PROTOCOL_SCREENS_H
#define TACHIST_PROTOCOL_SCREENS_H

#include "protocol_file.h"

extern const struct protocol_section protocol_screens_section;
/* "[counterbalance]": block_order = fixed | balanced, key_mapping = fixed | rotate (counterbal.h). */
extern const struct protocol_section protocol_counterbalance_section;

/* Longest instructions file read, in bytes. */
#define PROTOCOL_INSTRUCTIONS_MAX 16384

#endif
