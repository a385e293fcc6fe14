/* protocol_adaptive — the protocol's "[adaptive NAME]" sections: one adaptive rule each (up-down,
 * weighted up-down or QUEST) with its staircases, parsed into struct adapt_spec (adapt.h).
 *
 * The section kind plugs into the table of app/io/protocol.c. After parsing, protocol.adaptive
 * points to an array of protocol.nadaptive struct adapt_spec, owned by this module (freed by the
 * kind's clear hook through protocol_clear); adapt_spec_find() looks one up by the name a block's
 * `adaptive = NAME` gives. Key names, units, defaults and ranges are documented in docs/files.md
 * ("Adaptive procedures"). */
#ifndef TACHIST_PROTOCOL_ADAPTIVE_H
#define TACHIST_PROTOCOL_ADAPTIVE_H

#include "protocol_file.h"

extern const struct protocol_section protocol_adaptive_section;

#endif
