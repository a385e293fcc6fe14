/* rig_lum — the [luminance] section of a rig profile: reading it (called by rig.c for each of the
 * section's entries) and writing it back into the profile, atomically, leaving every other section
 * and comment as it was.
 *
 *   [luminance]
 *   measured = 2026-12-02          date of the photometer readings (required)
 *   max_age_days = 30              `check` warns when the calibration is older
 *   model = auto                   auto | fit | table (auto: table when the fit is poor)
 *   gamma = 2.21                   the fit of the grey channel (all three at one code)
 *   l_min = 0.41                   cd/m², light at code 0 by the fit
 *   l_max = 101.2                  cd/m², light at code 255 by the fit
 *   reading = 128 21.6             one photometer reading: code, cd/m² (repeated)
 *   gamma_red = ... l_min_red = ... l_max_red = ... reading_red = ...   (and _green, _blue)
 *
 * A channel is present when its gamma, l_min and l_max are all given; its readings are optional
 * (without them the table model is unavailable). */
#ifndef TACHIST_RIG_LUM_H
#define TACHIST_RIG_LUM_H

#include <stdbool.h>
#include <stddef.h>
#include <stdint.h>

#include "diag.h"
#include "lum.h"

struct rig_lum_parse;

struct rig_lum_parse *rig_lum_parse_new(void);
/* One KEY = VALUE of the section, on LINE of FILE; problems go to D. */
void rig_lum_parse_entry(struct rig_lum_parse *p, const char *file, const char *key,
			 const char *value, int line, struct diag_list *d);
/* Ends the section (header on LINE) and frees P: returns the calibration (malloc'd, the caller
 * frees it with free()) or NULL after adding errors to D. */
struct lum_cal *rig_lum_parse_finish(struct rig_lum_parse *p, const char *file, int line,
				     struct diag_list *d);

/* The [luminance] section for CAL as text (malloc'd), ending in a newline. */
char *rig_lum_format(const struct lum_cal *cal);
/* Rewrites the rig profile PATH with CAL as its [luminance] section: an existing section is
 * replaced where it stands (its own comments go with it), otherwise the section is appended. The
 * new text is written to a temporary file in the same folder, flushed to disk and renamed over
 * PATH, so a crash leaves either the old or the new profile. Returns 0, or -1 with a sentence in
 * ERR (PATH is then unchanged). */
int rig_lum_write(const char *path, const struct lum_cal *cal, char *err, size_t errlen);

struct protocol;
struct rig;

/* Joins a protocol to its rig's calibration: a background asked in cd/m² becomes the code whose
 * light is nearest (P->background, with the light in P->background_cd_achieved); `linearize` and
 * `background_cd` without a calibrated grey channel are errors at their protocol lines; a
 * calibration older than its max_age_days on TODAY (YYYY-MM-DD; NULL = now) is a warning on the
 * rig. Returns 0, or -1 when an error went to D. */
int rig_lum_apply(struct protocol *p, const struct rig *r, const char *today,
		  struct diag_list *d);

/* The linearising table of channel C of the rig (T[256] per channel, grey used for a channel that
 * was not measured on its own); false when the rig has no calibration of any channel. */
bool rig_lum_tables(const struct rig *r, uint8_t t[3][256]);

#endif
