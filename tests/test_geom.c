/* test_geom — visual angle (exact formula), sizes and pixels per degree. */
#include <math.h>
#include <setjmp.h>
#include <stdarg.h>
#include <stddef.h>
#include <cmocka.h>

#include "geom.h"
#include "rig.h"

/* 1 cm at 57.3 cm subtends 1.000° with the exact formula: 2·atan(1/114.6) = 0.99990° (computed with
 * /usr/bin/python3 math.atan). "1 cm at 57 cm ≈ 1°" is common practice, no source. */
static void geom_testOneCmAt57(void **state)
{
	(void)state;
	assert_float_equal(geom_angle_deg(1.0, 57.3), 1.000, 5e-4);
	assert_float_equal(geom_angle_deg(1.0, 57.3), 0.9999009660, 1e-9);
}

/* 10 cm at 57 cm ≈ 10.03° (the value; 2·atan(5/57) = 10.02623°, python math.atan). The
 * small-angle formula would say 10.05°, so this separates the two. */
static void geom_testTenCmAt57(void **state)
{
	(void)state;
	double a = geom_angle_deg(10.0, 57.0);
	assert_float_equal(a, 10.03, 0.005);
	assert_true(fabs(a - 10.0 / 57.0 * 180.0 / M_PI) > 0.02);
}

/* size is the inverse of angle. */
static void geom_testSizeInverse(void **state)
{
	(void)state;
	for (double deg = 0.5; deg < 40; deg += 3.7)
		assert_float_equal(geom_angle_deg(geom_size_cm(deg, 60.0), 60.0), deg, 1e-9);
}

/* A 1920 px, 53 cm wide screen at 57 cm: 36.2264 px/cm and 2·57·tan(0.5°)·1920/53 = 36.0403 px/deg
 * (python math.tan). */
static void geom_testPixels(void **state)
{
	(void)state;
	struct rig r = {.width_cm = 53, .height_cm = 30, .width_px = 1920, .height_px = 1080,
			.distance_cm = 57, .refresh_hz = 60};
	assert_float_equal(geom_px_per_cm(&r), 1920.0 / 53.0, 1e-12);
	assert_float_equal(geom_px_per_deg(&r), 36.04031740, 1e-6);
	double actual;
	int px = geom_deg_to_px(&r, 4.0, &actual);
	/* 4° = 2·57·tan(2°) = 3.98125 cm = 144.23 px -> 144 px. */
	assert_int_equal(px, 144);
	assert_float_equal(actual, geom_angle_deg(144.0 / (1920.0 / 53.0), 57.0), 1e-12);
	assert_true(actual < 4.0 && actual > 3.99);
}

int main(void)
{
	const struct CMUnitTest tests[] = {
		cmocka_unit_test(geom_testOneCmAt57),
		cmocka_unit_test(geom_testTenCmAt57),
		cmocka_unit_test(geom_testSizeInverse),
		cmocka_unit_test(geom_testPixels),
	};
	return cmocka_run_group_tests(tests, NULL, NULL);
}
