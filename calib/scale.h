/* scale: the pixel-to-mm map of the part plane from one view of a
 * checkerboard lying in it.
 *
 * The board's corners (corners_find order, square_mm apart, corner 0 at
 * the plane's origin) give the plane-to-image homography (homography_fit);
 * its inverse maps image pixels to plane mm.  With a lens the corners are
 * corrected first (lensmodel_correct), so the homography and every figure
 * below are in lens-corrected pixels: the reprojection error is then what
 * the lens model leaves, not the lens's bending itself.  Reported at the board's
 * centre: mm per pixel along the image's x and y (the lengths of the
 * columns of the inverse map's Jacobian there), the tilt of the camera's
 * axis against the plane's normal, and the reprojection error of every
 * corner, RMS and worst, in px (board point through the homography vs the
 * corner found) and in mm (corner found through the inverse vs the board
 * point).  Tilt needs the camera matrix: the lens's where one was
 * calibrated, else square pixels, the principal point at the frame's
 * centre and the focal length the view itself implies (the plane's two
 * axes perpendicular and of equal length); a board seen nearly head-on
 * does not determine the focal length, and then the tilt is reported as
 * 0, which is what it nearly is.  No heap, no state. */
#ifndef ST_CALIB_SCALE_H
#define ST_CALIB_SCALE_H

#include "core/calfile.h"
#include "core/err.h"
#include "core/image.h"
#include "lens.h"

struct scale_fit {
    double plane_to_image[9];
    double image_to_plane[9];
    double mm_per_px_x, mm_per_px_y;
    double tilt_deg;
    double rms_px, worst_px, rms_mm, worst_mm;
};

/* w, h: the frame's size; lens may be NULL. */
int scale_fit_view(const double *xy, int cols, int rows, double square_mm, int w, int h,
                   const struct lens *lens, struct scale_fit *out, struct err *e);

/* The whole calibration: corners in every frame (all of one size), the
 * lens from 3 or more views, the scale from the first view (the target
 * lying where the part lies; further views only serve the lens).  Refuses
 * a frame without the whole board, naming names[i], and a worst
 * reprojection error over max_error_px.  Fills everything in *out but
 * camera, created and valid_days. */
int scale_calibrate(const struct image *const *frames, const char *const *names, int n, int cols,
                    int rows, double square_mm, double max_error_px, struct calfile *out,
                    struct err *e);

#endif
