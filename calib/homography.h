/* homography: the projective map between a plane and an image, fitted to
 * point pairs.
 *
 * H is 3x3 row-major and maps homogeneous src (x, y, 1) to dst: dst =
 * (h0 x + h1 y + h2, h3 x + h4 y + h5) / (h6 x + h7 y + h8).  The fit is
 * the normalised DLT (Hartley: each point set translated to its centroid
 * and scaled to mean distance sqrt 2, H from the smallest eigenvector of
 * the 9x9 normal matrix), then Gauss-Newton on the reprojection error in
 * dst, which is what a corner detector's noise lives in.  Scaled so that
 * h8 = 1 (a camera looking at a plane in front of it never has h8 = 0).
 * Pure functions: no heap, no state. */
#ifndef ST_CALIB_HOMOGRAPHY_H
#define ST_CALIB_HOMOGRAPHY_H

#include "core/err.h"

/* src, dst: n points as x, y pairs, n >= 4, not 3 on a line in general. */
int homography_fit(const double *src, const double *dst, int n, double h[9], struct err *e);

void homography_apply(const double h[9], double x, double y, double *ox, double *oy);

/* The inverse map, scaled to h8 = 1; -1 when h is singular. */
int homography_invert(const double h[9], double inv[9]);

/* Jacobian d(out)/d(in) at (x, y): j = {dox/dx, dox/dy, doy/dx, doy/dy}. */
void homography_jacobian(const double h[9], double x, double y, double j[4]);

#endif
