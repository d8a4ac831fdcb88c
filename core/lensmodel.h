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

/* The ideal pixel (uo, vo) of the observed (u, v), as lensmodel_correct,
 * and the Jacobian d(ideal)/d(observed) there, 2x2 row-major: the inverse
 * of the bending's Jacobian at the ideal pixel. */
void lensmodel_jacobian(const struct lens_model *l, double u, double v, double j[4], double *uo,
                        double *vo);

/* The observed pixel of an ideal one: the model itself. */
void lensmodel_bend(const struct lens_model *l, double u, double v, double *uo, double *vo);

/* 1 when the correction holds over a w x h frame: at 16 points along each
 * edge (corners included) the corrected pixel bends back to within 1e-3 px
 * and the Jacobian keeps its orientation.  A radial model fitted to a
 * board in the middle can fold or diverge towards corners it never saw;
 * there a region's area would be meaningless, so such a lens is refused
 * rather than used. */
int lensmodel_holds(const struct lens_model *l, int w, int h);

#endif
