#include "lensmodel.h"

/* Normalised ideal coordinates of the observed pixel (u, v). */
static void ideal_normalised(const struct lens_model *l, double u, double v, double *x, double *y)
{
    double xd = (u - l->cx) / l->fx, yd = (v - l->cy) / l->fy;
    *x = xd;
    *y = yd;
    for (int it = 0; it < 20; it++) {
        double r2 = *x * *x + *y * *y, d = 1 + l->k1 * r2 + l->k2 * r2 * r2;
        *x = xd / d;
        *y = yd / d;
    }
}

void lensmodel_correct(const struct lens_model *l, double u, double v, double *uo, double *vo)
{
    double x, y;
    ideal_normalised(l, u, v, &x, &y);
    *uo = x * l->fx + l->cx;
    *vo = y * l->fy + l->cy;
}

void lensmodel_jacobian(const struct lens_model *l, double u, double v, double j[4])
{
    double x, y;
    ideal_normalised(l, u, v, &x, &y);
    /* bending b(x, y) = (x d, y d), d = 1 + k1 r^2 + k2 r^4; in pixels the
     * fx, fy scalings of both sides cancel on the diagonal and scale the
     * cross terms by fx / fy and fy / fx. */
    double r2 = x * x + y * y, d = 1 + l->k1 * r2 + l->k2 * r2 * r2;
    double dd = 2 * l->k1 + 4 * l->k2 * r2;   /* (d d / d r^2) * 2 */
    double a = d + x * x * dd, b = x * y * dd * l->fx / l->fy;
    double c = x * y * dd * l->fy / l->fx, e = d + y * y * dd;
    double det = a * e - b * c;
    j[0] = e / det;
    j[1] = -b / det;
    j[2] = -c / det;
    j[3] = a / det;
}
