#include "flat.h"

#include <math.h>
#include <stdlib.h>
#include <string.h>
#include <time.h>

#include "core/calfile.h"
#include "core/filters.h"

#define MARGIN 0.05
#define MAX_SATURATED 0.001
#define MIN_WHITE 8.0f

/* plane = G_sigma * plane, in place; tmp holds w*h floats. */
static int smooth(float *plane, int w, int h, double sigma, float *tmp, struct err *e)
{
    int r = filt_gauss_radius(sigma);
    float *k = malloc((size_t)(r + 1) * sizeof *k);
    float *pad = malloc((size_t)(w + 2 * r) * sizeof *pad);
    const float **src = malloc((size_t)(2 * r + 1) * sizeof *src);
    if (!k || !pad || !src) {
        free(k);
        free(pad);
        free(src);
        return err_set(e, ST_ENOMEM, "out of memory smoothing a %dx%d field", w, h);
    }
    filt_gauss_kernels(sigma, r, k, NULL, NULL);
    for (int y = 0; y < h; y++) {
        filt_pad_row(plane + (size_t)y * w, w, r, pad);
        filt_sources_row(pad, r, r, src);
        filt_sym(src, k, r, w, tmp + (size_t)y * w);
    }
    for (int y = 0; y < h; y++) {
        filt_sources_col(tmp, w, h, y, r, src);
        filt_sym(src, k, r, w, plane + (size_t)y * w);
    }
    free(k);
    free(pad);
    free(src);
    return ST_OK;
}

/* planes[c] = mean over the frames of channel c (1-channel frames are grey). */
static void mean_frames(struct image *const *img, int n, float *planes[3])
{
    const size_t npx = (size_t)img[0]->w * img[0]->h;
    for (int c = 0; c < 3; c++)
        for (size_t p = 0; p < npx; p++) {
            double s = 0;
            for (int i = 0; i < n; i++)
                s += img[i]->px[p * img[i]->channels + (img[i]->channels == 3 ? c : 0)];
            planes[c][p] = (float)(s / n);
        }
}

/* (max - min) / mean of the smoothed grey over the central region. */
static double spread(const float *grey, int w, int h)
{
    int mx = (int)(MARGIN * w), my = (int)(MARGIN * h);
    double lo = INFINITY, hi = -INFINITY, sum = 0;
    size_t n = 0;
    for (int y = my; y < h - my; y++)
        for (int x = mx; x < w - mx; x++) {
            double v = grey[(size_t)y * w + x];
            lo = v < lo ? v : lo;
            hi = v > hi ? v : hi;
            sum += v;
            n++;
        }
    return sum > 0 ? (hi - lo) / (sum / n) : INFINITY;
}

int flat_measure_nonuniformity(const struct image *img, double sigma, double *out, struct err *e)
{
    const size_t npx = (size_t)img->w * img->h;
    float *grey = malloc(npx * sizeof *grey), *tmp = malloc(npx * sizeof *tmp);
    int rc = ST_OK;
    if (!grey || !tmp) {
        rc = err_set(e, ST_ENOMEM, "out of memory for a %dx%d frame", img->w, img->h);
        goto fail;
    }
    for (size_t p = 0; p < npx; p++) {
        const uint8_t *v = img->px + p * img->channels;
        grey[p] = img->channels == 3 ? 0.299f * v[0] + 0.587f * v[1] + 0.114f * v[2] : v[0];
    }
    if ((rc = smooth(grey, img->w, img->h, sigma, tmp, e)))
        goto fail;
    *out = spread(grey, img->w, img->h);
fail:
    free(grey);
    free(tmp);
    return rc;
}

static int check_frames(struct image *const *img, const char *const *names, int n, int w, int h,
                        int white, struct err *e)
{
    for (int i = 0; i < n; i++) {
        if (img[i]->w != w || img[i]->h != h)
            return err_set(e, ST_EINVAL, "%s: frame is %dx%d, the first white frame %dx%d",
                           names[i], img[i]->w, img[i]->h, w, h);
        if (!white)
            continue;
        size_t npx = (size_t)w * h, sat = 0;
        for (size_t k = 0; k < npx * img[i]->channels; k++)
            sat += img[i]->px[k] == 255;
        if (sat > MAX_SATURATED * npx)
            return err_set(e, ST_ERANGE,
                           "%s: %.2f%% of the white target is saturated (at most %.1f%%): lower "
                           "the exposure or the light", names[i], 100.0 * sat / npx,
                           100 * MAX_SATURATED);
    }
    return ST_OK;
}

