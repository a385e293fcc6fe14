/* geom — visual angle with the exact formula, and its conversion to centimetres and pixels.
 *
 * angle = 2·atan(size / (2·distance)); its inverse size = 2·distance·tan(angle / 2). Pixels per
 * centimetre are taken horizontally (width_px / width_cm); pixels per degree are the pixels that one
 * degree centred on the line of sight spans at the screen centre. Called by the plan, `check`,
 * `calc` and the presenter. */
#include "geom.h"

#include <math.h>

#include "rig.h"

static const double DEG = 180.0 / M_PI;

double geom_angle_deg(double size_cm, double distance_cm)
{
	return 2.0 * atan(size_cm / (2.0 * distance_cm)) * DEG;
}

double geom_size_cm(double deg, double distance_cm)
{
	return 2.0 * distance_cm * tan(deg / DEG / 2.0);
}

double geom_px_per_cm(const struct rig *r)
{
	return (double)r->width_px / r->width_cm;
}

double geom_px_per_deg(const struct rig *r)
{
	return geom_size_cm(1.0, r->distance_cm) * geom_px_per_cm(r);
}

int geom_deg_to_px(const struct rig *r, double deg, double *deg_actual)
{
	double ppc = geom_px_per_cm(r);
	double px = geom_size_cm(deg, r->distance_cm) * ppc;
	long n = lround(px);
	if (n < 0)
		n = 0;
	if (n > 1000000)
		n = 1000000;
	if (deg_actual)
		*deg_actual = geom_angle_deg((double)n / ppc, r->distance_cm);
	return (int)n;
}
