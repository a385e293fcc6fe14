/* test_ini_edit — changing keys and sections of a hand-written INI text keeps every other line.
 * The expected texts are worked out by hand from the rules in include/ini_edit.h. */
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>
#include <sys/stat.h>
#include <unistd.h>
#include <cmocka.h>

#include "ini_edit.h"

/* A key is rewritten in place, a duplicate later in the section goes, a NULL value removes its
 * key, a missing key goes after the section's last non-blank line (before the blank line that
 * separates sections), and a key of the same name in another section is left alone. */
static void ini_edit_testSetKeys(void **state)
{
	(void)state;
	const char *old = "; my rig\n[screen]\n  width_cm=50 ; tape measure\n; keep me\n"
			  "display = 1\nwidth_cm = 49\n\n[other]\nwidth_cm = 7\n";
	const char *const keys[] = {"width_cm", "display", "height_cm"};
	const char *const vals[] = {"53", NULL, "30"};
	char *t = ini_edit_set_keys(old, "screen", keys, vals, 3);
	assert_string_equal(t, "; my rig\n[screen]\nwidth_cm = 53\n; keep me\nheight_cm = 30\n\n"
			       "[other]\nwidth_cm = 7\n");
	free(t);
}

/* A missing section is appended after a blank line; an empty text gets just the section; a
 * text without a final newline gets one; colons separate keys as well as '='. */
static void ini_edit_testMissingSection(void **state)
{
	(void)state;
	const char *const keys[] = {"corner", "size_px"};
	const char *const vals[] = {"top-left", "40"};
	char *t = ini_edit_set_keys("[screen]\nname = a", "marker", keys, vals, 2);
	assert_string_equal(t, "[screen]\nname = a\n\n[marker]\ncorner = top-left\nsize_px = 40\n");
	free(t);
	t = ini_edit_set_keys("", "marker", keys, vals, 2);
	assert_string_equal(t, "[marker]\ncorner = top-left\nsize_px = 40\n");
	free(t);
	t = ini_edit_set_keys("[ marker ]\ncorner: none\n", "marker", keys, vals, 2);
	assert_string_equal(t, "[ marker ]\ncorner = top-left\nsize_px = 40\n");
	free(t);
}

/* A section is replaced where it first stood; a second copy of it goes; other lines stay. */
static void ini_edit_testReplaceSection(void **state)
{
	(void)state;
	const char *old = "[screen]\nx = 1\n[luminance]\ngamma = 2\n; old note\n[marker]\n"
			  "corner = none\n[luminance]\ngamma = 3\n";
	char *t = ini_edit_replace_section(old, "luminance", "[luminance]\ngamma = 2.2\n");
	assert_string_equal(t, "[screen]\nx = 1\n[luminance]\ngamma = 2.2\n[marker]\n"
			       "corner = none\n");
	free(t);
	t = ini_edit_replace_section("[screen]\nx = 1\n", "luminance", "[luminance]\ng = 1\n");
	assert_string_equal(t, "[screen]\nx = 1\n\n[luminance]\ng = 1\n");
	free(t);
}

/* The file is replaced whole and keeps its permission bits; a folder that does not exist is a
 * message, not a crash. */
static void ini_edit_testReplaceFile(void **state)
{
	(void)state;
	char dir[] = "/tmp/ini-edit-XXXXXX";
	assert_non_null(mkdtemp(dir));
	char path[64], err[256] = "";
	snprintf(path, sizeof path, "%s/rig.ini", dir);
	FILE *f = fopen(path, "w");
	assert_non_null(f);
	fputs("old\n", f);
	fclose(f);
	assert_int_equal(chmod(path, 0600), 0);
	assert_int_equal(ini_edit_replace_file(path, "new\n", err, sizeof err), 0);
	struct stat st;
	assert_int_equal(stat(path, &st), 0);
	assert_int_equal(st.st_mode & 0777, 0600);
	char buf[16] = "";
	f = fopen(path, "r");
	assert_non_null(f);
	assert_non_null(fgets(buf, sizeof buf, f));
	fclose(f);
	assert_string_equal(buf, "new\n");
	char bad[96];
	snprintf(bad, sizeof bad, "%s/no/such/rig.ini", dir);
	assert_int_equal(ini_edit_replace_file(bad, "x\n", err, sizeof err), -1);
	assert_non_null(strstr(err, "cannot write beside"));
	unlink(path);
	rmdir(dir);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(ini_edit_testSetKeys),
		cmocka_unit_test(ini_edit_testMissingSection),
		cmocka_unit_test(ini_edit_testReplaceSection),
		cmocka_unit_test(ini_edit_testReplaceFile),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
