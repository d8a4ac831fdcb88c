/* lensmodel: the camera's radial lens model, applied to pixels — what the
 * calibration fits (calib/lens.h) and what measurement undoes.
 *
 * Model: an ideal (pinhole) pixel (u', v') has normalised coordinates
 * x = (u' - cx) / fx, y = (v' - cy) / fy; the lens bends them radially to
 * x (1 + k1 r^2 + k2 r^4), r^2 = x^2 + y^2, and the camera records that
 * point as the observed pixel.  No tangential term, no skew: the model of
 * OpenCV's calibrateCamera with CALIB_ZERO_TANGENT_DIST and CALIB_FIX_K3,
 * so cv2.undistortPoints(..., P = K) is the reference for lensmodel_correct.
 * Pure functions on a plain value; no heap, no state. */
#ifndef ST_LENSMODEL_H
#define ST_LENSMODEL_H

struct lens_model {
    double fx, fy, cx, cy;   /* px */
    double k1, k2;
};

/* The ideal pixel of an observed one (fixed-point inversion of the radial
 * term, good to 1e-6 px for the distortion of ordinary lenses). */
void lensmodel_correct(const struct lens_model *l, double u, double v, double *uo, double *vo);

/* The Jacobian d(ideal)/d(observed) at the observed pixel (u, v), 2x2
 * row-major: the inverse of the bending's Jacobian at the ideal pixel. */
void lensmodel_jacobian(const struct lens_model *l, double u, double v, double j[4]);

#endif
