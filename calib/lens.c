#include "lens.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>

#include "homography.h"
#include "linalg.h"

#define NI 6    /* fx fy cx cy k1 k2 */
#define NPOSE 6 /* rotation vector, translation */

struct problem {
    const double *const *xy;
    int nviews, npts, cols;
    double square;
};

static void rodrigues(const double *w, double r[9])
{
    double th = sqrt(w[0] * w[0] + w[1] * w[1] + w[2] * w[2]);
    double k[3] = {0, 0, 0}, c = cos(th), s = sin(th);
    if (th > 1e-12)
        for (int i = 0; i < 3; i++)
            k[i] = w[i] / th;
    double kx = k[0], ky = k[1], kz = k[2], v = 1 - c;
    double m[9] = {c + kx * kx * v,      kx * ky * v - kz * s, kx * kz * v + ky * s,
                   ky * kx * v + kz * s, c + ky * ky * v,      ky * kz * v - kx * s,
                   kz * kx * v - ky * s, kz * ky * v + kx * s, c + kz * kz * v};
    memcpy(r, m, sizeof m);
}

/* The rotation vector of a rotation matrix. */
static void rotvec(const double r[9], double *w)
{
    double c = 0.5 * (r[0] + r[4] + r[8] - 1);
    c = c > 1 ? 1 : c < -1 ? -1 : c;
    double th = acos(c), s = sin(th);
    if (s < 1e-6 && c > 0) {
        w[0] = w[1] = w[2] = 0;
        return;
    }
    if (s < 1e-6) { /* a half-turn: the axis from the diagonal, signs from the largest part */
        double k[3];
        int m = 0;
        for (int i = 0; i < 3; i++) {
            k[i] = sqrt(fmax(0, (r[4 * i] + 1) / 2));
            if (k[i] > k[m])
                m = i;
        }
        for (int i = 0; i < 3; i++)
            if (i != m && r[3 * m + i] < 0)
                k[i] = -k[i];
        for (int i = 0; i < 3; i++)
            w[i] = th * k[i];
        return;
    }
    w[0] = th * (r[7] - r[5]) / (2 * s);
    w[1] = th * (r[2] - r[6]) / (2 * s);
    w[2] = th * (r[3] - r[1]) / (2 * s);
}

static void project(const double *in, const double *pose, double X, double Y, double *u, double *v)
{
    double r[9];
    rodrigues(pose, r);
    double xc = r[0] * X + r[1] * Y + pose[3], yc = r[3] * X + r[4] * Y + pose[4];
    double zc = r[6] * X + r[7] * Y + pose[5];
    double x = xc / zc, y = yc / zc, r2 = x * x + y * y;
    double d = 1 + in[4] * r2 + in[5] * r2 * r2;
    *u = in[0] * x * d + in[2];
    *v = in[1] * y * d + in[3];
}

/* Residuals of view vw into res + 2 * vw * npts; the sum of their squares. */
static double view_residuals(const struct problem *p, const double *par, int vw, double *res)
{
    double s = 0;
    for (int k = 0; k < p->npts; k++) {
        double u, v;
        project(par, par + NI + 6 * vw, (k % p->cols) * p->square, (k / p->cols) * p->square, &u,
                &v);
        double *o = res + 2 * ((size_t)vw * p->npts + k);
        o[0] = u - p->xy[vw][2 * k];
        o[1] = v - p->xy[vw][2 * k + 1];
        s += o[0] * o[0] + o[1] * o[1];
    }
    return s;
}

/* Residuals of every view; res holds 2 * nviews * npts. */
static double residuals(const struct problem *p, const double *par, double *res)
{
    double s = 0;
    for (int vw = 0; vw < p->nviews; vw++)
        s += view_residuals(p, par, vw, res);
    return s;
}

