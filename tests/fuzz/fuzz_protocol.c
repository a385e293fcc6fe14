/* fuzz_protocol — libFuzzer target: any bytes as a protocol file, then as a rig profile. Parsing must
 * never crash, leak or read out of bounds, whatever the text. */
#include <stddef.h>
#include <stdint.h>
#include <stdlib.h>
#include <string.h>

#include "protocol_file.h"
#include "rig_file.h"

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size);

int LLVMFuzzerTestOneInput(const uint8_t *data, size_t size)
{
	char *text = xmalloc(size + 1);
	memcpy(text, data, size);
	text[size] = '\0';   /* the parsers take text; an inner NUL just ends it early */
	struct diag_list d;
	diag_init(&d);
	struct protocol p;
	protocol_parse("fuzz/p.ini", text, &p, &d);
	protocol_clear(&p);
	struct rig r;
	rig_parse("fuzz/r.ini", text, &r, &d);
	rig_clear(&r);
	char buf[2048];
	for (size_t i = 0; i < d.n; i++)
		diag_format(&d.v[i], buf, sizeof buf);
	diag_clear(&d);
	free(text);
	return 0;
}
