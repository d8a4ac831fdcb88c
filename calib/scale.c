#include "scale.h"

#include <math.h>
#include <stdio.h>
#include <stdlib.h>
#include <string.h>

#include "corners.h"
#include "homography.h"

#define RAD_TO_DEG 57.29577951308232

/* Tilt from K^-1 H = [r1 r2 t] up to scale: the angle between the plane's
 * normal r1 x r2 and the optical axis. */
static double tilt_of(const double *hp, double fx, double fy, double cx, double cy)
{
    double r[2][3];
    for (int i = 0; i < 2; i++) {
        r[i][0] = (hp[i] - cx * hp[6 + i]) / fx;
        r[i][1] = (hp[3 + i] - cy * hp[6 + i]) / fy;
        r[i][2] = hp[6 + i];
    }
    double n[3] = {r[0][1] * r[1][2] - r[0][2] * r[1][1], r[0][2] * r[1][0] - r[0][0] * r[1][2],
                   r[0][0] * r[1][1] - r[0][1] * r[1][0]};
    double c = fabs(n[2]) / sqrt(n[0] * n[0] + n[1] * n[1] + n[2] * n[2]);
    return acos(c > 1 ? 1 : c) * RAD_TO_DEG;
}

/* 1/f^2 from the two constraints on the columns of H, principal point
 * (cx, cy): least squares of a_k w + b_k = 0. */
static double focal_from_view(const double *hp, double cx, double cy)
{
    double c[2][3];
    for (int i = 0; i < 2; i++) {
        c[i][0] = hp[i] - cx * hp[6 + i];
        c[i][1] = hp[3 + i] - cy * hp[6 + i];
        c[i][2] = hp[6 + i];
    }
    double a1 = c[0][0] * c[1][0] + c[0][1] * c[1][1], b1 = c[0][2] * c[1][2];
    double a2 = c[0][0] * c[0][0] + c[0][1] * c[0][1] - c[1][0] * c[1][0] - c[1][1] * c[1][1];
    double b2 = c[0][2] * c[0][2] - c[1][2] * c[1][2];
    double s = a1 * a1 + a2 * a2;
    double wf = s > 0 ? -(a1 * b1 + a2 * b2) / s : 0;
    return wf > 0 ? 1 / sqrt(wf) : -1;
}

int scale_fit_view(const double *xy, int cols, int rows, double square_mm, int w, int h,
                   const struct lens *lens, struct scale_fit *out, struct err *e)
{
    int n = cols * rows, rc;
    if (!(square_mm > 0))
        return err_set(e, ST_ERANGE, "square size %g mm must be positive", square_mm);
    double *obj = malloc(4 * sizeof(double) * n), *seen = obj + 2 * n;
    if (!obj)
        return err_set(e, ST_ENOMEM, "out of memory fitting the scale");
    for (int k = 0; k < n; k++) {
        obj[2 * k] = (k % cols) * square_mm;
        obj[2 * k + 1] = (k / cols) * square_mm;
        if (lens)
            lensmodel_correct(&lens->m, xy[2 * k], xy[2 * k + 1], &seen[2 * k], &seen[2 * k + 1]);
        else
            memcpy(&seen[2 * k], &xy[2 * k], 2 * sizeof *xy);
    }
    xy = seen;
    if ((rc = homography_fit(obj, xy, n, out->plane_to_image, e)))
        goto fail;
    if (homography_invert(out->plane_to_image, out->image_to_plane)) {
        rc = err_set(e, ST_EFORMAT, "the board's homography is singular");
        goto fail;
    }
    double s2 = 0, s2mm = 0;
    out->worst_px = out->worst_mm = 0;
    for (int k = 0; k < n; k++) {
        double u, v, x, y;
        homography_apply(out->plane_to_image, obj[2 * k], obj[2 * k + 1], &u, &v);
        homography_apply(out->image_to_plane, xy[2 * k], xy[2 * k + 1], &x, &y);
        double dp = hypot(u - xy[2 * k], v - xy[2 * k + 1]);
        double dm = hypot(x - obj[2 * k], y - obj[2 * k + 1]);
        s2 += dp * dp;
        s2mm += dm * dm;
        out->worst_px = fmax(out->worst_px, dp);
        out->worst_mm = fmax(out->worst_mm, dm);
    }
    out->rms_px = sqrt(s2 / n);
    out->rms_mm = sqrt(s2mm / n);
    double cx, cy, j[4];
    homography_apply(out->plane_to_image, 0.5 * (cols - 1) * square_mm,
                     0.5 * (rows - 1) * square_mm, &cx, &cy);
    homography_jacobian(out->image_to_plane, cx, cy, j);
    out->mm_per_px_x = hypot(j[0], j[2]);
    out->mm_per_px_y = hypot(j[1], j[3]);
    if (lens) {
        out->tilt_deg =
            tilt_of(out->plane_to_image, lens->m.fx, lens->m.fy, lens->m.cx, lens->m.cy);
    } else {
        double pcx = 0.5 * (w - 1), pcy = 0.5 * (h - 1);
        double f = focal_from_view(out->plane_to_image, pcx, pcy);
        out->tilt_deg = f > 0 ? tilt_of(out->plane_to_image, f, f, pcx, pcy) : 0;
    }
fail:
    free(obj);
    return rc;
}