static int initial_guess(const struct problem *p, double *par, struct err *e)
{
    double *obj = malloc(2 * sizeof(double) * p->npts);
    double (*hs)[9] = malloc(sizeof *hs * p->nviews);
    int rc = ST_OK;
    if (!obj || !hs) {
        rc = err_set(e, ST_ENOMEM, "out of memory calibrating the lens");
        goto fail;
    }
    for (int k = 0; k < p->npts; k++) {
        obj[2 * k] = (k % p->cols) * p->square;
        obj[2 * k + 1] = (k / p->cols) * p->square;
    }
    /* B is solved in image coordinates centred on the corners and scaled to
     * unit spread, else its entries span 20 orders of magnitude */
    double mx = 0, my = 0, sc = 0, vtv[36] = {0};
    for (int vw = 0; vw < p->nviews; vw++)
        for (int k = 0; k < p->npts; k++) {
            mx += p->xy[vw][2 * k];
            my += p->xy[vw][2 * k + 1];
        }
    mx /= (double)p->nviews * p->npts;
    my /= (double)p->nviews * p->npts;
    for (int vw = 0; vw < p->nviews; vw++)
        for (int k = 0; k < p->npts; k++)
            sc += hypot(p->xy[vw][2 * k] - mx, p->xy[vw][2 * k + 1] - my);
    sc /= (double)p->nviews * p->npts;
    for (int vw = 0; vw < p->nviews; vw++) {
        if ((rc = homography_fit(obj, p->xy[vw], p->npts, hs[vw], e)))
            goto fail;
        const double *g = hs[vw];
        double h[9], nrm = 0;
        for (int i = 0; i < 3; i++) {
            h[i] = (g[i] - mx * g[6 + i]) / sc;
            h[3 + i] = (g[3 + i] - my * g[6 + i]) / sc;
            h[6 + i] = g[6 + i];
        }
        for (int i = 0; i < 9; i++)
            nrm += h[i] * h[i];
        for (int i = 0; i < 9; i++)
            h[i] /= sqrt(nrm);
        /* column i of H is (h[i], h[3 + i], h[6 + i]) */
#define VIJ(i, j)                                                                              \
    {h[i] * h[j], h[i] * h[3 + j] + h[3 + i] * h[j], h[3 + i] * h[3 + j],                   \
     h[6 + i] * h[j] + h[i] * h[6 + j], h[6 + i] * h[3 + j] + h[3 + i] * h[6 + j],          \
     h[6 + i] * h[6 + j]}
        double v12[6] = VIJ(0, 1), v11[6] = VIJ(0, 0), v22[6] = VIJ(1, 1);
#undef VIJ
        for (int a = 0; a < 6; a++)
            for (int b = 0; b < 6; b++)
                vtv[a * 6 + b] += v12[a] * v12[b] + (v11[a] - v22[a]) * (v11[b] - v22[b]);
    }
    double b[6];
    linalg_smallest_eigvec(vtv, 6, b); /* B11 B12 B22 B13 B23 B33 */
    double den = b[0] * b[2] - b[1] * b[1];
    double v0 = (b[1] * b[3] - b[0] * b[4]) / den;
    double lam = b[5] - (b[3] * b[3] + v0 * (b[1] * b[3] - b[0] * b[4])) / b[0];
    double al2 = lam / b[0], be2 = lam * b[0] / den;
    if (!(al2 > 0) || !(be2 > 0)) {
        rc = err_set(e, ST_EFORMAT,
                     "the views do not determine the camera (boards too alike in pose: tilt the "
                     "board differently in each view)");
        goto fail;
    }
    double fx = sqrt(al2), fy = sqrt(be2), gam = -b[1] * fx * fx * fy / lam;
    double u0 = gam * v0 / fy - b[3] * fx * fx / lam;
    /* back to pixels; the skew is dropped (square pixel grid) */
    fx *= sc;
    fy *= sc;
    u0 = u0 * sc + mx;
    v0 = v0 * sc + my;
    double in[NI] = {fx, fy, u0, v0, 0, 0};
    memcpy(par, in, sizeof in);
    for (int vw = 0; vw < p->nviews; vw++) {
        const double *h = hs[vw];
        double c[3][3]; /* K^-1 columns of H, no skew */
        for (int i = 0; i < 3; i++) {
            c[i][1] = (h[3 + i] - v0 * h[6 + i]) / fy;
            c[i][0] = (h[i] - u0 * h[6 + i]) / fx;
            c[i][2] = h[6 + i];
        }
        double l = 1 / sqrt(c[0][0] * c[0][0] + c[0][1] * c[0][1] + c[0][2] * c[0][2]);
        if (c[2][2] * l < 0)
            l = -l; /* the board in front of the camera */
        double r1[3], r2[3], r3[3];
        for (int i = 0; i < 3; i++)
            r1[i] = l * c[0][i];
        double d = 0;
        for (int i = 0; i < 3; i++)
            d += r1[i] * l * c[1][i];
        for (int i = 0; i < 3; i++)
            r2[i] = l * c[1][i] - d * r1[i];
        double n2 = sqrt(r2[0] * r2[0] + r2[1] * r2[1] + r2[2] * r2[2]);
        for (int i = 0; i < 3; i++)
            r2[i] /= n2;
        r3[0] = r1[1] * r2[2] - r1[2] * r2[1];
        r3[1] = r1[2] * r2[0] - r1[0] * r2[2];
        r3[2] = r1[0] * r2[1] - r1[1] * r2[0];
        double rm[9] = {r1[0], r2[0], r3[0], r1[1], r2[1], r3[1], r1[2], r2[2], r3[2]};
        double *pose = par + NI + 6 * vw;
        rotvec(rm, pose);
        for (int i = 0; i < 3; i++)
            pose[3 + i] = l * c[2][i];
    }
fail:
    free(obj);
    free(hs);
    return rc;
}

