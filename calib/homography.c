#include "homography.h"

#include <math.h>
#include <string.h>

#include "linalg.h"

/* Hartley's normalisation: t maps p to centred points at mean distance sqrt 2. */
static void normaliser(const double *p, int n, double t[9])
{
    double cx = 0, cy = 0, d = 0;
    for (int i = 0; i < n; i++) {
        cx += p[2 * i];
        cy += p[2 * i + 1];
    }
    cx /= n;
    cy /= n;
    for (int i = 0; i < n; i++)
        d += hypot(p[2 * i] - cx, p[2 * i + 1] - cy);
    double s = d > 0 ? sqrt(2.0) * n / d : 1;
    double m[9] = {s, 0, -s * cx, 0, s, -s * cy, 0, 0, 1};
    memcpy(t, m, sizeof m);
}

static void mul3(const double *a, const double *b, double *c)
{
    double r[9];
    for (int i = 0; i < 3; i++)
        for (int j = 0; j < 3; j++)
            r[i * 3 + j] = a[i * 3] * b[j] + a[i * 3 + 1] * b[3 + j] + a[i * 3 + 2] * b[6 + j];
    memcpy(c, r, sizeof r);
}

void homography_apply(const double h[9], double x, double y, double *ox, double *oy)
{
    double w = h[6] * x + h[7] * y + h[8];
    *ox = (h[0] * x + h[1] * y + h[2]) / w;
    *oy = (h[3] * x + h[4] * y + h[5]) / w;
}

int homography_invert(const double h[9], double inv[9])
{
    double c[9] = {h[4] * h[8] - h[5] * h[7], h[2] * h[7] - h[1] * h[8], h[1] * h[5] - h[2] * h[4],
                   h[5] * h[6] - h[3] * h[8], h[0] * h[8] - h[2] * h[6], h[2] * h[3] - h[0] * h[5],
                   h[3] * h[7] - h[4] * h[6], h[1] * h[6] - h[0] * h[7], h[0] * h[4] - h[1] * h[3]};
    double det = h[0] * c[0] + h[1] * c[3] + h[2] * c[6];
    if (!(fabs(det) > 1e-300) || !(fabs(c[8]) > 1e-300))
        return -1;
    for (int i = 0; i < 9; i++)
        inv[i] = c[i] / c[8];
    return 0;
}

void homography_jacobian(const double h[9], double x, double y, double j[4])
{
    double w = h[6] * x + h[7] * y + h[8];
    double u = (h[0] * x + h[1] * y + h[2]) / w, v = (h[3] * x + h[4] * y + h[5]) / w;
    j[0] = (h[0] - u * h[6]) / w;
    j[1] = (h[1] - u * h[7]) / w;
    j[2] = (h[3] - v * h[6]) / w;
    j[3] = (h[4] - v * h[7]) / w;
}

static int dlt(const double *src, const double *dst, int n, double h[9])
{
    double ts[9], td[9], a[81] = {0};
    normaliser(src, n, ts);
    normaliser(dst, n, td);
    for (int i = 0; i < n; i++) {
        double x = ts[0] * src[2 * i] + ts[2], y = ts[4] * src[2 * i + 1] + ts[5];
        double u = td[0] * dst[2 * i] + td[2], v = td[4] * dst[2 * i + 1] + td[5];
        double r[2][9] = {{-x, -y, -1, 0, 0, 0, u * x, u * y, u},
                          {0, 0, 0, -x, -y, -1, v * x, v * y, v}};
        for (int k = 0; k < 2; k++)
            for (int p = 0; p < 9; p++)
                for (int q = 0; q < 9; q++)
                    a[p * 9 + q] += r[k][p] * r[k][q];
    }
    double hn[9], tdi[9];
    linalg_smallest_eigvec(a, 9, hn);
    /* H = Td^-1 Hn Ts */
    if (homography_invert(td, tdi))
        return -1;
    mul3(tdi, hn, h);
    mul3(h, ts, h);
    if (!(fabs(h[8]) > 1e-300))
        return -1;
    for (int i = 8; i >= 0; i--)
        h[i] /= h[8];
    return 0;
}

static double sq_error(const double h[9], const double *src, const double *dst, int n)
{
    double s = 0;
    for (int i = 0; i < n; i++) {
        double u, v;
        homography_apply(h, src[2 * i], src[2 * i + 1], &u, &v);
        s += (u - dst[2 * i]) * (u - dst[2 * i]) + (v - dst[2 * i + 1]) * (v - dst[2 * i + 1]);
    }
    return s;
}

/* Gauss-Newton over h0..h7 (h8 = 1), a step kept only when it lowers the error. */
static void refine(double h[9], const double *src, const double *dst, int n)
{
    double err = sq_error(h, src, dst, n);
    for (int it = 0; it < 20; it++) {
        double a[64] = {0}, b[8] = {0};
        for (int i = 0; i < n; i++) {
            double x = src[2 * i], y = src[2 * i + 1];
            double w = h[6] * x + h[7] * y + 1;
            double u = (h[0] * x + h[1] * y + h[2]) / w, v = (h[3] * x + h[4] * y + h[5]) / w;
            double ju[8] = {x / w, y / w, 1 / w, 0, 0, 0, -u * x / w, -u * y / w};
            double jv[8] = {0, 0, 0, x / w, y / w, 1 / w, -v * x / w, -v * y / w};
            double ru = dst[2 * i] - u, rv = dst[2 * i + 1] - v;
            for (int p = 0; p < 8; p++) {
                b[p] += ju[p] * ru + jv[p] * rv;
                for (int q = 0; q < 8; q++)
                    a[p * 8 + q] += ju[p] * ju[q] + jv[p] * jv[q];
            }
        }
        if (linalg_solve(a, b, 8))
            return;
        double t[9];
        for (int p = 0; p < 8; p++)
            t[p] = h[p] + b[p];
        t[8] = 1;
        double e2 = sq_error(t, src, dst, n);
        if (!(e2 < err))
            return;
        int small = err - e2 < 1e-12 * err;
        memcpy(h, t, sizeof t);
        err = e2;
        if (small)
            return;
    }
}

int homography_fit(const double *src, const double *dst, int n, double h[9], struct err *e)
{
    if (n < 4)
        return err_set(e, ST_EINVAL, "a homography needs at least 4 points, got %d", n);
    if (dlt(src, dst, n, h))
        return err_set(e, ST_EFORMAT, "the points do not determine a homography (degenerate layout)");
    refine(h, src, dst, n);
    return ST_OK;
}