int scale_calibrate(const struct image *const *frames, const char *const *names, int n, int cols,
                    int rows, double square_mm, double max_error_px, struct calfile *out,
                    struct err *e)
{
    if (n < 1 || n > LENS_MAX_VIEWS)
        return err_set(e, ST_EINVAL, "1 to %d target images needed, got %d", LENS_MAX_VIEWS, n);
    if (cols < 2 || rows < 2 || cols * rows > CORNERS_MAX)
        return err_set(e, ST_EINVAL, "board %dx%d: need at least 2x2 and at most %d corners", cols,
                       rows, CORNERS_MAX);
    size_t per = 2 * (size_t)cols * rows;
    double *xy = malloc(per * n * sizeof *xy);
    const double *views[LENS_MAX_VIEWS];
    int rc = ST_OK;
    if (!xy)
        return err_set(e, ST_ENOMEM, "out of memory calibrating");
    for (int i = 0; i < n; i++) {
        if (frames[i]->w != frames[0]->w || frames[i]->h != frames[0]->h) {
            rc = err_set(e, ST_EFORMAT, "%s: %dx%d, but %s is %dx%d: one camera, one size",
                         names[i], frames[i]->w, frames[i]->h, names[0], frames[0]->w,
                         frames[0]->h);
            goto fail;
        }
        if ((rc = corners_find(frames[i], cols, rows, xy + per * i, e))) {
            char msg[sizeof e->msg];
            snprintf(msg, sizeof msg, "%s", e->msg);
            rc = err_set(e, rc, "%s: %s", names[i], msg);
            goto fail;
        }
        views[i] = xy + per * i;
    }
    struct lens lens;
    memset(out, 0, sizeof *out);
    if (n >= 3) {
        if ((rc = lens_calibrate(views, n, cols, rows, square_mm, &lens, e)))
            goto fail;
        if (!lensmodel_holds(&lens.m, frames[0]->w, frames[0]->h)) {
            rc = err_set(e, ST_ERANGE,
                         "the fitted lens (k1 %g, k2 %g) cannot be undone over the %dx%d frame: "
                         "take views with the target also near the corners",
                         lens.m.k1, lens.m.k2, frames[0]->w, frames[0]->h);
            goto fail;
        }
        out->has_lens = 1;
        out->lens = lens.m;
        out->lens_rms_px = lens.rms_px;
        out->lens_corrected = 1;
    }
    struct scale_fit f;
    if ((rc = scale_fit_view(xy, cols, rows, square_mm, frames[0]->w, frames[0]->h,
                             n >= 3 ? &lens : NULL, &f, e)))
        goto fail;
    if (f.worst_px > max_error_px) {
        rc = err_set(e, ST_ERANGE,
                     "%s: worst reprojection error %.3f px (RMS %.3f px) exceeds the limit %.3f "
                     "px: the target is not flat, the lens bends too much, or corners are wrong",
                     names[0], f.worst_px, f.rms_px, max_error_px);
        goto fail;
    }
    out->format = CALFILE_FORMAT;
    out->width = frames[0]->w;
    out->height = frames[0]->h;
    out->mm_per_px_x = f.mm_per_px_x;
    out->mm_per_px_y = f.mm_per_px_y;
    memcpy(out->image_to_plane, f.image_to_plane, sizeof f.image_to_plane);
    out->tilt_deg = f.tilt_deg;
    out->rms_px = f.rms_px;
    out->worst_px = f.worst_px;
    out->rms_mm = f.rms_mm;
    out->worst_mm = f.worst_mm;
    out->board_cols = cols;
    out->board_rows = rows;
    out->square_mm = square_mm;
    out->views = n;
fail:
    free(xy);
    return rc;
}