/* Levenberg-Marquardt with a forward-difference Jacobian. */
static int refine(const struct problem *p, double *par, int np, double *rms, struct err *e)
{
    size_t nr = 2 * (size_t)p->nviews * p->npts;
    double *res = malloc(nr * sizeof *res), *r2 = malloc(nr * sizeof *r2);
    double *jac = malloc(nr * np * sizeof *jac), *a = malloc((size_t)np * np * sizeof *a);
    double *g = malloc(np * sizeof *g), *trial = malloc(np * sizeof *trial);
    int rc = ST_OK;
    if (!res || !r2 || !jac || !a || !g || !trial) {
        rc = err_set(e, ST_ENOMEM, "out of memory calibrating the lens");
        goto fail;
    }
    double cost = residuals(p, par, res), mu = 1e-3;
    for (int it = 0; it < 100; it++) {
        for (int q = 0; q < np; q++) {
            double keep = par[q], step = 1e-6 * (fabs(keep) > 1 ? fabs(keep) : 1);
            /* a pose moves only its own view's residuals */
            int v0 = q < NI ? 0 : (q - NI) / 6, v1 = q < NI ? p->nviews : v0 + 1;
            size_t i0 = 2 * (size_t)v0 * p->npts, i1 = 2 * (size_t)v1 * p->npts;
            par[q] = keep + step;
            for (int vw = v0; vw < v1; vw++)
                view_residuals(p, par, vw, r2);
            par[q] = keep;
            for (size_t i = 0; i < nr; i++)
                jac[i * np + q] = i >= i0 && i < i1 ? (r2[i] - res[i]) / step : 0;
        }
        memset(g, 0, np * sizeof *g);
        memset(a, 0, (size_t)np * np * sizeof *a);
        for (size_t i = 0; i < nr; i++) {
            /* a row is non-zero in the intrinsics and its own view's pose only */
            const double *ji = jac + i * np;
            int idx[NI + NPOSE], vw = (int)(i / (2 * (size_t)p->npts));
            for (int k = 0; k < NI; k++)
                idx[k] = k;
            for (int k = 0; k < NPOSE; k++)
                idx[NI + k] = NI + NPOSE * vw + k;
            for (int qa = 0; qa < NI + NPOSE; qa++) {
                int q = idx[qa];
                g[q] -= ji[q] * res[i];
                for (int ta = 0; ta < NI + NPOSE; ta++)
                    a[q * np + idx[ta]] += ji[q] * ji[idx[ta]];
            }
        }
        int better = 0;
        for (int tries = 0; tries < 10 && !better; tries++) {
            double *m = malloc((size_t)np * np * sizeof *m);
            if (!m) {
                rc = err_set(e, ST_ENOMEM, "out of memory calibrating the lens");
                goto fail;
            }
            memcpy(m, a, (size_t)np * np * sizeof *m);
            for (int q = 0; q < np; q++) {
                m[q * np + q] *= 1 + mu;
                trial[q] = g[q];
            }
            int sing = linalg_solve(m, trial, np);
            free(m);
            if (!sing) {
                for (int q = 0; q < np; q++)
                    trial[q] += par[q];
                double c2 = residuals(p, trial, r2);
                if (c2 < cost) {
                    better = 1;
                    int done = cost - c2 < 1e-10 * cost;
                    memcpy(par, trial, np * sizeof *par);
                    memcpy(res, r2, nr * sizeof *res);
                    cost = c2;
                    mu *= 0.3;
                    if (done)
                        it = 1000;
                    continue;
                }
            }
            mu *= 10;
        }
        if (!better)
            break;
    }
    *rms = sqrt(cost / (nr / 2));
fail:
    free(res);
    free(r2);
    free(jac);
    free(a);
    free(g);
    free(trial);
    return rc;
}

int lens_calibrate(const double *const *xy, int nviews, int cols, int rows, double square_mm,
                   struct lens *out, struct err *e)
{
    if (nviews < 3 || nviews > LENS_MAX_VIEWS)
        return err_set(e, ST_EINVAL, "lens calibration needs 3 to %d views, got %d", LENS_MAX_VIEWS,
                       nviews);
    struct problem p = {xy, nviews, cols * rows, cols, square_mm};
    int np = NI + 6 * nviews, rc;
    double *par = malloc(np * sizeof *par);
    if (!par)
        return err_set(e, ST_ENOMEM, "out of memory calibrating the lens");
    if (!(rc = initial_guess(&p, par, e)) && !(rc = refine(&p, par, np, &out->rms_px, e))) {
        out->m.fx = par[0];
        out->m.fy = par[1];
        out->m.cx = par[2];
        out->m.cy = par[3];
        out->m.k1 = par[4];
        out->m.k2 = par[5];
    }
    free(par);
    return rc;
}
