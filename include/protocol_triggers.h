/* protocol_triggers — the protocol's "[triggers]" section: the code written to the rig's trigger
 * port for each event (stimulus onset, per category, response, block start and end), parsed into
 * struct protocol_triggers (protocol.h). The section kind plugs into the table of
 * app/io/protocol.c. Keys and ranges are documented in docs/response-timing.md. */
#ifndef TACHIST_PROTOCOL_TRIGGERS_H
#define TACHIST_PROTOCOL_TRIGGERS_H

#include "protocol_file.h"

extern const struct protocol_section protocol_triggers_section;

#endif
