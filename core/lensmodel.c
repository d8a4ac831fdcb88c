#include "lensmodel.h"

#include <math.h>

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

void lensmodel_jacobian(const struct lens_model *l, double u, double v, double j[4], double *uo,
                        double *vo)
{
    double x, y;
    ideal_normalised(l, u, v, &x, &y);
    *uo = x * l->fx + l->cx;
    *vo = y * l->fy + l->cy;
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

void lensmodel_bend(const struct lens_model *l, double u, double v, double *uo, double *vo)
{
    double x = (u - l->cx) / l->fx, y = (v - l->cy) / l->fy;
    double r2 = x * x + y * y, d = 1 + l->k1 * r2 + l->k2 * r2 * r2;
    *uo = x * d * l->fx + l->cx;
    *vo = y * d * l->fy + l->cy;
}

int lensmodel_holds(const struct lens_model *l, int w, int h)
{
    enum { STEPS = 16 };
    for (int side = 0; side < 4; side++)
        for (int i = 0; i <= STEPS; i++) {
            double t = (double)i / STEPS;
            double u = side < 2 ? t * (w - 1) : (side == 2 ? 0 : w - 1);
            double v = side < 2 ? (side == 0 ? 0 : h - 1) : t * (h - 1);
            double j[4], ui, vi, ub, vb;
            lensmodel_jacobian(l, u, v, j, &ui, &vi);
            lensmodel_bend(l, ui, vi, &ub, &vb);
            double det = j[0] * j[3] - j[1] * j[2];
            if (!(hypot(ub - u, vb - v) < 1e-3) || !(det > 0) || !isfinite(det))
                return 0;
        }
    return 1;
}
