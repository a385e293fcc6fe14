/* counterbal — counterbalancing across subjects: the order of a protocol's main blocks from a
 * balanced Latin square, and the key mapping rotated through a cyclic Latin square of the
 * categories over the keys, both chosen by the subject's position in the design (1, 2, ...).
 *
 * Pure computation (core). The balanced square is Williams' design (E. J. Williams 1949, Aust. J.
 * Sci. Res. A 2, 149-168): for an even number of items one square of n rows in which every item
 * appears once in each position and follows every other item exactly once; for an odd number the
 * square and its mirror image, 2n rows, in which every item follows every other exactly twice. */
#ifndef TACHIST_COUNTERBAL_H
#define TACHIST_COUNTERBAL_H

#include <stddef.h>

#include "protocol.h"

/* Rows of the balanced design over N items: N when N is even, 2N when odd (1 for N < 2). */
size_t counterbal_rows(size_t n);
/* Row (POSITION - 1) mod counterbal_rows(N) of the balanced design: OUT[k] is the item shown k-th. */
void counterbal_williams(size_t n, size_t position, size_t *out);
/* The key mapping of POSITION: category i takes the key of category (i + POSITION - 1) mod N, so
 * over N subjects in a row every category is on every key exactly once. OUT[i] is that index. */
void counterbal_rotation(size_t n, size_t position, size_t *out);

/* Applies P's [counterbalance] choices for POSITION (>= 1) to P: the main (non-practice) blocks
 * are reordered among their places after the practice blocks when block_order is balanced; the
 * keys are rotated when key_mapping is rotate. ORDER and MAPPING (may be NULL) get malloc'd
 * descriptions, "main-a,main-b" and "ring=s,bar=d,...", for the session row. */
void counterbal_apply(struct protocol *p, size_t position, char **order, char **mapping);

#endif