/* The mean white frame corrected by f, rounded to 8 bits as inspection sees it. */
static int corrected_spread(const struct flat_field *f, float *const w3[3], double sigma,
                            double *out, struct err *e)
{
    struct image *mean = image_new(f->w, f->h, 3, e), *fixed = image_new(f->w, f->h, 3, e);
    int rc = mean && fixed ? ST_OK : e->code;
    for (size_t p = 0; !rc && p < (size_t)f->w * f->h; p++)
        for (int c = 0; c < 3; c++) {
            float v = w3[c][p] + 0.5f;
            mean->px[p * 3 + c] = v >= 255.0f ? 255 : (uint8_t)v;
        }
    if (!rc && !(rc = flatfield_apply(f, mean, fixed, e)))
        rc = flat_measure_nonuniformity(fixed, sigma, out, e);
    image_free(mean);
    image_free(fixed);
    return rc;
}

int flat_compute(struct image *const *white, const char *const *white_names, int nwhite,
                 struct image *const *dark, const char *const *dark_names, int ndark,
                 double sigma, struct flat_field **out, struct err *e)
{
    *out = NULL;
    if (nwhite < 1)
        return err_set(e, ST_EINVAL, "no white frames");
    if (!(sigma >= 0.5 && sigma <= 200))
        return err_set(e, ST_ERANGE, "smoothing sigma %g px outside [0.5, 200]", sigma);
    const int w = white[0]->w, h = white[0]->h;
    const size_t npx = (size_t)w * h;
    int rc;
    if ((rc = check_frames(white, white_names, nwhite, w, h, 1, e)) ||
        (rc = check_frames(dark, dark_names, ndark, w, h, 0, e)))
        return rc;
    struct flat_field *f = flatfield_new(w, h, ndark > 0, e);
    float *buf = malloc(7 * npx * sizeof *buf);
    if (!f || !buf) {
        rc = f ? err_set(e, ST_ENOMEM, "out of memory for %dx%d planes", w, h) : e->code;
        goto fail;
    }
    float *wp[3] = {buf, buf + npx, buf + 2 * npx}, *dp[3] = {buf + 3 * npx, buf + 4 * npx,
                                                             buf + 5 * npx};
    float *tmp = buf + 6 * npx;
    mean_frames(white, nwhite, wp);
    if (ndark)
        mean_frames(dark, ndark, dp);
    for (int c = 0; c < 3; c++) {
        if ((rc = smooth(wp[c], w, h, sigma, tmp, e)) ||
            (ndark && (rc = smooth(dp[c], w, h, sigma, tmp, e))))
            goto fail;
        double sum = 0;
        for (size_t p = 0; p < npx; p++)
            sum += wp[c][p] - (ndark ? dp[c][p] : 0.0f);
        const double mean = sum / npx;
        for (size_t p = 0; p < npx; p++) {
            float d = ndark ? dp[c][p] : 0.0f, v = wp[c][p] - d;
            if (!(v >= MIN_WHITE && v * FLATFIELD_MAX_GAIN >= mean)) {
                rc = err_set(e, ST_ERANGE,
                             "%s: white field at pixel (%zu, %zu) is %.1f of a mean %.1f above "
                             "dark: light off, target missing or falloff too steep",
                             white_names[0], p % w, p / w, v, mean);
                goto fail;
            }
            f->gain[p * 3 + c] = (float)(mean / v);
            if (ndark)
                f->offset[p * 3 + c] = d;
        }
    }
    f->sigma = sigma;
    f->white_frames = nwhite;
    f->dark_frames = ndark;
    calfile_format_time((long long)time(NULL), f->created, sizeof f->created);
    /* before: the mean white frame as the camera saw it (no dark subtracted) */
    for (size_t p = 0; p < npx; p++)
        tmp[p] = 0.299f * wp[0][p] + 0.587f * wp[1][p] + 0.114f * wp[2][p];
    f->nonuniformity_before = spread(tmp, w, h);
    if ((rc = corrected_spread(f, wp, sigma, &f->nonuniformity_after, e)))
        goto fail;
    *out = f;
    f = NULL;
fail:
    flatfield_free(f);
    free(buf);
    return rc;
}
