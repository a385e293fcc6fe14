/* geom — visual angle and its conversion to centimetres and pixels (exact formula).
 *
 * angle = 2·atan(size / (2·distance)). Pixels per degree are taken at the screen centre: the
 * number of pixels spanning one degree centred on the line of sight. */
#ifndef TACHIST_GEOM_H
#define TACHIST_GEOM_H

struct rig;

/* Degrees subtended by SIZE_CM at DISTANCE_CM. */
double geom_angle_deg(double size_cm, double distance_cm);
/* Centimetres that subtend DEG at DISTANCE_CM. */
double geom_size_cm(double deg, double distance_cm);
/* Horizontal pixels per centimetre of the rig's screen. */
double geom_px_per_cm(const struct rig *r);
/* Pixels per degree at the screen centre. */
double geom_px_per_deg(const struct rig *r);
/* A stimulus of DEG degrees as a whole number of pixels (nearest), and the degrees that number of
 * pixels actually subtends. Returns the pixel count. */
int geom_deg_to_px(const struct rig *r, double deg, double *deg_actual);

#endif
