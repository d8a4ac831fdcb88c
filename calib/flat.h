/* flat: building the flat field (core/flatfield.h) from target frames.
 *
 * From N >= 1 frames of a uniform white target filling the view (and
 * optionally M frames with the light off), per channel c:
 *   D_c = G_sigma * mean of the dark frames        (0 without dark frames)
 *   W_c = G_sigma * mean of the white frames - D_c
 *   gain_c(x) = mean over the frame of W_c / W_c(x),   offset_c = D_c
 * G_sigma is scipy.ndimage.gaussian_filter(sigma, mode='reflect',
 * truncate=4) (core/filters.h), so dust, texture and noise of the target do
 * not print into the gain while the lighting's slow falloff does.  The dark
 * map is smoothed too: it corrects ambient light and the sensor's black
 * level, not single hot pixels.
 *
 * Non-uniformity of a frame (our definition, stated so it can be checked):
 * the grey (0.299 R + 0.587 G + 0.114 B) of the frame smoothed by G_sigma,
 * over the central region (the frame less a margin of 5% of each side),
 * as (max - min) / mean.  The margin keeps the reflected border of the
 * smoothing out of the figure.  flat_compute reports it for the mean white
 * frame before and after correction.
 *
 * Refused, naming the frame: sizes that differ, a white frame with more
 * than 0.1% of its pixels saturated in a channel (the gain would be wrong
 * where it clipped), a white field darker than 1/FLATFIELD_MAX_GAIN of its
 * mean anywhere or below 8 grey levels (light off, target missing). */
#ifndef ST_CALIB_FLAT_H
#define ST_CALIB_FLAT_H

#include "core/flatfield.h"

#define FLAT_DEFAULT_SIGMA 8.0

/* names[i] labels white[i] (then dark[i]) in messages. */
int flat_compute(struct image *const *white, const char *const *white_names, int nwhite,
                 struct image *const *dark, const char *const *dark_names, int ndark,
                 double sigma, struct flat_field **out, struct err *e);

int flat_measure_nonuniformity(const struct image *img, double sigma, double *out,
                               struct err *e);

#endif
