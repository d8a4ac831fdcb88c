/* lens: the camera matrix and radial distortion from several views of a
 * checkerboard (Zhang's method).
 *
 * Model (core/lensmodel.h): a board point X in the camera frame (R X + t)
 * projects to normalised x = X/Z, y = Y/Z, is bent radially to
 * x (1 + k1 r^2 + k2 r^4) (r^2 = x^2 + y^2), then u = fx x + cx,
 * v = fy y + cy (no skew, no tangential term: OpenCV's calibrateCamera
 * with CALIB_ZERO_TANGENT_DIST and CALIB_FIX_K3 fits the same model).  Start: one homography per view,
 * the closed form for B = K^-T K^-1 from h1^T B h2 = 0 and h1^T B h1 =
 * h2^T B h2, pose from K^-1 H, distortion 0.  Then Levenberg-Marquardt on
 * the reprojection error of every corner over all parameters (numeric
 * Jacobian; a few dozen views of a few dozen corners are well within a
 * dense solve).  Allocates its work and frees it; no state. */
#ifndef ST_CALIB_LENS_H
#define ST_CALIB_LENS_H

#include "core/err.h"
#include "core/lensmodel.h"

#define LENS_MAX_VIEWS 64

struct lens {
    struct lens_model m;     /* the model (core/lensmodel.h) */
    double rms_px;           /* reprojection error over every corner of every view */
};

/* xy[v]: 2 * cols * rows image points of view v (corners_find's order);
 * at least 3 views. */
int lens_calibrate(const double *const *xy, int nviews, int cols, int rows, double square_mm,
                   struct lens *out, struct err *e);

#endif
