/* calfile: the station's calibration file, a JSON object we define
 * (documented in README.md, "Calibration file"), written by `station
 * calibrate scale` and read through a recipe's `[scale] calibration`.
 *
 * It holds what inspection needs of a calibration: the camera's id and
 * resolution, the part plane's scale (mm per pixel along image x and y at
 * the target's centre) and the full image-to-plane homography, the
 * camera's tilt against the plane, the reprojection errors, the lens
 * when one was calibrated, when it was made and for how many days it is
 * valid.  calfile_load refuses a newer format, a missing or wrongly typed
 * key, a value out of range and a lens whose correction does not hold over
 * the frame (lensmodel_holds), each as
 * "FILE: what" (ST_EFORMAT or ST_ERANGE; ST_EIO when unreadable); on
 * failure *c is untouched.  A struct calfile is a plain value.  Never
 * prints; the clock is read only by the caller (calfile_age_days takes
 * the time). */
#ifndef ST_CALFILE_H
#define ST_CALFILE_H

#include <jansson.h>
#include <time.h>

#include "err.h"
#include "lensmodel.h"

/* 2: the lens object says whether image_to_plane applies to lens-corrected
 * pixels (format 1 files are read as "no": their homography was fitted to
 * the pixels as the camera saw them). */
#define CALFILE_FORMAT 2

struct calfile {
    int format;
    char camera[64];            /* [A-Za-z0-9._-], the camera's own id */
    int width, height;          /* frame size it applies to */
    double mm_per_px_x, mm_per_px_y;
    double image_to_plane[9];   /* pixel (x, y, 1) -> plane mm, row-major, h8 = 1 */
    double tilt_deg;
    double rms_px, worst_px, rms_mm, worst_mm;
    int board_cols, board_rows; /* inner corners */
    double square_mm;
    int views;
    int has_lens;               /* lens below was calibrated from 3 or more views */
    struct lens_model lens;
    double lens_rms_px;
    int lens_corrected;         /* image_to_plane maps lens-corrected pixels
                                   (lensmodel_correct first); 0: the pixels as seen */
    long long created;          /* seconds since 1970-01-01 UTC; "YYYY-MM-DDTHH:MM:SSZ" in the file */
    int valid_days;             /* 1..3650 */
};

int calfile_save(const char *path, const struct calfile *c, struct err *e);
int calfile_load(const char *path, struct calfile *c, struct err *e);

/* The lens as a JSON object (fx fy cx cy k1 k2 rms_px corrected_pixels),
 * what the file and `station calibrate`'s report hold; NULL without a
 * lens or memory.  The caller owns it. */
json_t *calfile_lens_json(const struct calfile *c);

/* Days between c->created and now (negative when made in the future). */
double calfile_age_days(const struct calfile *c, time_t now);

/* "YYYY-MM-DDTHH:MM:SSZ" of t (UTC) in buf (at least 21 bytes). */
void calfile_format_time(long long t, char *buf, size_t len);

#endif
