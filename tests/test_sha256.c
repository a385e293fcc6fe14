/* test_sha256 — SHA-256 against the FIPS 180-4 example vectors. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <cmocka.h>

#include "sha256.h"

/* "abc": NIST FIPS 180-4 example (CSRC "SHA256.pdf" example values, one-block message). */
static void sha256_testAbc(void **state)
{
	(void)state;
	char hex[65];
	sha256_hex("abc", 3, hex);
	assert_string_equal(hex, "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad");
}

/* The 448-bit message: NIST FIPS 180-4 example (CSRC "SHA256.pdf", two-block message). */
static void sha256_testTwoBlock(void **state)
{
	(void)state;
	const char *m = "abcdbcdecdefdefgefghfghighijhijkijkljklmklmnlmnomnopnopq";
	char hex[65];
	sha256_hex(m, strlen(m), hex);
	assert_string_equal(hex, "248d6a61d20638b8e5c026930c3e6039a33ce45964ff2167f6ecedd419db06c1");
}

/* The empty message: value as printed by coreutils `printf '' | sha256sum`. */
static void sha256_testEmpty(void **state)
{
	(void)state;
	char hex[65];
	sha256_hex("", 0, hex);
	assert_string_equal(hex, "e3b0c44298fc1c149afbf4c8996fb92427ae41e4649b934ca495991b7852b855");
}

/* A file hashed in chunks equals the same bytes hashed at once (crosses the 64 KiB read size and
 * every padding boundary); a missing file is -1. */
static void sha256_testFileMatchesMemory(void **state)
{
	(void)state;
	char path[] = "/tmp/tachist-sha-XXXXXX";
	int fd = mkstemp(path);
	assert_true(fd >= 0);
	FILE *f = fdopen(fd, "wb");
	size_t n = 65536 * 2 + 55;
	unsigned char *buf = malloc(n);
	for (size_t i = 0; i < n; i++)
		buf[i] = (unsigned char)(i * 131u + 7u);
	fwrite(buf, 1, n, f);
	fclose(f);
	char a[65], b[65];
	assert_int_equal(sha256_file_hex(path, a), 0);
	sha256_hex(buf, n, b);
	assert_string_equal(a, b);
	remove(path);
	free(buf);
	assert_int_equal(sha256_file_hex("/nonexistent/tachist", a), -1);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(sha256_testAbc),
		cmocka_unit_test(sha256_testTwoBlock),
		cmocka_unit_test(sha256_testEmpty),
		cmocka_unit_test(sha256_testFileMatchesMemory),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
