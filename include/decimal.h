/* decimal — the one rule for numbers written in the user's files: plain decimal notation only.
 *
 * strtod also reads hexadecimal ("0x32" is 50), "inf", "nan" and leading spaces; a protocol,
 * rig or list that says 0x32 is more likely a mistake than a wish, so every reader checks a
 * number's text with decimal_ok before converting it. Pure; used by io's readers. */
#ifndef TACHIST_DECIMAL_H
#define TACHIST_DECIMAL_H

#include <stdbool.h>

/* True when all of S is [+-]digits[.digits][(e|E)[+-]digits], with at least one digit before
 * or after the point ("5", "-0.25", ".5", "5.", "1e-3"); false for "", "0x32", "inf", "nan",
 * " 5", "5 ", "1e". */
bool decimal_ok(const char *s);

#endif
