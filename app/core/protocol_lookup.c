/* protocol_lookup — the pure lookups of protocol.h on a protocol already in memory, for core
 * (plan.c) and every layer above it. Reading a protocol file is app/io/protocol.c. */
#include "protocol.h"

#include <string.h>

int protocol_choice_index(const struct protocol *p, const char *category)
{
	for (size_t i = 0; i < p->nchoices; i++)
		if (!strcmp(p->choices[i].category, category))
			return (int)i;
	return -1;
}
