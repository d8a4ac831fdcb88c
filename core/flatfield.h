/* flatfield: the lighting correction applied to every frame before features.
 *
 * A flat field holds, per pixel and channel, a dark offset and a gain, both
 * smooth maps built by calib/flat.c from frames of a uniform white target
 * (and of the scene with the light off).  Applying it gives
 *     out = clamp(round((in - offset) * gain), 0, 255)
 * so a frame keeps its 8-bit form and the feature code stays untouched;
 * the gain is scaled so that each channel keeps its mean level over the
 * frame (it corrects shading, not colour balance).
 *
 * File (our own, version 1): one line of JSON, then '\n', then little-endian
 * float32 data: w*h*3 gains (pixel-major, R G B), then, when the header says
 * "offset": true, w*h*3 offsets.  The header carries
 *   {"format": "station-flat-field", "version": 1, "width", "height",
 *    "channels": 3, "offset", "sigma", "white_frames", "dark_frames",
 *    "nonuniformity_before", "nonuniformity_after", "created" (UTC ISO 8601),
 *    "data_sha256" (of the float bytes)}.
 * flatfield_load refuses, naming the file: a header that is not that JSON,
 * another format or a newer version, sizes out of bounds, a data length or
 * hash that does not match, a gain that is not finite and in (0, 16], an
 * offset outside [0, 255].  It owns nothing beyond the struct's arrays. */
#ifndef ST_FLATFIELD_H
#define ST_FLATFIELD_H

#include "image.h"

#define FLATFIELD_VERSION 1
#define FLATFIELD_MAX_GAIN 16.0f

struct flat_field {
    int w, h;
    float *gain;               /* w*h*3 */
    float *offset;             /* w*h*3, or NULL: no dark frames */
    double sigma;              /* smoothing of the maps, px */
    int white_frames, dark_frames;
    double nonuniformity_before, nonuniformity_after;
    char created[32];
};

/* Zeroed maps of w x h (gain 1, offset NULL unless with_offset). */
struct flat_field *flatfield_new(int w, int h, int with_offset, struct err *e);
void flatfield_free(struct flat_field *f);

int flatfield_load(const char *path, struct flat_field **out, struct err *e);
int flatfield_save(const char *path, const struct flat_field *f, struct err *e);

/* out (3 channels, same size as in) = the corrected frame; in may have 1 or
 * 3 channels (grey is read as R = G = B).  A size other than the field's is
 * ST_EINVAL. */
int flatfield_apply(const struct flat_field *f, const struct image *in, struct image *out,
                    struct err *e);

#endif
